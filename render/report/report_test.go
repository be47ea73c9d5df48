package report_test

import (
	"bytes"
	"encoding/base64"
	"encoding/json"
	"errors"
	"flag"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf8"

	"golang.org/x/net/html"
	"golang.org/x/net/html/atom"

	"github.com/regdrift/regdrift/render"
	"github.com/regdrift/regdrift/render/report"
)

// voidElements have no end tag (HTML Living Standard, 13.1.2, "void elements").
var voidElements = map[string]bool{"area": true, "base": true, "br": true, "col": true, "embed": true, "hr": true,
	"img": true, "input": true, "link": true, "meta": true, "source": true, "track": true, "wbr": true}

// TestWellFormed tokenises the page and checks what a lenient parser would
// forgive: every element the writer opens it closes, in order, and the
// tokenizer meets no error before the end.
func TestWellFormed(t *testing.T) {
	page := writeDoc(t, testDocument(t))
	z := html.NewTokenizer(bytes.NewReader(page))
	var stack []string
	for {
		tt := z.Next()
		if tt == html.ErrorToken {
			if z.Err() != io.EOF {
				t.Fatalf("tokenizer: %v", z.Err())
			}
			break
		}
		name, _ := z.TagName()
		switch tt {
		case html.StartTagToken:
			if !voidElements[string(name)] {
				stack = append(stack, string(name))
			}
		case html.EndTagToken:
			if len(stack) == 0 || stack[len(stack)-1] != string(name) {
				t.Fatalf("</%s> closes %v", name, stack)
			}
			stack = stack[:len(stack)-1]
		case html.SelfClosingTagToken:
			if !voidElements[string(name)] {
				t.Errorf("<%s/> is not a void element", name)
			}
		}
	}
	if len(stack) > 0 {
		t.Fatalf("left open: %v", stack)
	}
	if !bytes.HasPrefix(page, []byte("<!DOCTYPE html>\n")) {
		t.Errorf("page does not start with the doctype: %q", page[:min(40, len(page))])
	}
}

