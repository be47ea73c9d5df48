package render

import (
	"fmt"
	"image"
	"image/color"
	"io"
	"maps"
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

// pixelsOf returns the pixels of c that have exactly the colour col (the
// inside of a stroke or fill; anti-aliased edges blend and do not count).
func pixelsOf(c *Canvas, col color.RGBA) []image.Point {
	return pixelsWhere(c, func(p color.RGBA) bool { return p == col })
}

// near reports whether p is within d of col in every channel.
func near(p, col color.RGBA, d int) bool {
	dist := func(a, b uint8) int { return max(int(a)-int(b), int(b)-int(a)) }
	return dist(p.R, col.R) <= d && dist(p.G, col.G) <= d && dist(p.B, col.B) <= d
}

// pixelsWhere returns the pixels of c whose colour satisfies keep.
func pixelsWhere(c *Canvas, keep func(color.RGBA) bool) []image.Point {
	var pts []image.Point
	img := c.img
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		row := img.Pix[img.PixOffset(b.Min.X, y):]
		for x := b.Min.X; x < b.Max.X; x++ {
			i := 4 * (x - b.Min.X)
			if keep(color.RGBA{row[i], row[i+1], row[i+2], row[i+3]}) {
				pts = append(pts, image.Point{x, y})
			}
		}
	}
	return pts
}

// span returns the smallest rectangle holding pts.
func span(pts []image.Point) image.Rectangle {
	if len(pts) == 0 {
		return image.Rectangle{}
	}
	r := image.Rectangle{pts[0], pts[0].Add(image.Point{1, 1})}
	for _, p := range pts {
		r = r.Union(image.Rectangle{p, p.Add(image.Point{1, 1})})
	}
	return r
}

// medianRow returns the median row of the pixels of pts in column x, and
// false when there are none.
func medianRow(pts []image.Point, x int) (float64, bool) {
	var ys []int
	for _, p := range pts {
		if p.X == x {
			ys = append(ys, p.Y)
		}
	}
	if len(ys) == 0 {
		return 0, false
	}
	slices.Sort(ys)
	return float64(ys[len(ys)/2]), true
}

