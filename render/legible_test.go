package render

import (
	"image"
	"image/color"
	"math"
	"strings"
	"testing"
)

// TestHistogramRareBinsShow: a bin of one panel in four thousand stays
// visible beside the tallest bar (parts.png at 700 parts a panel looked
// empty): every non-empty bin colours some pixels, and an empty one none.
func TestHistogramRareBinsShow(t *testing.T) {
	h := Hist{Label: "panels"}
	for k := 450; k <= 728; k++ {
		h.Edges = append(h.Edges, float64(k)-0.5)
		n := 0.0
		switch {
		case k == 728:
			n = 3990
		case k%40 == 0:
			n = 1
		}
		h.Counts = append(h.Counts, n)
	}
	h.Edges = append(h.Edges, 728.5)
	p := &Plot{XLabel: "good parts per panel", XMin: 449.5, XMax: 728.5,
		Axes: []*Axes{{YLabel: "panels", Hists: []Hist{h}, Legend: NoLegend}}}
	c := p.Render(1600, 1000)
	save(t, "rare-bins.png", c)
	// The frame (Frame-coloured, with its ticks below) spans XMin to XMax;
	// look for bar pixels in each bin's column.
	cols := map[int]bool{}
	for _, q := range pixelsOf(c, Series(0)) {
		cols[q.X] = true
	}
	// The frame's top edge is the topmost long row of Frame pixels (the y
	// tick at zero sticks out left of the bottom edge).
	rows := map[int][]image.Point{}
	for _, q := range pixelsOf(c, Frame) {
		rows[q.Y] = append(rows[q.Y], q)
	}
	fr := image.Rectangle{Min: image.Point{Y: 1 << 30}}
	for y, r := range rows {
		if sp := span(r); sp.Dx() > c.Bounds().Dx()/2 && y < fr.Min.Y {
			fr = sp
		}
	}
	px := func(x float64) int {
		return fr.Min.X + int((x-449.5)/(728.5-449.5)*float64(fr.Dx()-1)+0.5)
	}
	for k := 480; k <= 728; k++ {
		n := h.Counts[k-450]
		hit := false
		for dx := -1; dx <= 1; dx++ {
			hit = hit || cols[px(float64(k))+dx]
		}
		if n > 0 && !hit {
			t.Errorf("bin %d (%g panels) not visible", k, n)
		}
	}
}

// TestBarChartTextsInsideFrame: the texts at the ends of the bars stay
// inside the chart's frame however long they are, and long labels are
// shortened rather than pushing the bars off the canvas.
func TestBarChartTextsInsideFrame(t *testing.T) {
	bc := &BarChart{Title: "budget (demo)", XLabel: "share [%]",
		Labels: []string{"lamination: CB against CA: offset_x", strings.Repeat("a very long contributor name ", 8) + ": rotation", "site"},
		Values: []float64{60.4, 11.6, 2.1},
		Texts:  []string{"60.4 % (49.2 %) at the worst site", "11.6 % (9.4 %)", "2.1 % (1.7 %)"}}
	c := bc.Render(2000, 0)
	save(t, "budget-long.png", c)
	img := c.Image()
	// The frame is the rectangle of Frame-coloured pixels around the bars;
	// right of it there must be nothing but the background.
	frame := span(pixelsOf(c, Frame))
	ink := 0
	for y := frame.Min.Y; y < frame.Max.Y; y++ {
		for x := frame.Max.X + 1; x < img.Bounds().Max.X; x++ {
			if img.RGBAAt(x, y) != Background {
				ink++
			}
		}
	}
	if ink > 0 {
		t.Errorf("%d pixels drawn right of the frame (x > %d)", ink, frame.Max.X)
	}
	if bars := span(pixelsOf(c, Series(0))); bars.Dx() < img.Bounds().Dx()/4 {
		t.Errorf("the longest bar is %d px of %d: the labels took the chart", bars.Dx(), img.Bounds().Dx())
	}
}

// TestDotsAndMarkersClipToView: a dot or marker whose point lies outside
// the view is not drawn over the axes.
func TestDotsAndMarkersClipToView(t *testing.T) {
	m := NewMap(MapSpec{Width: 800, Extent: Centered(1, 1), NoColorBar: true})
	v := m.Views[0]
	red := color.RGBA{220, 0, 0, 255}
	// The view shows ±0.5 m and a 3 % margin: 0.56 m is just outside it,
	// where a dot would cover the axes.
	v.Dots([]Point{{X: 0, Y: 0}, {X: 0.56, Y: 0}, {X: 0, Y: -0.56}}, 6, red)
	v.Markers([]Marker{{At: Point{X: 0.56, Y: 0.56}, Label: "far"}})
	got := span(pixelsOf(m.Canvas, red))
	if !got.In(v.Area()) {
		t.Errorf("dots drawn over %v, outside the view %v", got, v.Area())
	}
	if got.Empty() {
		t.Error("the dot inside the view was not drawn")
	}
}