// parse parses the page with golang.org/x/net/html, the reference parser
// of the HTML Living Standard's tree construction for Go.
func parse(t testing.TB, page []byte) *html.Node {
	t.Helper()
	doc, err := html.Parse(bytes.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	return doc
}

func findAll(n *html.Node, a atom.Atom) []*html.Node {
	var out []*html.Node
	for c := range n.Descendants() {
		if c.Type == html.ElementNode && c.DataAtom == a {
			out = append(out, c)
		}
	}
	return out
}

func attr(n *html.Node, key string) (string, bool) {
	for _, a := range n.Attr {
		if a.Key == key {
			return a.Val, true
		}
	}
	return "", false
}

func hasClass(n *html.Node, class string) bool {
	v, _ := attr(n, "class")
	return strings.Contains(" "+v+" ", " "+class+" ")
}

func text(n *html.Node) string {
	var b strings.Builder
	for c := range n.Descendants() {
		if c.Type == html.TextNode {
			b.WriteString(c.Data)
		}
	}
	return b.String()
}

// TestSelfContained checks that nothing on the page refers to anything
// outside it, that every picture is a PNG data URI that decodes to the size
// the markup gives, with alt text, and that every table has header cells.
func TestSelfContained(t *testing.T) {
	doc := parse(t, writeDoc(t, testDocument(t)))
	for n := range doc.Descendants() {
		if n.Type != html.ElementNode {
			continue
		}
		for _, a := range n.Attr {
			if a.Key == "src" || a.Key == "href" {
				if !strings.HasPrefix(a.Val, "data:") && !strings.HasPrefix(a.Val, "#") {
					t.Errorf("<%s %s=%q> refers outside the page", n.Data, a.Key, a.Val)
				}
			}
		}
		if n.DataAtom == atom.Link {
			t.Errorf("<link> on the page")
		}
		if n.DataAtom == atom.Script {
			if _, ok := attr(n, "src"); ok {
				t.Errorf("external script")
			}
		}
	}
	imgs := findAll(doc, atom.Img)
	if len(imgs) != 2 {
		t.Fatalf("%d images, want 2", len(imgs))
	}
	for _, img := range imgs {
		alt, _ := attr(img, "alt")
		if strings.TrimSpace(alt) == "" {
			t.Errorf("image without alt text")
		}
		src, _ := attr(img, "src")
		b64, ok := strings.CutPrefix(src, "data:image/png;base64,")
		if !ok {
			t.Fatalf("image src %.40q is not a PNG data URI", src)
		}
		raw, err := base64.StdEncoding.DecodeString(b64)
		if err != nil {
			t.Fatal(err)
		}
		im, err := png.Decode(bytes.NewReader(raw))
		if err != nil {
			t.Fatalf("image %q: %v", alt, err)
		}
		w, _ := attr(img, "width")
		h, _ := attr(img, "height")
		if b := im.Bounds(); w != itoa(b.Dx()) || h != itoa(b.Dy()) {
			t.Errorf("image %q: markup says %sx%s, picture is %v", alt, w, h, b.Size())
		}
	}
	for _, tab := range findAll(doc, atom.Table) {
		if len(findAll(tab, atom.Thead)) != 1 || len(findAll(tab, atom.Th)) == 0 {
			t.Errorf("table without a header row")
		}
	}
	// Section headings in order, each section with an id.
	var got []string
	for _, s := range findAll(doc, atom.Section) {
		if id, _ := attr(s, "id"); id == "" {
			t.Errorf("section without an id")
		}
		got = append(got, text(findAll(s, atom.H2)[0]))
	}
	if strings.Join(got, "|") != strings.Join(testSectionTitles, "|") {
		t.Errorf("sections %q, want %q", got, testSectionTitles)
	}
}

func itoa(v int) string {
	b, _ := json.Marshal(v)
	return string(b)
}

// TestVerbatimExact checks that a parser gets back each text byte for byte
// from the <pre>, and that the save link holds the same bytes.
func TestVerbatimExact(t *testing.T) {
	cases := []struct {
		name string
		text string
	}{
		{"empty", ""},
		{"leading newline", "\n\nx = 1\n"},
		{"CR LF and lone CR", "a = 1\r\nb = 2\rc = 3\r\n"},
		{"markup", "</pre></details><script>alert(1)</script><!-- x -->"},
		{"entities", "&amp; &lt; &#13; &nbsp; & < > \" '"},
		{"tab and unicode", "\tµm ± 0.5 mil — ok\n"},
		{"no final newline", "last = true"},
		{"job", string(testJob)},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := &report.Document{Title: "t", Sections: []report.Section{{Title: "Job", Blocks: []report.Block{&report.Verbatim{Name: "job.toml", Text: []byte(c.text)}}}}}
			doc := parse(t, writeDoc(t, d))
			pres := findAll(doc, atom.Pre)
			if len(pres) != 1 {
				t.Fatalf("%d <pre>", len(pres))
			}
			if got := text(pres[0]); got != c.text {
				t.Errorf("<pre> gives back %q, want %q", got, c.text)
			}
			var href string
			for _, a := range findAll(doc, atom.A) {
				if v, _ := attr(a, "download"); v == "job.toml" {
					href, _ = attr(a, "href")
				}
			}
			b64, ok := strings.CutPrefix(href, "data:text/plain;charset=utf-8;base64,")
			if !ok {
				t.Fatalf("save link %q", href)
			}
			raw, err := base64.StdEncoding.DecodeString(b64)
			if err != nil || string(raw) != c.text {
				t.Errorf("save link holds %q (%v), want %q", raw, err, c.text)
			}
		})
	}
}

// FuzzVerbatim checks that any UTF-8 text without NUL comes back from the
// page's <pre> byte for byte.
func FuzzVerbatim(f *testing.F) {
	for _, s := range []string{"", "\n", "\r\n\r", "</pre>", "&#13;&amp;", string(testJob), string(testInclude), "\x0c\x01\t"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		v := &report.Verbatim{Name: "f", Text: []byte(s)}
		d := &report.Document{Title: "t", Sections: []report.Section{{Title: "F", Blocks: []report.Block{v}}}}
		var buf bytes.Buffer
		if err := d.Write(&buf); err != nil {
			t.Fatal(err)
		}
		doc, err := html.Parse(&buf)
		if err != nil {
			t.Fatal(err)
		}
		got := text(findAll(doc, atom.Pre)[0])
		if !utf8.ValidString(s) || strings.ContainsRune(s, 0) {
			return // shown with replacement characters; the save link is exact
		}
		if got != s {
			t.Errorf("<pre> gives back %q, want %q", got, s)
		}
	})
}