// TestPlotPixels draws a plot whose geometry is known in advance and checks
// where its data lands: a line y = x across the whole fixed range, a band and
// a vertical marker in pure colours, and a second panel below.
func TestPlotPixels(t *testing.T) {
	red, blue, green, magenta := color.RGBA{255, 0, 0, 255}, color.RGBA{0, 0, 255, 255}, color.RGBA{0, 160, 0, 255}, color.RGBA{200, 0, 200, 255}
	p := &Plot{XMin: 0, XMax: 10, Axes: []*Axes{
		{YMin: 0, YMax: 10, Legend: NoLegend,
			Lines:  []Line{{X: []float64{0, 10}, Y: []float64{0, 10}, Color: red, Width: 3}},
			Bands:  []Band{{Lo: 2, Hi: 4, Color: blue}},
			VLines: []VLine{{X: 7, Color: green, Dash: []float64{1000, 1}}}},
		{YMin: 0, YMax: 1, Legend: NoLegend, Hists: []Hist{{Edges: []float64{2, 3}, Counts: []float64{0.5}, Color: magenta}}},
	}}
	c := p.Render(800, 900)
	// The line runs corner to corner, so its pixels span the top panel's
	// plot area (less the frame's width).
	line := pixelsOf(c, red)
	area := span(line)
	if area.Dx() < 400 || area.Dy() < 200 {
		t.Fatalf("line spans %v on an 800 x 900 canvas", area)
	}
	px := func(x float64) float64 { return float64(area.Min.X) + x/10*float64(area.Dx()) }
	py := func(y float64) float64 { return float64(area.Max.Y) - y/10*float64(area.Dy()) }
	// y up: every pixel of the line lies on the diagonal from the bottom
	// left to the top right, within the line's half width plus a pixel.
	for _, q := range line {
		x := float64(area.Min.X) + (float64(area.Max.Y)-float64(q.Y))*float64(area.Dx())/float64(area.Dy())
		if math.Abs(float64(q.X)-x) > 4 {
			t.Fatalf("line pixel %v is %.1f px from the diagonal", q, float64(q.X)-x)
		}
	}
	// The band fills y from 2 to 4 across the whole width (under the line).
	band := span(pixelsOf(c, blue))
	for _, d := range []struct {
		name      string
		got, want float64
	}{
		{"band top", float64(band.Min.Y), py(4)}, {"band bottom", float64(band.Max.Y), py(2)},
		{"band left", float64(band.Min.X), px(0)}, {"band right", float64(band.Max.X), px(10)},
	} {
		if math.Abs(d.got-d.want) > 2 {
			t.Errorf("%s at %g px, want %.1f", d.name, d.got, d.want)
		}
	}
	// The marker at x = 7 is a vertical line through the top panel; the
	// histogram bar from 2 to 3 stands in the panel below.
	// The marker is thin and anti-aliased: count the pixels that are
	// clearly green.
	vline := pixelsWhere(c, func(p color.RGBA) bool { return int(p.G) > int(p.R)+60 && int(p.G) > int(p.B)+60 })
	if v := span(vline); math.Abs(float64(v.Min.X+v.Max.X)/2-px(7)) > 2 || v.Dy() < area.Dy()-4 {
		t.Errorf("marker spans %v, want a vertical line at x = %.1f px over rows %d to %d", v, px(7), area.Min.Y, area.Max.Y)
	}
	hb := span(pixelsOf(c, magenta))
	if math.Abs(float64(hb.Min.X)-px(2)) > 2 || math.Abs(float64(hb.Max.X)-px(3)) > 2 {
		t.Errorf("histogram bar spans x %d to %d px, want %.1f to %.1f", hb.Min.X, hb.Max.X, px(2), px(3))
	}
	// Both panels have weight 1, so the lower one is as tall as the upper,
	// and a count of 0.5 in a range of 0 to 1 is half of it.
	if hb.Min.Y <= area.Max.Y || math.Abs(float64(hb.Dy())-0.5*float64(area.Dy())) > 3 {
		t.Errorf("histogram bar rows %d to %d, want %.0f px tall below the top panel (which ends at %d)", hb.Min.Y, hb.Max.Y, 0.5*float64(area.Dy()), area.Max.Y)
	}
}

