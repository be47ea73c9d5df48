package render

import (
	"fmt"
	"image"
	"math"
	"math/rand/v2"
	"testing"
)

// TestFitMap draws a fit.png-style map: targets, measured and residual
// arrows, a scale arrow and a legend; and checks that an arrow ends where
// its exaggerated displacement says.
func TestFitMap(t *testing.T) {
	panel := Centered(18*inch, 24*inch)
	m := NewMap(MapSpec{Width: 1800, Extent: panel, NoColorBar: true, Views: 2,
		Captions: []string{"L3", "L4"},
		Title:    []string{"Registration fit (demo)", "lot A, 4 panels, affine model"},
		Legend: []LegendItem{
			{Label: "measured", Kind: LegendArrow, Color: Series(0)},
			{Label: "residual after fit", Kind: LegendArrow, Color: Series(1)},
			{Label: "outlier", Kind: LegendRing},
		}})
	r := rand.New(rand.NewPCG(3, 4))
	exag := m.Views[0].ArrowExaggeration(150e-6 * 12 * inch)
	// Shorter side of the padded view 18 in + 2·3 % of 24 in = 0.4938 m; a
	// tenth of it over 45.72 µm is 1080, rounded down to 1000.
	if exag != 1000 {
		t.Errorf("exaggeration %g, want 1000", exag)
	}
	for _, v := range m.Views {
		v.StrokeRect(panel, LineStyle{Width: 2 * m.thin()})
		var pts []Point
		var meas, res []Arrow
		for i := -2; i <= 2; i++ {
			for j := -2; j <= 2; j++ {
				p := Point{float64(i) * 3.8 * inch, float64(j) * 5.2 * inch}
				pts = append(pts, p)
				d := Point{-150e-6 * p.X, -120e-6 * p.Y}
				e := Point{r.NormFloat64() * 2e-6, r.NormFloat64() * 2e-6}
				meas = append(meas, Arrow{At: p, D: Point{d.X + e.X, d.Y + e.Y}})
				res = append(res, Arrow{At: p, D: e})
			}
		}
		v.Dots(pts, 0.25*m.TextSize(), Ink)
		v.Arrows(meas, ArrowStyle{Color: Series(0), Exaggeration: exag})
		v.Arrows(res, ArrowStyle{Color: Series(1), Exaggeration: exag})
		v.Markers([]Marker{{At: pts[7], Label: "T8"}})
		v.ScaleArrow(20e-6, fmt.Sprintf("20 µm, drawn ×%g", exag), ArrowStyle{Exaggeration: exag})
	}
	save(t, "fit.png", m.Canvas)

	// One arrow on a blank map: its head tip is at the tail plus the
	// exaggerated displacement.
	b := NewMap(MapSpec{Width: 600, Extent: panel, NoColorBar: true})
	v := b.Views[0]
	a := Arrow{At: Point{-4 * inch, 0}, D: Point{8 * inch / 500, 0}} // drawn 8 in long at ×500
	v.Arrows([]Arrow{a}, ArrowStyle{Exaggeration: 500, Width: 3})
	x0, y := v.Pixel(a.At)
	x1, _ := v.Pixel(Point{4 * inch, 0})
	inked := func(x float64) bool { return b.img.RGBAAt(int(x), int(y)) != Background }
	if !inked(x0+2) || !inked(x1-2) || inked(x1+3) || inked(x0-3) {
		t.Errorf("arrow from %.0f to %.0f px not where expected: %v %v %v %v", x0, x1, inked(x0+2), inked(x1-2), inked(x1+3), inked(x0-3))
	}
}

// TestYieldMap draws a yield.png-style map with contours at 99 % and 95 %
// and checks that the contour is drawn where the field crosses the level.
func TestYieldMap(t *testing.T) {
	panel := Centered(18*inch, 24*inch)
	yield := func(x, y float64) float64 {
		r := math.Hypot(x/(9*inch), y/(12*inch))
		return 1 - 0.08*r*r*r*r
	}
	m := NewMap(MapSpec{Width: 1200, Extent: panel, Title: []string{"Site yield (demo)"}})
	v := m.Views[0]
	g := NewGrid(panel, 91, 121, yield)
	v.FieldGrid(g, Sequential, 1, 0.9) // reversed: low yield dark
	var parts []Rect
	for i := range 6 {
		for j := range 8 {
			c := Point{(float64(i) - 2.5) * 2.8 * inch, (float64(j) - 3.5) * 2.8 * inch}
			parts = append(parts, Rect{Point{c.X - 1.2*inch, c.Y - 1.2*inch}, Point{c.X + 1.2*inch, c.Y + 1.2*inch}})
		}
	}
	if v.PixelLen(2.4*inch) > 8 {
		v.StrokeRects(parts, LineStyle{Color: Frame})
	}
	v.StrokeRect(panel, LineStyle{Width: 2 * m.thin()})
	white := LineStyle{Color: Halo, Width: 4 * m.thin()}
	v.Contour(g, 0.99, white, "")
	v.Contour(g, 0.99, LineStyle{Width: 2 * m.thin()}, "99 %")
	v.Contour(g, 0.95, white, "")
	v.Contour(g, 0.95, LineStyle{Width: 2 * m.thin(), Dash: []float64{10, 6}}, "95 %")
	m.ColorBar(Sequential, 100, 90, "site yield [%]")
	save(t, "yield.png", m.Canvas)

	// On the x axis the 95 % level is at r⁴ = 0.625, x = 9 in · 0.625^¼.
	m2 := NewMap(MapSpec{Width: 800, Extent: panel, NoColorBar: true})
	v2 := m2.Views[0]
	v2.Contour(g, 0.95, LineStyle{Width: 3}, "")
	x, y := v2.Pixel(Point{9 * inch * math.Pow(0.625, 0.25), 0})
	if !inkNear(m2.img, int(x), int(y), 2) {
		t.Errorf("no contour ink near (%.0f, %.0f)", x, y)
	}
}