// mapData returns the JSON embedded beside the first panel map.
type mapJSON struct {
	Width, Height int
	Area          [4]float64
	Fields        []report.Field
	Sites         [][]any
}

func embeddedMap(t testing.TB, doc *html.Node) mapJSON {
	t.Helper()
	for _, s := range findAll(doc, atom.Script) {
		if hasClass(s, "map-data") {
			var m mapJSON
			if err := json.Unmarshal([]byte(text(s)), &m); err != nil {
				t.Fatal(err)
			}
			return m
		}
	}
	t.Fatal("no map data on the page")
	return mapJSON{}
}

// TestMapData checks the embedded site data: names and values as given,
// and each site at the pixel where render drew it.
func TestMapData(t *testing.T) {
	doc := parse(t, writeDoc(t, testDocument(t)))
	m := embeddedMap(t, doc)
	_, v := testMap(t, 600)
	if len(m.Sites) != len(testSites) || len(m.Fields) != len(testFields) {
		t.Fatalf("%d sites, %d fields", len(m.Sites), len(m.Fields))
	}
	// pixelTol: positions are embedded to a tenth of a pixel, so a rounding
	// error is at most half of that; twice it, for the float arithmetic.
	const pixelTol = 0.1
	for i, s := range testSites {
		row := m.Sites[i]
		x, y := v.Pixel(s.at)
		if row[0] != s.name || math.Abs(row[1].(float64)-x) > pixelTol || math.Abs(row[2].(float64)-y) > pixelTol {
			t.Errorf("site %d: %v, want %s at (%.2f, %.2f)", i, row[:3], s.name, x, y)
		}
		for k, want := range s.values {
			if row[3+k] != want {
				t.Errorf("site %s field %d: %v, want %q", s.name, k, row[3+k], want)
			}
		}
	}
	a := v.Area()
	if m.Area[0] != float64(a.Min.X) || m.Area[1] != float64(a.Min.Y) || m.Area[2] != float64(a.Max.X) || m.Area[3] > float64(a.Max.Y) {
		t.Errorf("area %v, view area %v", m.Area, a)
	}
}

// TestMapDataEscaped checks that a site name with markup cannot end the
// <script> element that holds the data.
func TestMapDataEscaped(t *testing.T) {
	mapPNG, v := testMap(t, 300)
	name := `</script><script>alert("x")</script>&amp;`
	d := &report.Document{Title: "t", Sections: []report.Section{{Title: "Map", Blocks: []report.Block{&report.PanelMap{
		PNG: mapPNG, Alt: "map", Transform: report.ViewTransform(v),
		Fields: []report.Field{{Label: "note"}}, Sites: []report.Site{{Name: name, Values: []string{"</script>"}}}}}}}}
	page := writeDoc(t, d)
	doc := parse(t, page)
	if n := len(findAll(doc, atom.Script)); n != 2 { // the data and the page script
		t.Fatalf("%d script elements, want 2", n)
	}
	m := embeddedMap(t, doc)
	if m.Sites[0][0] != name || m.Sites[0][3] != "</script>" {
		t.Errorf("site data %v", m.Sites[0])
	}
}