// TestPlotRender draws the demo sweep plot (three panels) and checks where
// its data lands.
func TestPlotRender(t *testing.T) {
	p := demoSweep()
	c := p.Render(1600, 1500)
	if b := c.Bounds(); b.Dx() != 1600 || b.Dy() != 1500 {
		t.Errorf("bounds %v", b)
	}
	save(t, "sweep.png", c)
	// Colours are counted across the plot: coupling 0, the two impedance
	// lines 1 and 2, directivity 3. Each is drawn, in panels from top to
	// bottom.
	var series [4][]image.Point
	for k := range series {
		series[k] = pixelsOf(c, Series(k))
		if len(series[k]) < 500 {
			t.Errorf("series %d: %d pixels of its colour", k, len(series[k]))
		}
	}
	if !(span(series[0]).Max.Y < span(series[1]).Max.Y && span(series[1]).Max.Y < span(series[3]).Max.Y) {
		t.Errorf("panels out of order: coupling rows %v, impedance %v, directivity %v", span(series[0]), span(series[1]), span(series[3]))
	}
	// The coupling line covers x from −5 to +5 mil; its highest point is the
	// vertex of −3 − 0.035x² + 0.01x at x = 1/7 mil. Between ±2 mil (clear of
	// the legend in a corner) the columns within a pixel of the top row
	// centre on it.
	cs := span(series[0])
	cpx := func(x float64) float64 { return float64(cs.Min.X) + (x+5)/10*float64(cs.Dx()) }
	top := map[int]int{}
	for _, q := range series[0] {
		if float64(q.X) >= cpx(-2) && float64(q.X) <= cpx(2) {
			if y, ok := top[q.X]; !ok || q.Y < y {
				top[q.X] = q.Y
			}
		}
	}
	best := math.MaxInt
	for _, y := range top {
		best = min(best, y)
	}
	var sum, n float64
	for x, y := range top {
		if y <= best+1 {
			sum, n = sum+float64(x), n+1
		}
	}
	if v := sum / n; math.Abs(v-cpx(1.0/7)) > 6 {
		t.Errorf("coupling peaks at column %.1f, want %.1f (x = 1/7 mil)", v, cpx(1.0/7))
	}
	// The impedance lines 50 + 0.08x² ± 0.3x cross at 0: at +1 mil the upper
	// line (series 1) is higher on the page (a smaller row), at −1 mil lower.
	for _, x := range []float64{-1, 1} {
		y1, ok1 := medianRow(series[1], int(cpx(x)))
		y2, ok2 := medianRow(series[2], int(cpx(x)))
		if !ok1 || !ok2 {
			t.Errorf("x = %g mil: an impedance line is missing in column %d", x, int(cpx(x)))
		} else if (x > 0) != (y1 < y2) {
			t.Errorf("x = %g mil: upper line at row %g, lower at %g", x, y1, y2)
		}
	}
	// The spec band is drawn in the coupling panel only: DefaultBand over the
	// white plot area.
	a := float64(DefaultBand.A) / 255
	mix := func(v uint8) uint8 { return uint8(math.Round(255 + (float64(v)-255)*a)) }
	onWhite := color.RGBA{mix(DefaultBand.R), mix(DefaultBand.G), mix(DefaultBand.B), 255}
	bandRows := pixelsWhere(c, func(p color.RGBA) bool { return near(p, onWhite, 2) })
	if len(bandRows) < 1000 || span(bandRows).Max.Y > span(series[1]).Min.Y {
		t.Errorf("spec band: %d pixels over %v, want many, above the impedance panel (from row %d)", len(bandRows), span(bandRows), span(series[1]).Min.Y)
	}
}

// TestPlotRenderFamily draws a family of curves with a legend and checks
// their order and spacing.
func TestPlotRenderFamily(t *testing.T) {
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
		YLabel: "coupling [dB]", Lines: lines, Bands: []Band{{Lo: -3.25, Hi: -2.75, Label: "spec"}}, Legend: AtBottomLeft}}}
	tc := tol.Render(1600, 1000)
	save(t, "tol.png", tc)
	// At +2.5 mil (right of the centre, clear of the legend at the bottom
	// left) curve k sits at −3 − 0.21875/(1+k) dB: k = 0 lowest on the page
	// (the largest row), each next one higher.
	var tolRows []float64
	for k := range lines {
		pts := pixelsOf(tc, Series(k))
		sp := span(pts)
		x := float64(sp.Min.X) + 7.5/10*float64(sp.Dx())
		y, ok := medianRow(pts, int(x))
		if !ok {
			t.Fatalf("tolerance study: curve %d has no pixel in column %d", k, int(x))
		}
		tolRows = append(tolRows, y)
	}
	for k := 1; k < len(tolRows); k++ {
		if !(tolRows[k] < tolRows[k-1]) {
			t.Errorf("tolerance study at +2.5 mil: curve %d at row %g, not above curve %d at row %g", k, tolRows[k], k-1, tolRows[k-1])
		}
	}
	// The rows are linear in dB: the gap between curves 0 and 1 against the
	// gap between 0 and 4 is (1/1 − 1/2)/(1/1 − 1/5) = 0.625.
	if r := (tolRows[0] - tolRows[1]) / (tolRows[0] - tolRows[4]); math.Abs(r-0.625) > 0.03 {
		t.Errorf("tolerance study: gap ratio %.3f, want 0.625", r)
	}
}

