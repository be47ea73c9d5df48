package report_test

import (
	"bytes"
	"fmt"
	"image/color"
	"io"
	"math/rand/v2"
	"testing"

	"github.com/regdrift/regdrift/render"
	"github.com/regdrift/regdrift/render/report"
)

// countingWriter counts the bytes written through it.
type countingWriter struct{ n int64 }

func (w *countingWriter) Write(p []byte) (int, error) { w.n += int64(len(p)); return len(p), nil }

// BenchmarkPanelMap10k writes a report whose panel map has 10,000 sites on
// a 1600-pixel map, with a table of the ten worst, and reports the page size.
// The sites and their values are invented (a fixed seed).
func BenchmarkPanelMap10k(b *testing.B) {
	const n = 10000
	panel := render.Centered(18*in, 24*in)
	m := render.NewMap(render.MapSpec{Width: 1600, Extent: panel, Title: []string{"Invented 10,000-site panel"}})
	v := m.Views[0]
	v.Field(panel, func(x, y float64) float64 { return x*y*1e3 + x }, render.Diverging, -0.5, 0.5)
	rng := rand.New(rand.NewPCG(1, 2))
	pm := &report.PanelMap{Alt: "invented panel", Transform: report.ViewTransform(v), Fields: testFields}
	var pts []render.Point
	for i := range n {
		p := render.Point{X: (rng.Float64() - 0.5) * 16 * in, Y: (rng.Float64() - 0.5) * 22 * in}
		pts = append(pts, p)
		off := rng.NormFloat64()
		pm.Sites = append(pm.Sites, report.Site{Name: fmt.Sprintf("M%03d.%02d.H%d", i/40, (i/2)%20, i%2+1), At: p, Values: []string{
			fmt.Sprintf("%.2f, %.2f", p.X/in, p.Y/in), fmt.Sprintf("%+.3f ± %.3f", off, 0.2+0.1*rng.Float64()),
			fmt.Sprintf("%.4f", -3-0.05*off*off), fmt.Sprintf("%+.4f", -0.05*off*off), fmt.Sprintf("%.4f", 0.25-0.05*off*off),
			fmt.Sprintf("%.2f", 100*rng.Float64())}})
	}
	v.Dots(pts, 2, color.Black)
	m.ColorBar(render.Diverging, -0.5, 0.5, "drift [dB]")
	var png bytes.Buffer
	if err := m.EncodePNG(&png); err != nil {
		b.Fatal(err)
	}
	pm.PNG = png.Bytes()
	cols := []report.Column{{Label: "site"}}
	for _, f := range testFields {
		cols = append(cols, report.Column{Label: f.Label, Unit: f.Unit, Numeric: true})
	}
	var rows [][]string
	for _, s := range pm.Sites[:10] {
		rows = append(rows, append([]string{s.Name}, s.Values...))
	}
	doc := &report.Document{Title: "Invented", Sections: []report.Section{{Title: "Panel map", Blocks: []report.Block{
		pm, &report.Table{Columns: cols, Rows: rows, RowHeaders: true}}}}}
	b.ReportAllocs()
	var size int64
	for b.Loop() {
		var w countingWriter
		if err := doc.Write(&w); err != nil {
			b.Fatal(err)
		}
		size = w.n
	}
	b.ReportMetric(float64(size)/1e6, "MB/page")
	b.ReportMetric(float64(len(pm.PNG))/1e6, "MB/png")
	_ = io.Discard
}
