package report

import (
	"bufio"
	"bytes"
	_ "embed"
	"errors"
	"fmt"
	"html/template"
	"io"
	"regexp"
	"strings"
)

// Document is a whole report. Title is required; the zero value of every
// other field is usable.
type Document struct {
	// Title is the page title and the first heading.
	Title string
	// Subtitle, if given, is printed under the title (for example the job
	// file and the date).
	Subtitle string
	// Lang is the language of the text, as an HTML lang attribute; "" means "en".
	Lang string
	// Generator, if given, names the program that wrote the report, in a
	// <meta name="generator"> and in the page footer.
	Generator string
	// Sections are printed in this order, each starting on a new page in print.
	Sections []Section
}

// Section is one part of the report with its own heading.
type Section struct {
	// ID is the fragment identifier of the section (the contents link to
	// "#ID"); "" derives one from Title. IDs must be unique in a document.
	ID string
	// Title is the section heading; required.
	Title string
	// Blocks are the section's contents, in order.
	Blocks []Block
}

// A Block is one piece of a section's contents: *Headline, Paragraph,
// Subheading, List, *Figure, *Table, *Verbatim or *PanelMap. The set is
// closed; a new kind of content is a new type in this package.
type Block interface {
	// block checks the block and returns the name of the template that
	// draws it and the data to execute the template with.
	block() (name string, data any, err error)
}

// Paragraph is a paragraph of plain text.
type Paragraph string

func (p Paragraph) block() (string, any, error) { return "paragraph", p, nil }

// Subheading is a heading inside a section, such as the name of one of
// several cross-sections.
type Subheading string

func (s Subheading) block() (string, any, error) {
	if strings.TrimSpace(string(s)) == "" {
		return "", nil, errors.New("empty subheading")
	}
	return "subheading", s, nil
}

// List is a bulleted list of plain-text items (assumptions, cautions).
type List []string

func (l List) block() (string, any, error) { return "list", l, nil }

// Error is the error of a Document that cannot be written: a programmer's
// mistake in building it (a figure without alt text, a table row of the
// wrong length), named by its section and block.
type Error struct {
	Section string // the section's title, "" for the document itself
	Block   int    // 1-based index of the block in its section, 0 for none
	Err     error
}

func (e *Error) Error() string {
	switch {
	case e.Section == "":
		return "report: " + e.Err.Error()
	case e.Block == 0:
		return fmt.Sprintf("report: section %q: %v", e.Section, e.Err)
	}
	return fmt.Sprintf("report: section %q, block %d: %v", e.Section, e.Block, e.Err)
}

func (e *Error) Unwrap() error { return e.Err }

//go:embed style.css
var styleSheet string

//go:embed page.js
var pageScript string

//go:embed page.html
var pageTemplate string

var page = template.Must(template.New("page").Funcs(template.FuncMap{
	"verbatim": verbatimHTML,
}).Parse(pageTemplate))

// pageData is what the page template is executed with.
type pageData struct {
	*Document
	Lang     string
	CSS      template.CSS
	JS       template.JS
	Sections []sectionData
	Contents bool
}

type sectionData struct {
	ID, Title string
	Blocks    []template.HTML
}

var idChars = regexp.MustCompile(`[^a-z0-9]+`)

// slug derives a fragment identifier from a title: lower case ASCII
// letters and digits joined by hyphens.
func slug(title string) string {
	s := strings.Trim(idChars.ReplaceAllString(strings.ToLower(title), "-"), "-")
	if s == "" {
		s = "section"
	}
	return s
}

// Write writes the document as one HTML file to w. It returns an *Error,
// and writes nothing, if the document is not complete: a missing title, a
// figure without alt text or with a picture that is not a PNG, a table row
// whose length differs from the header, a map site with the wrong number of
// values, or two sections with one ID.
func (d *Document) Write(w io.Writer) error {
	if strings.TrimSpace(d.Title) == "" {
		return &Error{Err: errors.New("document has no title")}
	}
	pd := pageData{Document: d, Lang: d.Lang, Contents: len(d.Sections) > 2,
		CSS: template.CSS(styleSheet), JS: template.JS(pageScript)}
	if pd.Lang == "" {
		pd.Lang = "en"
	}
	ids := map[string]bool{}
	maps := 0
	var buf bytes.Buffer
	for _, s := range d.Sections {
		if strings.TrimSpace(s.Title) == "" {
			return &Error{Err: fmt.Errorf("section %d has no title", len(pd.Sections)+1)}
		}
		sd := sectionData{ID: s.ID, Title: s.Title}
		if sd.ID == "" {
			sd.ID = slug(s.Title)
		}
		if ids[sd.ID] {
			return &Error{Section: s.Title, Err: fmt.Errorf("section id %q used twice", sd.ID)}
		}
		ids[sd.ID] = true
		for k, b := range s.Blocks {
			if pm, ok := b.(*PanelMap); ok {
				maps++
				if pm.ID == "" {
					// A copy, so that writing does not change the caller's block.
					c := *pm
					c.ID = fmt.Sprintf("%s-map-%d", sd.ID, maps)
					b = &c
				}
			}
			name, data, err := b.block()
			if err != nil {
				return &Error{Section: s.Title, Block: k + 1, Err: err}
			}
			buf.Reset()
			if err := page.ExecuteTemplate(&buf, name, data); err != nil {
				return &Error{Section: s.Title, Block: k + 1, Err: err}
			}
			sd.Blocks = append(sd.Blocks, template.HTML(buf.String()))
		}
		pd.Sections = append(pd.Sections, sd)
	}
	bw := bufio.NewWriterSize(w, 1<<16)
	if err := page.ExecuteTemplate(bw, "page", pd); err != nil {
		return err
	}
	return bw.Flush()
}