// TestPlotRenderHistogram draws a histogram of good parts per panel and
// checks that its bars are proportional to the counts.
func TestPlotRenderHistogram(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	var good []int
	for range 2000 {
		good = append(good, 700+int(math.Round(r.NormFloat64()*6)))
	}
	h := IntegerHist("panels", good)
	parts := &Plot{Title: "Good parts per panel (demo)", XLabel: "good parts per panel", Axes: []*Axes{{
		YLabel: "panels", Hists: []Hist{h}, VLines: []VLine{{X: 700, Label: "mean 700.1"}, {X: 690, Label: "5 % quantile 690"}}}}}
	pc := parts.Render(1600, 1000)
	save(t, "parts.png", pc)
	// The bars cover the histogram's edges from left to right, so bin k
	// spans its share of the bars' width; each bar's height in pixels is
	// proportional to its count. Columns under the two markers and the
	// legend's swatch (a corner) are left out by using bins well above the
	// smallest and away from 690 and 700.
	bars := pixelsOf(pc, Series(0))
	bs := span(bars)
	nb := len(h.Counts)
	height := map[int]int{}
	for _, q := range bars {
		height[q.X]++
	}
	mode := 0
	for k, v := range h.Counts {
		if v > h.Counts[mode] {
			mode = k
		}
	}
	colOf := func(k int) int { return bs.Min.X + int((float64(k)+0.5)/float64(nb)*float64(bs.Dx())) }
	ref := float64(height[colOf(mode)]) / h.Counts[mode]
	checked := 0
	for k, v := range h.Counts {
		x := h.Edges[k] + 0.5
		if v < 0.3*h.Counts[mode] || math.Abs(x-690) < 1.5 || math.Abs(x-700) < 1.5 {
			continue
		}
		checked++
		if got, want := float64(height[colOf(k)]), v*ref; math.Abs(got-want) > 3 {
			t.Errorf("bin %g (count %g): bar %g px tall, want %.1f", x, v, got, want)
		}
	}
	if checked < 10 || ref*h.Counts[mode] < 300 {
		t.Errorf("histogram: %d bins checked, tallest bar %g px", checked, ref*h.Counts[mode])
	}
}

// TestBarChartRender draws an error-budget bar chart and checks the bars'
// order, common zero and lengths.
func TestBarChartRender(t *testing.T) {
	bc := &BarChart{Title: "Offset variance budget at the worst site (demo)", XLabel: "share of variance [%]",
		Labels: []string{"core C2 movement: scale_y", "L3 imaging: offset_x", "lamination shift: offset_x", "L4 imaging: rotation", "site random"},
		Values: []float64{46.2, 21.5, 17.9, 9.1, 5.3}}
	bcc := bc.Render(1600, 0)
	save(t, "budget.png", bcc)
	// Bars are drawn top to bottom in order, from a common zero, with
	// lengths proportional to the values.
	var runs []image.Rectangle // one per bar, in row order
	rows := map[int][]image.Point{}
	for _, q := range pixelsOf(bcc, Series(0)) {
		rows[q.Y] = append(rows[q.Y], q)
	}
	ys := slices.Sorted(maps.Keys(rows))
	for i, y := range ys {
		r := span(rows[y])
		if i == 0 || y != ys[i-1]+1 {
			runs = append(runs, r)
		} else {
			runs[len(runs)-1] = runs[len(runs)-1].Union(r)
		}
	}
	if len(runs) != len(bc.Values) {
		t.Fatalf("budget chart: %d bars drawn, want %d", len(runs), len(bc.Values))
	}
	for k, r := range runs {
		if r.Min.X != runs[0].Min.X {
			t.Errorf("bar %d starts at column %d, bar 0 at %d", k, r.Min.X, runs[0].Min.X)
		}
		want := bc.Values[k] / bc.Values[0] * float64(runs[0].Dx())
		if math.Abs(float64(r.Dx())-want) > 2 {
			t.Errorf("bar %d (%g %%) is %d px long, want %.1f", k, bc.Values[k], r.Dx(), want)
		}
	}
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
