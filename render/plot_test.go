package render

import (
	"fmt"
	"image"
	"io"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// TestTicks checks the 1-2-5 tick rule on hand-worked cases.
func TestTicks(t *testing.T) {
	tests := []struct {
		lo, hi float64
		max    int
		want   []float64
		step   float64
	}{
		{0, 10, 6, []float64{0, 2, 4, 6, 8, 10}, 2},
		{0, 10, 11, []float64{0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10}, 1},
		{0, 10, 3, []float64{0, 5, 10}, 5},
		{-0.33, 0.71, 6, []float64{-0.2, 0, 0.2, 0.4, 0.6}, 0.2},
		{-3.3, -2.7, 4, []float64{-3.2, -3, -2.8}, 0.2},
		{0.1, 0.3, 3, []float64{0.1, 0.2, 0.3}, 0.1},
		{-12, 12, 5, []float64{-10, -5, 0, 5, 10}, 5},
		{1.2e-6, 9.7e-6, 5, []float64{2e-6, 4e-6, 6e-6, 8e-6}, 2e-6},
		{98, 1003, 5, []float64{200, 400, 600, 800, 1000}, 200},
		{5, 5, 5, []float64{5}, 0},
	}
	for _, tt := range tests {
		t.Run(fmt.Sprintf("%g..%g/%d", tt.lo, tt.hi, tt.max), func(t *testing.T) {
			got, step := Ticks(tt.lo, tt.hi, tt.max)
			if !slices.Equal(got, tt.want) || step != tt.step {
				t.Errorf("got %v step %g, want %v step %g", got, step, tt.want, tt.step)
			}
		})
	}
	if got, _ := Ticks(1, math.NaN(), 5); got != nil {
		t.Errorf("NaN range gave %v", got)
	}
	if got, _ := Ticks(2, 1, 5); got != nil {
		t.Errorf("reversed range gave %v", got)
	}
}

func TestTicksInvariants(t *testing.T) {
	r := rand.New(rand.NewPCG(42, 0))
	for range 2000 {
		lo := (r.Float64() - 0.5) * math.Pow(10, float64(r.IntN(12)-6))
		hi := lo + r.Float64()*math.Pow(10, float64(r.IntN(12)-6))
		n := 2 + r.IntN(12)
		ticks, step := Ticks(lo, hi, n)
		if len(ticks) > n {
			t.Fatalf("Ticks(%g,%g,%d) gave %d ticks", lo, hi, n, len(ticks))
		}
		m := step / math.Pow(10, math.Floor(math.Log10(step)+1e-9))
		if math.Abs(m-1) > 1e-9 && math.Abs(m-2) > 1e-9 && math.Abs(m-5) > 1e-9 {
			t.Fatalf("step %g is not 1, 2 or 5 times a power of ten", step)
		}
		for _, v := range ticks {
			if v < lo-1e-9*step || v > hi+1e-9*step {
				t.Fatalf("tick %g outside [%g,%g]", v, lo, hi)
			}
		}
	}
}

func TestTickLabel(t *testing.T) {
	tests := []struct {
		v, step float64
		want    string
	}{
		{0, 1, "0"}, {-0.0, 0.5, "0.0"}, {2, 0.5, "2.0"}, {-1.5, 0.5, "\u22121.5"},
		{0.30000000000000004, 0.1, "0.3"}, {-1e-17, 0.1, "0.0"}, {1200, 200, "1200"}, {0.002, 0.001, "0.002"},
	}
	for _, tt := range tests {
		if got := TickLabel(tt.v, tt.step); got != tt.want {
			t.Errorf("TickLabel(%g, %g) = %q, want %q", tt.v, tt.step, got, tt.want)
		}
	}
}

// demoSweep is an invented coupling curve: a parabola in offset.
func demoSweep() *Plot {
	var x, c, z1, z2, d []float64
	for k := -50; k <= 50; k++ {
		o := float64(k) / 10
		x = append(x, o)
		c = append(c, -3.0-0.035*o*o+0.01*o)
		z1 = append(z1, 50+0.08*o*o+0.3*o)
		z2 = append(z2, 50+0.08*o*o-0.3*o)
		d = append(d, 28-0.6*o*o)
	}
	return &Plot{
		Title:  "Coupling against offset — section hybrid (demo)",
		XLabel: "offset [mil]",
		Axes: []*Axes{
			{YLabel: "coupling [dB]", Weight: 2,
				Lines:  []Line{{Label: "coupling", X: x, Y: c}},
				Bands:  []Band{{Lo: -3.25, Hi: -2.75, Label: "spec −3.00 ± 0.25 dB"}},
				VLines: []VLine{{X: -2.54, Label: "−2.54 mil"}, {X: 2.82, Label: "+2.82 mil"}}},
			{YLabel: "impedance [Ω]",
				Lines: []Line{{Label: "upper line", X: x, Y: z1}, {Label: "lower line", X: x, Y: z2, Dash: []float64{3, 2}}}},
			{YLabel: "directivity [dB]",
				Lines: []Line{{Label: "directivity", X: x, Y: d, Marker: Circle}}},
		},
	}
}

func TestPlotRender(t *testing.T) {
	p := demoSweep()
	c := p.Render(1600, 1500)
	if b := c.Bounds(); b.Dx() != 1600 || b.Dy() != 1500 {
		t.Errorf("bounds %v", b)
	}
	save(t, "sweep.png", c)

	// A family of curves with a legend, and a histogram.
	var lines []Line
	for k := range 5 {
		var x, y []float64
		for o := -5.0; o <= 5.01; o += 0.25 {
			x = append(x, o)
			y = append(y, -3-0.035*o*o/(1+float64(k)))
		}
		lines = append(lines, Line{Label: fmt.Sprintf("Δw = %d mil", k), X: x, Y: y})
	}
	tol := &Plot{Title: "Tolerance study (demo)", XLabel: "offset [mil]", Axes: []*Axes{{
		YLabel: "coupling [dB]", Lines: lines, Bands: []Band{{Lo: -3.25, Hi: -2.75, Label: "spec"}}}}}
	save(t, "tol.png", tol.Render(1600, 1000))

	r := rand.New(rand.NewPCG(1, 2))
	var good []int
	for range 2000 {
		good = append(good, 700+int(math.Round(r.NormFloat64()*6)))
	}
	h := IntegerHist("panels", good)
	parts := &Plot{Title: "Good parts per panel (demo)", XLabel: "good parts per panel", Axes: []*Axes{{
		YLabel: "panels", Hists: []Hist{h}, VLines: []VLine{{X: 700, Label: "mean 700.1"}, {X: 690, Label: "5 % quantile 690"}}}}}
	save(t, "parts.png", parts.Render(1600, 1000))

	bc := &BarChart{Title: "Offset variance budget at the worst site (demo)", XLabel: "share of variance [%]",
		Labels: []string{"core C2 movement: scale_y", "L3 imaging: offset_x", "lamination shift: offset_x", "L4 imaging: rotation", "site random"},
		Values: []float64{46.2, 21.5, 17.9, 9.1, 5.3}}
	save(t, "budget.png", bc.Render(1600, 0))
}

// TestDegenerate feeds awkward input to every drawing call; none may panic
// and every image keeps its requested size (or the minimum).
func TestDegenerate(t *testing.T) {
	nan := math.NaN()
	plots := map[string]*Plot{
		"empty":     {},
		"no data":   {Axes: []*Axes{{}}},
		"one point": {Axes: []*Axes{{Lines: []Line{{X: []float64{1}, Y: []float64{2}, Marker: Square}}}}},
		"flat":      {Axes: []*Axes{{Lines: []Line{{X: []float64{0, 1, 2}, Y: []float64{5, 5, 5}, Marker: Triangle}}}}},
		"nan":       {Axes: []*Axes{{Lines: []Line{{X: []float64{0, nan, 2, 3}, Y: []float64{1, 2, nan, 4}, Marker: Diamond}}}}},
		"ragged":    {Axes: []*Axes{{Lines: []Line{{X: []float64{0, 1, 2}, Y: []float64{1}}}, Hists: []Hist{{Edges: []float64{0, 1}, Counts: []float64{3, 4, 5}}}}}},
		"hist":      {Axes: []*Axes{{Hists: []Hist{IntegerHist("x", nil), IntegerHist("y", []int{4})}}}},
		"fixed":     {XMin: 10, XMax: 0, Axes: []*Axes{{YMin: 1, YMax: 1, VLines: []VLine{{X: 5, Label: "v"}}, HLines: []HLine{{Y: 1, Label: "h"}}}}},
	}
	for name, p := range plots {
		t.Run(name, func(t *testing.T) {
			if b := p.Render(50, 40).Bounds(); b.Dx() != minSide || b.Dy() != minSide {
				t.Errorf("bounds %v", b)
			}
			p.Render(640, 480)
		})
	}
	(&BarChart{}).Render(0, 0)
	(&BarChart{Values: []float64{-1, nan, 2}, Labels: []string{"a"}}).Render(500, 300)

	m := NewMap(MapSpec{Width: 10, Extent: Centered(1, 0.01), Title: []string{"t"}, Views: 3})
	if m.Bounds().Dx() != minSide {
		t.Errorf("map width %d", m.Bounds().Dx())
	}
	v := m.Views[0]
	v.Field(Centered(2, 2), func(x, y float64) float64 { return nan }, Diverging, 0, 0)
	g := NewGrid(Centered(1, 1), 3, 3, func(x, y float64) float64 { return nan })
	v.FieldGrid(g, Sequential, 0, 1)
	v.Contour(g, 0.5, LineStyle{}, "c")
	v.Bars(nil, BarStyle{})
	v.Bars([]Bar{{Length: 0, Angle: 1}}, BarStyle{})
	v.Markers([]Marker{{Label: ""}, {Label: "1"}})
	v.Arrows([]Arrow{{}}, ArrowStyle{})
	v.ScaleArrow(0, "", ArrowStyle{})
	v.Legend(nil, TopLeft)
	v.Polyline(nil, LineStyle{})
	m.ColorBar(Sequential, 1, 1, "")
	if lo, hi := g.Range(); !math.IsNaN(lo) || !math.IsNaN(hi) {
		t.Errorf("range of NaN grid %g %g", lo, hi)
	}
	for _, c := range []struct{ nx, ny int }{{1, 5}, {5, 0}} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("NewGrid(%d,%d) did not panic", c.nx, c.ny)
				}
			}()
			NewGrid(Centered(1, 1), c.nx, c.ny, nil)
		}()
	}
}