func inkNear(img *image.RGBA, x, y, d int) bool {
	for i := x - d; i <= x+d; i++ {
		for j := y - d; j <= y+d; j++ {
			if c := img.RGBAAt(i, j); c.R < 128 {
				return true
			}
		}
	}
	return false
}

// TestMarkersApart checks that labels of close markers do not overlap.
func TestMarkersApart(t *testing.T) {
	panel := Centered(0.3, 0.3)
	m := NewMap(MapSpec{Width: 800, Extent: panel, NoColorBar: true})
	v := m.Views[0]
	var ms []Marker
	for k := range 6 {
		ms = append(ms, Marker{At: Point{0.01 * float64(k%3), 0.01 * float64(k/3)}, Label: fmt.Sprint(k + 1)})
	}
	v.Markers(ms)
	save(t, "markers.png", m.Canvas)
	r := 0.6 * m.em
	var rings []box
	for _, mk := range ms {
		x, y := v.Pixel(mk.At)
		rings = append(rings, box{x - r, y - r, x + r, y + r})
	}
	places := v.placeMarkerLabels(ms, rings)
	for i, p := range places {
		for _, o := range rings {
			if p.box.overlaps(o) {
				t.Errorf("label %s overlaps a ring", ms[i].Label)
			}
		}
		for j := range i {
			if p.box.overlaps(places[j].box) {
				t.Errorf("labels %s and %s overlap", ms[i].Label, ms[j].Label)
			}
		}
	}
}

func TestClipSegment(t *testing.T) {
	b := box{0, 0, 10, 10}
	tests := []struct {
		x, y, dx, dy float64
		t0, t1       float64
		ok           bool
	}{
		{1, 1, 2, 2, 0, 1, true},         // inside
		{5, 5, 10, 0, 0, 0.5, true},      // leaves through the right edge
		{-5, 5, 10, 0, 0.5, 1, true},     // enters through the left edge
		{-5, -5, 2, 0, 0, 0, false},      // outside
		{5, -5, 0, 20, 0.25, 0.75, true}, // crosses top and bottom
	}
	for _, tt := range tests {
		t0, t1, ok := clipSegment(b, tt.x, tt.y, tt.dx, tt.dy)
		if ok != tt.ok || ok && (math.Abs(t0-tt.t0) > 1e-12 || math.Abs(t1-tt.t1) > 1e-12) {
			t.Errorf("clip(%v %v %v %v) = %v %v %v", tt.x, tt.y, tt.dx, tt.dy, t0, t1, ok)
		}
	}
}

// TestBarPixels checks that a bar along an axis (drawn into the pixels) and
// a slanted one (drawn by gg) both cover their centre with their colour and
// have an outline beyond their ends.
func TestBarPixels(t *testing.T) {
	m := NewMap(MapSpec{Width: 800, Extent: Centered(0.2, 0.2), NoColorBar: true})
	v := m.Views[0]
	col := Series(2)
	for _, angle := range []float64{0, math.Pi / 2, math.Pi / 4} {
		at := Point{-0.05 + 0.04*angle, 0.02}
		v.Bars([]Bar{{At: at, Length: 0.02, Angle: angle, Color: col}}, BarStyle{Width: 6})
		x, y := v.Pixel(at)
		if got := m.img.RGBAAt(int(x), int(y)); got != col {
			t.Errorf("angle %.2f: centre %v, want %v", angle, got, col)
		}
		h := v.PixelLen(0.01)
		ex, ey := x+(h+1)*math.Cos(angle), y-(h+1)*math.Sin(angle)
		if got := m.img.RGBAAt(int(ex), int(ey)); got.R > 120 {
			t.Errorf("angle %.2f: no outline past the end, %v", angle, got)
		}
	}
}

// TestMarkerContrast checks that a ring is dark over a light field and
// light over a dark one.
func TestMarkerContrast(t *testing.T) {
	panel := Centered(0.2, 0.2)
	for _, dark := range []bool{false, true} {
		m := NewMap(MapSpec{Width: 600, Extent: panel, NoColorBar: true})
		v := m.Views[0]
		val := 0.0
		if dark {
			val = 1
		}
		v.Field(panel, func(x, y float64) float64 { return val }, Sequential, 0, 1)
		v.Markers([]Marker{{At: Point{}, Label: "1"}})
		x, y := v.Pixel(Point{})
		ring := Luma(m.img.RGBAAt(int(x+0.6*m.TextSize()), int(y)))
		if dark && ring < 0.8 || !dark && ring > 0.2 {
			t.Errorf("dark field %v: ring luma %.2f", dark, ring)
		}
	}
}