// TestTransform checks Transform against render.View.Pixel, which drew the
// map, and that Point inverts Pixel.
func TestTransform(t *testing.T) {
	_, v := testMap(t, 700)
	tr := report.ViewTransform(v)
	ext := v.Extent()
	// tol: both are a handful of float64 operations on pixel coordinates
	// below 10^3; 1e-9 pixel is many orders above their rounding.
	const tol = 1e-9
	for _, fx := range []float64{0, 0.13, 0.5, 0.77, 1} {
		for _, fy := range []float64{0, 0.31, 0.5, 1} {
			p := render.Point{X: ext.Min.X + fx*ext.Dx(), Y: ext.Min.Y + fy*ext.Dy()}
			x, y := tr.Pixel(p)
			wx, wy := v.Pixel(p)
			if math.Abs(x-wx) > tol || math.Abs(y-wy) > tol {
				t.Errorf("Pixel(%v) = (%g, %g), view draws it at (%g, %g)", p, x, y, wx, wy)
			}
			q := tr.Point(x, y)
			if math.Abs(q.X-p.X) > tol*ext.Dx() || math.Abs(q.Y-p.Y) > tol*ext.Dy() {
				t.Errorf("Point(Pixel(%v)) = %v", p, q)
			}
		}
	}
	// Without FlipY, the panel's bottom edge is at the top of the pixels.
	up := report.Transform{Panel: render.Rect{Max: render.Point{X: 1, Y: 1}}, Pixels: render.Rect{Max: render.Point{X: 10, Y: 20}}}
	if x, y := up.Pixel(render.Point{X: 0.5, Y: 0}); x != 5 || y != 0 {
		t.Errorf("unflipped (0.5, 0) at (%g, %g), want (5, 0)", x, y)
	}
	up.FlipY = true
	if x, y := up.Pixel(render.Point{X: 0.5, Y: 0}); x != 5 || y != 20 {
		t.Errorf("flipped (0.5, 0) at (%g, %g), want (5, 20)", x, y)
	}
}

// TestIncomplete checks that a document with a mistake is refused with an
// *Error naming the section and block, and that nothing is written.
func TestIncomplete(t *testing.T) {
	mapPNG, v := testMap(t, 300)
	good := testPlot(t)
	one := func(b report.Block) *report.Document {
		return &report.Document{Title: "t", Sections: []report.Section{{Title: "S", Blocks: []report.Block{report.Paragraph("ok"), b}}}}
	}
	cases := []struct {
		name string
		doc  *report.Document
		want string
	}{
		{"no title", &report.Document{}, "no title"},
		{"section without title", &report.Document{Title: "t", Sections: []report.Section{{}}}, "section 1 has no title"},
		{"duplicate id", &report.Document{Title: "t", Sections: []report.Section{{Title: "A b"}, {Title: "a-B"}}}, `id "a-b" used twice`},
		{"figure without alt", one(&report.Figure{PNG: good}), "no alt text"},
		{"figure not a PNG", one(&report.Figure{PNG: []byte("GIF89a, not a PNG at all"), Alt: "x"}), "png: invalid format"},
		{"row length", one(&report.Table{Columns: []report.Column{{Label: "a"}, {Label: "b"}}, Rows: [][]string{{"1"}}}), "row 1 has 1 cells for 2 columns"},
		{"numeric column without unit", one(&report.Table{Columns: []report.Column{{Label: "a", Numeric: true}}}), "no unit"},
		{"headline number without unit", one(&report.Headline{Items: []report.Item{{Label: "margin", Value: "-0.25"}}}), "has no unit"},
		{"verbatim without name", one(&report.Verbatim{Text: []byte("x")}), "no name"},
		{"map without transform", one(&report.PanelMap{PNG: mapPNG, Alt: "m"}), "maps no area"},
		{"map site values", one(&report.PanelMap{PNG: mapPNG, Alt: "m", Transform: report.ViewTransform(v),
			Fields: []report.Field{{Label: "a", Unit: "dB"}}, Sites: []report.Site{{Name: "s1"}}}), `site "s1" has 0 values for 1 fields`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var buf bytes.Buffer
			err := c.doc.Write(&buf)
			var re *report.Error
			if !errors.As(err, &re) || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v, want a *report.Error with %q", err, c.want)
			}
			if len(c.doc.Sections) > 0 && c.doc.Sections[0].Blocks != nil && re.Block != 2 {
				t.Errorf("error names block %d, want 2: %v", re.Block, err)
			}
			if buf.Len() > 0 {
				t.Errorf("wrote %d bytes", buf.Len())
			}
		})
	}
}

// saveDir, when set with -save DIR, receives the test report, for looking at it.
var saveDir = flag.String("save", "", "write the test report into this directory")

func writeDoc(t testing.TB, d *report.Document) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := d.Write(&buf); err != nil {
		t.Fatal(err)
	}
	if *saveDir != "" {
		name := filepath.Join(*saveDir, strings.ReplaceAll(t.Name(), "/", "_")+".html")
		if err := os.WriteFile(name, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return buf.Bytes()
}