// TestLegendAvoidsData checks that the automatic legend goes to an empty
// corner: with data only along the top edge, it moves to the bottom.
func TestLegendAvoidsData(t *testing.T) {
	var x, y []float64
	for k := 0; k <= 100; k++ {
		x = append(x, float64(k))
		y = append(y, 10)
	}
	c := newCanvas(800, 600, 12)
	area := image.Rect(100, 50, 750, 550)
	items := []LegendItem{{Label: "series"}}
	f := plotFrame{area, 0, 100, 0, 10.5}
	var pts [][2]float64
	for k := range x {
		pts = append(pts, [2]float64{f.px(x[k]), f.py(y[k])})
	}
	if got, _ := c.quietCorner(area, items, pts); got != BottomLeft && got != BottomRight {
		t.Errorf("legend went to corner %d, want a bottom corner", got)
	}
	if got, _ := c.quietCorner(area, items, nil); got != TopRight {
		t.Errorf("with no data the legend went to corner %d, want top right", got)
	}
}

// BenchmarkPlot times a three-panel sweep plot at 1600 x 1500 with PNG
// encoding.
func BenchmarkPlot(b *testing.B) {
	p := demoSweep()
	b.ReportAllocs()
	for b.Loop() {
		if err := p.Render(1600, 1500).EncodePNG(io.Discard); err != nil {
			b.Fatal(err)
		}
	}
}
