package report

import (
	"bytes"
	"encoding/base64"
	"errors"
	"fmt"
	"html/template"
	"image/png"
	"strconv"
	"strings"
	"unicode/utf8"
)

// Headline is the block of key figures at the top of a report: short
// label-value pairs, each value with its unit.
type Headline struct {
	Items []Item
}

// Item is one key figure of a Headline.
type Item struct {
	// Label says what the value is ("parts in spec per panel").
	Label string
	// Value is the figure as printed ("412.7"), or text ("hybrid").
	Value string
	// Unit is the value's unit as printed after it ("dB", "%", "parts");
	// "" only for a value that is not a number.
	Unit string
	// Note, if given, is a short remark printed under the value.
	Note string
	// Key, if given, is put on the item as data-key, so that a program
	// reading the report (or a test) can find the figure.
	Key string
}

func (h *Headline) block() (string, any, error) {
	for i, it := range h.Items {
		if strings.TrimSpace(it.Label) == "" {
			return "", nil, fmt.Errorf("headline item %d has no label", i+1)
		}
		if it.Unit == "" && looksNumeric(it.Value) {
			return "", nil, fmt.Errorf("headline item %q: the number %q has no unit", it.Label, it.Value)
		}
	}
	return "headline", h, nil
}

// looksNumeric reports whether s is a bare number, such as "412.7" or
// "−3.0": a figure that needs a unit beside it.
func looksNumeric(s string) bool {
	s = strings.TrimSpace(strings.NewReplacer("−", "-", "±", "", ",", "").Replace(s))
	_, err := strconv.ParseFloat(s, 64)
	return err == nil
}

// Figure is a picture with alt text and a caption.
type Figure struct {
	// PNG is the picture, a complete PNG file; required.
	PNG []byte
	// Alt is the text that stands for the picture for a reader who cannot
	// see it; required.
	Alt string
	// Caption, if given, is printed under the picture.
	Caption string
}

// figureData is a Figure as the template draws it.
type figureData struct {
	Src           template.URL
	Width, Height int
	Alt, Caption  string
}

func (f *Figure) block() (string, any, error) {
	if strings.TrimSpace(f.Alt) == "" {
		return "", nil, errors.New("figure has no alt text")
	}
	d, err := pngData(f.PNG, f.Alt, f.Caption)
	return "figure", d, err
}

// pngData checks that b is a PNG and returns it as a data URI (RFC 2397)
// with its size in pixels.
func pngData(b []byte, alt, caption string) (figureData, error) {
	cfg, err := png.DecodeConfig(bytes.NewReader(b))
	if err != nil {
		return figureData{}, fmt.Errorf("figure %q: %w", alt, err)
	}
	// The data URI is built here from bytes that decode as a PNG, so it is
	// safe to mark as a URL for the template.
	src := template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(b))
	return figureData{Src: src, Width: cfg.Width, Height: cfg.Height, Alt: alt, Caption: caption}, nil
}

// Table is a table of text cells under a header row.
type Table struct {
	// Caption, if given, says what the table holds.
	Caption string
	// Columns are the header cells, one per column.
	Columns []Column
	// Rows are the body rows; each must have one cell per column.
	Rows [][]string
	// RowHeaders makes the first cell of each row a row header (a site's
	// or a layer's name).
	RowHeaders bool
}

// Column is one header cell of a Table.
type Column struct {
	// Label names the column ("offset").
	Label string
	// Unit is the unit of the column's numbers, printed in the header as
	// "offset [mil]"; "" for a column of text.
	Unit string
	// Numeric aligns the column's cells on the right, as figures are set.
	// A numeric column needs a Unit.
	Numeric bool
}

// Header returns the header cell's text: the label with its unit in brackets.
func (c Column) Header() string {
	if c.Unit == "" {
		return c.Label
	}
	return c.Label + " [" + c.Unit + "]"
}

func (t *Table) block() (string, any, error) {
	if len(t.Columns) == 0 {
		return "", nil, errors.New("table has no columns")
	}
	for _, c := range t.Columns {
		if strings.TrimSpace(c.Label) == "" {
			return "", nil, errors.New("table column has no label")
		}
		if c.Numeric && c.Unit == "" {
			return "", nil, fmt.Errorf("table column %q is numeric but has no unit", c.Label)
		}
	}
	for i, r := range t.Rows {
		if len(r) != len(t.Columns) {
			return "", nil, fmt.Errorf("table row %d has %d cells for %d columns", i+1, len(r), len(t.Columns))
		}
	}
	return "table", t, nil
}

// Verbatim is a text file shown exactly as it is, collapsed under its name
// until the reader opens it (and in full in print), with a link that saves
// the original bytes.
type Verbatim struct {
	// Name is the file's name as the reader knows it ("two-core.toml").
	Name string
	// Text is the file's content.
	Text []byte
	// Open shows the text without the reader having to open it.
	Open bool
}

// verbatimData is a Verbatim as the template draws it.
type verbatimData struct {
	*Verbatim
	Href         template.URL // the bytes as a data URI, for the save link
	Lines, Bytes int
	// Exact reports whether the page shows the text byte for byte: it is
	// UTF-8 without NUL bytes. Otherwise the page shows replacement
	// characters where it is not, and the link still saves the exact bytes.
	Exact bool
}

func (v *Verbatim) block() (string, any, error) {
	if strings.TrimSpace(v.Name) == "" {
		return "", nil, errors.New("verbatim text has no name")
	}
	d := verbatimData{Verbatim: v, Bytes: len(v.Text),
		Href:  template.URL("data:text/plain;charset=utf-8;base64," + base64.StdEncoding.EncodeToString(v.Text)),
		Exact: utf8.Valid(v.Text) && bytes.IndexByte(v.Text, 0) < 0}
	d.Lines = bytes.Count(v.Text, []byte{'\n'})
	if len(v.Text) > 0 && v.Text[len(v.Text)-1] != '\n' {
		d.Lines++ // a last line without a newline
	}
	return "verbatim", d, nil
}

// verbatimHTML escapes b as the content of a <pre> element so that an HTML
// parser gives back b exactly: the page template writes a newline right
// after <pre>, which the parser drops (HTML Living Standard, 13.2.6.4.7,
// "in body" insertion mode, start tag "pre"), so a leading newline of b is
// kept; carriage returns are written as character references, because the
// parser turns a literal CR or CR LF into LF before tokenising (13.2.3.5,
// "Preprocessing the input stream") but keeps a referenced one.
func verbatimHTML(b []byte) template.HTML {
	s := template.HTMLEscapeString(string(b))
	return template.HTML(strings.ReplaceAll(s, "\r", "&#13;"))
}