// TestStack: stacked canvases keep their pixels, one below the other.
func TestStack(t *testing.T) {
	a, b := newCanvas(300, 200, 10), newCanvas(250, 100, 10)
	a.img.SetRGBA(10, 10, color.RGBA{1, 2, 3, 255})
	b.img.SetRGBA(20, 30, color.RGBA{4, 5, 6, 255})
	s := Stack(a, b)
	if s.Bounds() != image.Rect(0, 0, 300, 300) {
		t.Fatalf("stack bounds %v, want 300 x 300", s.Bounds())
	}
	if s.img.RGBAAt(10, 10) != (color.RGBA{1, 2, 3, 255}) || s.img.RGBAAt(20, 230) != (color.RGBA{4, 5, 6, 255}) {
		t.Error("stacked pixels moved")
	}
	if s.img.RGBAAt(280, 250) != Background {
		t.Error("the area right of a narrower canvas is not background")
	}
}

// TestOutsideLegendOffData: a legend placed Outside lies right of the
// plot's frame, so it covers no data however many entries it has.
func TestOutsideLegendOffData(t *testing.T) {
	a := &Axes{YLabel: "coupling [dB]", Legend: Outside}
	for k := range 13 {
		a.Lines = append(a.Lines, Line{Label: "curve", X: []float64{0, 1}, Y: []float64{float64(k), float64(k) + 1}, Color: Series(0)})
	}
	c := (&Plot{XLabel: "offset", Axes: []*Axes{a}}).Render(1200, 600)
	save(t, "outside-legend.png", c)
	lines := span(pixelsOf(c, Series(0)))
	// The legend's samples are drawn in the line colour too: the rightmost
	// ones are the legend's, left of them the data, with a gap between.
	cols := map[int]bool{}
	for _, q := range pixelsOf(c, Series(0)) {
		cols[q.X] = true
	}
	gap := false
	for x := lines.Min.X; x < lines.Max.X; x++ {
		if !cols[x] {
			gap = true
			break
		}
	}
	if !gap {
		t.Error("no gap between the data and the legend samples: the legend sits on the data")
	}
}

// TestBarsContrastOutline: with Contrast, a dark bar is outlined in Halo
// and a light one in Ink, so both show over a field of their own colour.
func TestBarsContrastOutline(t *testing.T) {
	m := NewMap(MapSpec{Width: 800, Extent: Centered(1, 1), NoColorBar: true})
	v := m.Views[0]
	dark, light := color.RGBA{30, 20, 60, 255}, color.RGBA{250, 230, 200, 255}
	v.Bars([]Bar{{At: Point{X: -0.2}, Length: 0.1, Angle: math.Pi / 2, Color: dark},
		{At: Point{X: 0.2}, Length: 0.1, Angle: math.Pi / 2, Color: light}}, BarStyle{Width: 8, Contrast: true})
	d, l := span(pixelsOf(m.Canvas, dark)), span(pixelsOf(m.Canvas, light))
	if d.Empty() || l.Empty() {
		t.Fatal("bars not drawn")
	}
	img := m.Image()
	if got := img.RGBAAt(d.Min.X-1, (d.Min.Y+d.Max.Y)/2); got != Halo {
		t.Errorf("dark bar outlined in %v, want Halo", got)
	}
	if got := img.RGBAAt(l.Min.X-1, (l.Min.Y+l.Max.Y)/2); got != Ink {
		t.Errorf("light bar outlined in %v, want Ink", got)
	}
}

// TestLongTitleStaysOnCanvas: a plot or bar chart title longer than the
// canvas is set smaller instead of running off the right edge.
func TestLongTitleStaysOnCanvas(t *testing.T) {
	title := "Good parts per panel: 100.0 % of 4000 panels had all 728 parts good (" + strings.Repeat("a long job title ", 6) + ")"
	for name, c := range map[string]*Canvas{
		"plot": (&Plot{Title: title, Axes: []*Axes{{Lines: []Line{{X: []float64{0, 1}, Y: []float64{0, 1}}}}}}).Render(1600, 1000),
		"bars": (&BarChart{Title: title, Labels: []string{"a"}, Values: []float64{1}}).Render(1600, 0),
	} {
		img := c.Image()
		b := img.Bounds()
		// The title row: the top 2 em; its right margin must stay background.
		for y := 0; y < int(2*c.em); y++ {
			for x := b.Max.X - int(marginEm*c.em) + 2; x < b.Max.X; x++ {
				if img.RGBAAt(x, y) != Background {
					t.Fatalf("%s: title drawn at (%d, %d), in the right margin", name, x, y)
				}
			}
		}
	}
}

// TestMapTitleClearOfLegend: a title line longer than the room beside the
// map's legend is fitted, so it neither runs off the canvas nor under the
// legend.
func TestMapTitleClearOfLegend(t *testing.T) {
	long := strings.Repeat("section hybrid: spec −3.00 ± 0.25 dB at 2.45 GHz, ", 4)
	m := NewMap(MapSpec{Width: 800, Extent: Centered(1, 1), NoColorBar: true, Title: []string{"title", long, long},
		Legend: []LegendItem{{Label: "thin bars: section hybrid", Kind: LegendLine}}})
	img := m.Image()
	// Ink of the title text in the right margin means a line ran off.
	for y := 0; y < int(6*m.em); y++ {
		for x := img.Bounds().Max.X - int(marginEm*m.em) + 2; x < img.Bounds().Max.X; x++ {
			if p := img.RGBAAt(x, y); p != Background {
				t.Fatalf("title drawn at (%d, %d), in the right margin", x, y)
			}
		}
	}
}
