package report_test

import (
	"bytes"
	"fmt"
	"image/color"
	"testing"

	"github.com/regdrift/regdrift/render"
	"github.com/regdrift/regdrift/render/report"
)

// The synthetic report of these tests: invented sites on an invented panel,
// drawn with the render package. Nothing here is a reference value; the
// tests check that the page shows what it was given, where it was drawn.

const in = 0.0254 // metres per inch, exact (international inch of 1959)

// testSite is one invented site with its values as the page should show them.
type testSite struct {
	name   string
	at     render.Point
	values []string
}

var testFields = []report.Field{
	{Label: "position", Unit: "in"},
	{Label: "offset ± σ", Unit: "mil"},
	{Label: "coupling", Unit: "dB"},
	{Label: "drift", Unit: "dB"},
	{Label: "margin", Unit: "dB"},
	{Label: "in spec", Unit: "%"},
}

// testSites lie far enough apart on the 600-pixel map that a click on one
// is nearest to it.
var testSites = []testSite{
	{"M1.H1", render.Point{X: -4 * in, Y: -6 * in}, []string{"-4.00, -6.00", "+0.412 ± 0.210", "-3.0412", "-0.0412", "0.2088", "99.21"}},
	{"M2.H1", render.Point{X: 4 * in, Y: -6 * in}, []string{"4.00, -6.00", "-0.380 ± 0.205", "-3.0355", "-0.0355", "0.2145", "99.47"}},
	{"M3.H2", render.Point{X: -4 * in, Y: 6 * in}, []string{"-4.00, 6.00", "+1.250 ± 0.330", "-3.3020", "-0.3020", "-0.0520", "31.80"}},
	{"M4.H2", render.Point{X: 4.5 * in, Y: 7 * in}, []string{"4.50, 7.00", "-0.020 ± 0.190", "-3.0001", "-0.0001", "0.2499", "99.99"}},
	{"CTR", render.Point{X: 0, Y: 0}, []string{"0.00, 0.00", "+0.000 ± 0.150", "-3.0000", "+0.0000", "0.2500", "99.99"}},
}

// testJob is an invented job file with the characters an HTML page could
// mangle: markup, entities, a CR LF line, a lone CR, a tab and a leading newline.
var testJob = []byte("\ntitle = \"Invented <b>panel</b> & \\\"test\\\" job\"\r\n" +
	"# </pre></details><script>alert(1)</script>\n" +
	"[panel]\tsize = [\"12 in\", \"18 in\"]\rborder = \"0.5 in\" # &amp; µm ±\n")

var testInclude = []byte("[[contributor]]\nname = \"invented\"\nlayers = [\"L3\"]\noffset_x = { sigma = \"0.3 mil\" }")

// testMap draws the invented panel with a dot at each test site and
// returns the PNG and the view's transform.
func testMap(t testing.TB, width int) ([]byte, *render.View) {
	panel := render.Centered(12*in, 18*in)
	m := render.NewMap(render.MapSpec{Width: width, Extent: panel, Title: []string{"Invented test panel", fmt.Sprintf("%d sites", len(testSites))}, NoColorBar: true})
	v := m.Views[0]
	v.Field(panel, func(x, y float64) float64 { return x + y }, render.Sequential, -15*in, 15*in)
	v.StrokeRect(panel, render.LineStyle{Width: 2 * m.Thin()})
	var pts []render.Point
	for _, s := range testSites {
		pts = append(pts, s.at)
	}
	v.Dots(pts, 5, color.Black)
	var buf bytes.Buffer
	if err := m.EncodePNG(&buf); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes(), v
}

// testPlot draws a small invented plot, for a plain figure.
func testPlot(t testing.TB) []byte {
	p := &render.Plot{Title: "Invented curve", XLabel: "offset [mil]", Axes: []*render.Axes{{
		YLabel: "coupling [dB]",
		Lines:  []render.Line{{Label: "coupling", X: []float64{-2, -1, 0, 1, 2}, Y: []float64{-3.4, -3.1, -3.0, -3.1, -3.4}}},
		Bands:  []render.Band{{Lo: -3.25, Hi: -2.75, Label: "spec"}},
	}}}
	var buf bytes.Buffer
	if err := p.Render(500, 300).EncodePNG(&buf); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// testSectionTitles are the sections of the test document, in order.
var testSectionTitles = []string{"Summary", "Coupling against offset", "Panel map", "Assumptions and cautions", "Job file"}

// testDocument builds the synthetic report.
func testDocument(t testing.TB) *report.Document {
	mapPNG, v := testMap(t, 600)
	pm := &report.PanelMap{PNG: mapPNG, Alt: "Invented panel with five sites drawn as black dots", Caption: "Invented test panel.",
		Transform: report.ViewTransform(v), Fields: testFields}
	var rows [][]string
	for _, s := range testSites {
		pm.Sites = append(pm.Sites, report.Site{Name: s.name, At: s.at, Values: s.values})
		rows = append(rows, append([]string{s.name}, s.values...))
	}
	cols := []report.Column{{Label: "site"}}
	for _, f := range testFields {
		cols = append(cols, report.Column{Label: f.Label, Unit: f.Unit, Numeric: true})
	}
	return &report.Document{
		Title:     "Invented test report",
		Subtitle:  "test.toml, 2026-01-01",
		Generator: "report tests",
		Sections: []report.Section{
			{Title: testSectionTitles[0], Blocks: []report.Block{
				&report.Headline{Items: []report.Item{
					{Label: "sites in spec", Value: "4 of 5", Unit: "sites", Key: "in_spec"},
					{Label: "worst margin", Value: "-0.0520", Unit: "dB", Key: "worst_margin", Note: "site M3.H2"},
					{Label: "worst section", Value: "hybrid", Key: "worst_section"},
				}},
				report.Paragraph("An invented document for the report package's tests."),
			}},
			{Title: testSectionTitles[1], Blocks: []report.Block{
				&report.Figure{PNG: testPlot(t), Alt: "Invented coupling curve with a spec band", Caption: "Invented curve."},
			}},
			{Title: testSectionTitles[2], Blocks: []report.Block{
				pm,
				&report.Table{Caption: "Every site", Columns: cols, Rows: rows, RowHeaders: true},
			}},
			{Title: testSectionTitles[3], Blocks: []report.Block{
				report.Subheading("Assumptions"),
				report.List{"Invented assumption one.", "Invented assumption two."},
				report.Subheading("Cautions"),
				report.List{"Invented caution."},
			}},
			{Title: testSectionTitles[4], Blocks: []report.Block{
				&report.Verbatim{Name: "test.toml", Text: testJob},
				&report.Verbatim{Name: "include.toml", Text: testInclude},
			}},
		},
	}
}
