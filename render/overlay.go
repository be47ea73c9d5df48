package render

import (
	"image"
	"image/color"
	"math"
)

// Bar is a short line segment centred on a site, such as one coupler drawn
// along its coupled lines.
type Bar struct {
	At     Point      // centre, metres
	Length float64    // metres
	Angle  float64    // radians, anticlockwise from +x
	Color  color.RGBA // fill colour
}

// BarStyle sets how Bars draws. The zero value gives bars a little thicker
// than a thin line, with an Ink outline.
type BarStyle struct {
	// Width is the bar thickness in pixels; 0 means a third of the body text
	// size.
	Width float64
	// MinLength is the shortest a bar is drawn, in pixels; 0 means twice its
	// width, so that the bar's direction still shows.
	MinLength float64
	// Outline is the colour of an edge around each bar, a quarter of its
	// width (at least a pixel), which keeps bars visible over a field of
	// similar colour; nil means Ink. Set NoOutline to leave it out.
	Outline   color.Color
	NoOutline bool
	// Contrast picks each bar's outline by its fill: Halo round a dark bar,
	// Ink round a light one, so that bars stay visible over a field that
	// runs from light to dark (a bar takes the field's colour where it
	// agrees with it). Bars along neither axis keep Outline.
	Contrast bool
}

// Bars draws many bars quickly. Bars along x or y are filled straight into
// the pixels (opaque colours, edges on whole pixels); others are stroked by
// gg, bars of one colour together in batches.
func (v *View) Bars(bars []Bar, s BarStyle) {
	c := v.c
	dc := c.dc
	w := s.Width
	if w == 0 {
		w = math.Max(2, math.Round(c.em/3))
	}
	minLen := s.MinLength
	if minLen == 0 {
		minLen = 2 * w
	}
	// Bars along the axes (the usual case on a panel) are filled straight
	// into the pixels, snapped to whole pixels: cheaper than the
	// anti-aliasing rasterizer by an order of magnitude, and crisp.
	var slanted []Bar
	for _, b := range bars {
		if !v.axisBar(b, w, minLen, s) {
			slanted = append(slanted, b)
		}
	}
	bars = slanted
	ends := make([][4]float64, len(bars))
	for k, b := range bars {
		x, y := v.Pixel(b.At)
		h := math.Max(v.PixelLen(b.Length), minLen) / 2
		dx, dy := h*math.Cos(b.Angle), -h*math.Sin(b.Angle)
		ends[k] = [4]float64{x - dx, y - dy, x + dx, y + dy}
	}
	dc.SetLineCapButt()
	dc.SetDash()
	if !s.NoOutline {
		ow := math.Max(1, w/4)
		dc.SetColor(orInk(s.Outline))
		dc.SetLineWidth(w + 2*ow)
		for k := range bars {
			e := ends[k]
			l := math.Hypot(e[2]-e[0], e[3]-e[1])
			ux, uy := ow*(e[2]-e[0])/l, ow*(e[3]-e[1])/l
			dc.MoveTo(e[0]-ux, e[1]-uy)
			dc.LineTo(e[2]+ux, e[3]+uy)
			if (k+1)%barBatch == 0 {
				dc.Stroke()
			}
		}
		dc.Stroke()
	}
	// Group by colour, keeping the order of first appearance so the output
	// does not depend on map iteration.
	index := map[color.RGBA]int{}
	var groups [][]int
	for k, b := range bars {
		g, ok := index[b.Color]
		if !ok {
			g = len(groups)
			index[b.Color] = g
			groups = append(groups, nil)
		}
		groups[g] = append(groups[g], k)
	}
	dc.SetLineWidth(w)
	for _, g := range groups {
		dc.SetColor(bars[g[0]].Color)
		for n, k := range g {
			e := ends[k]
			dc.MoveTo(e[0], e[1])
			dc.LineTo(e[2], e[3])
			if (n+1)%barBatch == 0 {
				dc.Stroke()
			}
		}
		dc.Stroke()
	}
}

// axisBar draws b directly into the pixels if it runs along x or y, and
// reports whether it did.
func (v *View) axisBar(b Bar, w, minLen float64, s BarStyle) bool {
	q := b.Angle / (math.Pi / 2)
	n := math.Round(q)
	if math.Abs(q-n) > 1e-9 {
		return false
	}
	x, y := v.Pixel(b.At)
	h := math.Max(v.PixelLen(b.Length), minLen) / 2
	hx, hy := h, w/2
	if int(n)%2 != 0 {
		hx, hy = w/2, h
	}
	img := v.c.img
	if !s.NoOutline {
		ow := math.Max(1, w/4)
		oc := rgbaOf(orInk(s.Outline))
		if s.Contrast && Luma(b.Color) < contrastLuma {
			oc = Halo
		}
		fillPixels(img, x-hx-ow, y-hy-ow, x+hx+ow, y+hy+ow, oc)
	}
	fillPixels(img, x-hx, y-hy, x+hx, y+hy, b.Color)
	return true
}

// contrastLuma is the luma below which a fill counts as dark, for outlines
// and marks drawn over it (the threshold yield.png's contours use).
const contrastLuma = 0.45

func rgbaOf(c color.Color) color.RGBA {
	r, g, b, a := c.RGBA()
	return color.RGBA{uint8(r >> 8), uint8(g >> 8), uint8(b >> 8), uint8(a >> 8)}
}

// fillPixels sets the pixels covering [x0, x1) x [y0, y1), edges rounded to
// whole pixels and clipped to the image, to the opaque colour c.
func fillPixels(img *image.RGBA, x0, y0, x1, y1 float64, c color.RGBA) {
	r := image.Rect(int(math.Round(x0)), int(math.Round(y0)), int(math.Round(x1)), int(math.Round(y1))).Intersect(img.Rect)
	if r.Empty() {
		return
	}
	px := [4]byte{c.R, c.G, c.B, 255}
	for j := r.Min.Y; j < r.Max.Y; j++ {
		o := img.PixOffset(r.Min.X, j)
		row := img.Pix[o : o+4*r.Dx()]
		for i := 0; i < len(row); i += 4 {
			copy(row[i:i+4], px[:])
		}
	}
}

// barBatch is how many bars go into one stroke. The freetype rasterizer
// searches a linked list of cells along each scan line, so one path holding
// thousands of bars costs time quadratic in the bars per line; strokes of a
// few dozen keep that small while sharing the per-stroke setup
// (BenchmarkMap10k: 10,000 bars in one path took about 150 ms).
const barBatch = 32

// Dots draws a filled circle of radius r pixels at each point, such as
// measured targets.
//
// A dot whose centre falls outside the view is left out: it would cover the
// axes or the next view.
func (v *View) Dots(pts []Point, r float64, fill color.Color) {
	dc := v.c.dc
	dc.SetColor(fill)
	a := v.area
	for i, p := range pts {
		x, y := v.Pixel(p)
		if x < float64(a.Min.X) || x > float64(a.Max.X) || y < float64(a.Min.Y) || y > float64(a.Max.Y) {
			continue
		}
		dc.DrawCircle(x, y, r)
		dc.NewSubPath()
		if (i+1)%pathBatch == 0 {
			dc.Fill()
		}
	}
	dc.Fill()
}

// pathBatch is how many dots or arrows go into one path before it is
// filled or stroked: gg's rasteriser takes time quadratic in the segments of
// one path (every scanline meets every edge), so a figure of many thousand
// arrows is drawn as many small paths. Shapes that overlap across two
// batches are composited twice, which only a plot of more than pathBatch
// shapes can show.
const pathBatch = 256

// Marker is a numbered ring around a site, such as one of the worst sites.
type Marker struct {
	At    Point
	Label string
}

// Markers draws a ring around each marker's site and its label beside it,
// both with a white halo so they read over the field. Each label goes to the
// first of eight places around its ring that stays inside the view and
// clear of the rings and labels already placed.
//
// A marker whose site falls outside the view is left out, as Dots does.
func (v *View) Markers(ms []Marker) {
	c := v.c
	dc := c.dc
	em := c.em
	a := v.area
	inside := ms[:0:0]
	for _, m := range ms {
		if x, y := v.Pixel(m.At); x >= float64(a.Min.X) && x <= float64(a.Max.X) && y >= float64(a.Min.Y) && y <= float64(a.Max.Y) {
			inside = append(inside, m)
		}
	}
	ms = inside
	r := 0.6 * em
	lw := math.Max(2, em/8)
	var taken []box
	for _, m := range ms {
		x, y := v.Pixel(m.At)
		taken = append(taken, box{x - r, y - r, x + r, y + r})
	}
	places := v.placeMarkerLabels(ms, taken)
	// Sample the background first: a ring over a dark field is drawn white
	// on a dark halo, and its label likewise.
	ringDark := make([]bool, len(ms))
	labelDark := make([]bool, len(ms))
	for k, m := range ms {
		x, y := v.Pixel(m.At)
		ringDark[k] = c.darkAround(x, y, r)
		b := places[k].box
		labelDark[k] = c.darkAround((b.x0+b.x1)/2, (b.y0+b.y1)/2, (b.x1-b.x0)/2)
	}
	dc.SetDash()
	for k, m := range ms {
		x, y := v.Pixel(m.At)
		fg, bg := contrast(ringDark[k])
		dc.DrawCircle(x, y, r)
		dc.SetColor(bg)
		dc.SetLineWidth(lw + 2*math.Max(1.5, 0.6*lw))
		dc.StrokePreserve()
		dc.SetColor(fg)
		dc.SetLineWidth(lw)
		dc.Stroke()
	}
	for k, p := range places {
		if ms[k].Label == "" {
			continue
		}
		ts := markerText
		ts.color, ts.haloColor = contrast(labelDark[k])
		c.text(ms[k].Label, p.x, p.y, p.ax, p.ay, ts)
	}
}

// contrast returns the ink and halo colours for marks over a dark or a
// light background.
func contrast(dark bool) (fg, bg color.Color) {
	if dark {
		return Halo, Ink
	}
	return Ink, Halo
}

// darkAround reports whether the pixels on a circle of radius r around
// (x, y) are dark on average (BT.709 luma below one half).
func (c *Canvas) darkAround(x, y, r float64) bool {
	var sum float64
	n := 0
	for k := range 16 {
		a := float64(k) * math.Pi / 8
		p := image.Pt(int(x+r*math.Cos(a)), int(y+r*math.Sin(a)))
		if p.In(c.img.Rect) {
			sum += Luma(c.img.RGBAAt(p.X, p.Y))
			n++
		}
	}
	return n > 0 && sum/float64(n) < 0.5
}

var markerText = textStyle{size: 0.9, bold: true, halo: true}

// labelPlace is where a marker label goes: its anchor point and alignment,
// and the box it covers.
type labelPlace struct {
	x, y, ax, ay float64
	box          box
}

// placeMarkerLabels chooses, for each marker, the first of eight places
// around its ring that lies inside the view and clear of taken (the rings)
// and of the labels placed before it; failing that, the first place.
func (v *View) placeMarkerLabels(ms []Marker, taken []box) []labelPlace {
	c := v.c
	em := c.em
	d := 0.6*em + 0.25*em
	dirs := [8][2]float64{{1, -1}, {1, 0}, {1, 1}, {0, 1}, {-1, 1}, {-1, 0}, {-1, -1}, {0, -1}}
	places := make([]labelPlace, len(ms))
	taken = append([]box(nil), taken...)
	for k, m := range ms {
		if m.Label == "" {
			continue
		}
		x, y := v.Pixel(m.At)
		for n, dir := range dirs {
			// Anchor the label's near corner or edge at distance d.
			ax, ay := (1-dir[0])/2, (1-dir[1])/2
			lx, ly := x+dir[0]*d*0.75, y+dir[1]*d*0.75
			if dir[0] == 0 || dir[1] == 0 {
				lx, ly = x+dir[0]*d, y+dir[1]*d
			}
			p := labelPlace{lx, ly, ax, ay, c.textBox(m.Label, lx, ly, ax, ay, markerText)}
			if n == 0 {
				places[k] = p
			}
			ok := p.box.inside(v.area)
			for _, t := range taken {
				if ok && p.box.overlaps(t) {
					ok = false
				}
			}
			if ok {
				places[k] = p
				break
			}
		}
		taken = append(taken, places[k].box)
	}
	return places
}

// Arrow is a displacement drawn from a point, such as a measured target
// movement.
type Arrow struct {
	At Point // tail, metres
	D  Point // displacement, metres (before exaggeration)
}

// ArrowStyle sets how Arrows draws.
type ArrowStyle struct {
	Color color.Color // nil means Ink
	// Width is the shaft width in pixels; 0 means a thin line and a half.
	Width float64
	// Exaggeration multiplies each displacement before it is drawn to the
	// panel's scale; 0 means 1. Displacements of microns on a panel of half
	// a metre need several thousand.
	Exaggeration float64
}

func (s ArrowStyle) norm(c *Canvas) ArrowStyle {
	if s.Width == 0 {
		s.Width = 1.5 * c.thin()
	}
	if s.Exaggeration == 0 {
		s.Exaggeration = 1
	}
	s.Color = orInk(s.Color)
	return s
}

// Arrows draws each displacement as an arrow from its tail, scaled by the
// style's exaggeration. Arrows shorter than a pixel are left out, and
// arrows are cut at the edge of the view (losing their head if it falls
// outside).
func (v *View) Arrows(as []Arrow, s ArrowStyle) {
	s = s.norm(v.c)
	dc := v.c.dc
	var heads [][3][2]float64
	a := v.area
	clip := box{float64(a.Min.X), float64(a.Min.Y), float64(a.Max.X), float64(a.Max.Y)}
	v.c.applyLine(LineStyle{Color: s.Color, Width: s.Width})
	for i, ar := range as {
		if i > 0 && i%pathBatch == 0 {
			dc.Stroke()
		}
		x, y := v.Pixel(ar.At)
		dx := v.PixelLen(ar.D.X * s.Exaggeration)
		dy := -v.PixelLen(ar.D.Y * s.Exaggeration)
		t0, t1, ok := clipSegment(clip, x, y, dx, dy)
		if !ok {
			continue
		}
		if t1 < 1 { // head outside: draw the visible part of the shaft only
			dc.MoveTo(x+t0*dx, y+t0*dy)
			dc.LineTo(x+t1*dx, y+t1*dy)
			continue
		}
		if h, ok := arrowPath(v.c, x+t0*dx, y+t0*dy, (1-t0)*dx, (1-t0)*dy, s.Width); ok {
			heads = append(heads, h)
		}
	}
	dc.Stroke()
	dc.SetColor(s.Color)
	for i, h := range heads {
		if i > 0 && i%pathBatch == 0 {
			dc.Fill()
		}
		dc.MoveTo(h[0][0], h[0][1])
		dc.LineTo(h[1][0], h[1][1])
		dc.LineTo(h[2][0], h[2][1])
		dc.ClosePath()
	}
	dc.Fill()
}

// clipSegment returns the parameter interval [t0, t1] of the segment
// (x, y) + t·(dx, dy), 0 <= t <= 1, that lies inside b (Liang and Barsky,
// "A new concept and method for line clipping", ACM TOG 3(1), 1984).
func clipSegment(b box, x, y, dx, dy float64) (t0, t1 float64, ok bool) {
	t0, t1 = 0, 1
	for _, e := range [4][2]float64{{-dx, x - b.x0}, {dx, b.x1 - x}, {-dy, y - b.y0}, {dy, b.y1 - y}} {
		p, q := e[0], e[1]
		if p == 0 {
			if q < 0 {
				return 0, 0, false
			}
			continue
		}
		r := q / p
		if p < 0 {
			t0 = math.Max(t0, r)
		} else {
			t1 = math.Min(t1, r)
		}
	}
	return t0, t1, t0 < t1
}

// ArrowExaggeration returns a round exaggeration factor (1, 2 or 5 times a
// power of ten) at which the largest displacement maxD, in metres, is drawn
// at most a tenth of the view's shorter side long.
func (v *View) ArrowExaggeration(maxD float64) float64 {
	if !(maxD > 0) {
		return 1
	}
	f := math.Min(v.ext.Dx(), v.ext.Dy()) / 10 / maxD
	mag := math.Pow(10, math.Floor(math.Log10(f)))
	for _, m := range []float64{5, 2, 1} {
		if m*mag <= f {
			return m * mag
		}
	}
	return mag
}

// arrowPath adds the shaft of an arrow from (x, y) by (dx, dy) pixels to the
// current path and returns its head triangle.
func arrowPath(c *Canvas, x, y, dx, dy, w float64) ([3][2]float64, bool) {
	l := math.Hypot(dx, dy)
	if l < 1 {
		return [3][2]float64{}, false
	}
	ux, uy := dx/l, dy/l
	hl := math.Min(0.45*l, math.Max(4*w, 0.55*c.em))
	hw := 0.45 * hl
	bx, by := x+dx-ux*hl, y+dy-uy*hl
	c.dc.MoveTo(x, y)
	c.dc.LineTo(bx+ux*0.5, by+uy*0.5)
	return [3][2]float64{{x + dx, y + dy}, {bx - uy*hw, by + ux*hw}, {bx + uy*hw, by - ux*hw}}, true
}

// ScaleArrow draws, in the lower left corner of the view, a horizontal
// arrow for a displacement of length metres at the style's exaggeration,
// with label above it (for example "25 µm, drawn ×2000").
func (v *View) ScaleArrow(length float64, label string, s ArrowStyle) {
	s = s.norm(v.c)
	c := v.c
	em := c.em
	lp := v.PixelLen(length * s.Exaggeration)
	ts := textStyle{size: tickTextEm}
	tw := c.measure(label, ts)
	x0 := float64(v.area.Min.X) + 1.0*em
	y1 := float64(v.area.Max.Y) - 1.0*em
	b := box{x0, y1 - 3.2*em, x0 + math.Max(lp, tw) + 1.6*em, y1}
	c.fillBox(b, color.NRGBA{255, 255, 255, 235})
	c.strokeBox(b, LineStyle{Color: Frame})
	ax, ay := x0+0.8*em, y1-0.9*em
	h, ok := arrowPath(c, ax, ay, lp, 0, s.Width)
	c.applyLine(LineStyle{Color: s.Color, Width: s.Width})
	c.dc.Stroke()
	if ok {
		c.dc.MoveTo(h[0][0], h[0][1])
		c.dc.LineTo(h[1][0], h[1][1])
		c.dc.LineTo(h[2][0], h[2][1])
		c.dc.ClosePath()
		c.dc.SetColor(s.Color)
		c.dc.Fill()
	}
	c.text(label, ax, y1-2.0*em, 0, 0.5, ts)
}

// Contour draws the lines where the bilinear surface through g equals
// level (see the function Contour), and writes label, if any, on the
// longest of them with a white halo.
func (v *View) Contour(g *Grid, level float64, s LineStyle, label string) {
	lines := Contour(g, level)
	longest, best := -1, 0.0
	for k, l := range lines {
		v.Polyline(l, s)
		var n float64
		for i := 1; i < len(l); i++ {
			n += math.Hypot(l[i].X-l[i-1].X, l[i].Y-l[i-1].Y)
		}
		if n > best {
			longest, best = k, n
		}
	}
	if label != "" && longest >= 0 {
		l := lines[longest]
		x, y := v.Pixel(l[len(l)/2])
		v.c.text(label, x, y, 0.5, 0.5, textStyle{size: 0.9, bold: true, halo: true})
	}
}

// LegendKind is the kind of sample a legend entry shows.
type LegendKind int

const (
	LegendLine   LegendKind = iota // a stroke (series, contour)
	LegendSwatch                   // a filled square (band, bar)
	LegendDot                      // a filled circle (targets)
	LegendRing                     // a ring (marked sites)
	LegendArrow                    // an arrow (displacements)
)

// LegendItem is one entry of a legend.
type LegendItem struct {
	Label string
	Kind  LegendKind
	Color color.Color // nil means Ink
	Dash  []float64   // for LegendLine
	Width float64     // line width in pixels for LegendLine; 0 means 2 thin lines
	// Length is the length of the sample in pixels, for a LegendArrow that
	// is a scale key (a displacement drawn at a stated exaggeration); 0
	// means the usual 2.4 em. The samples of a legend share the longest.
	Length float64
}

// sampleWidth returns the width of the samples of a legend: 2.4 em, or the
// longest Length asked for.
func sampleWidth(em float64, items []LegendItem) float64 {
	w := 2.4 * em
	for _, it := range items {
		w = math.Max(w, it.Length)
	}
	return w
}

// Corner names a corner of a plot area.
type Corner int

const (
	TopRight Corner = iota
	TopLeft
	BottomLeft
	BottomRight
)

// Legend draws a boxed legend in the given corner of the view.
func (v *View) Legend(items []LegendItem, corner Corner) {
	drawLegend(v.c, v.area, items, corner)
}

func legendSize(c *Canvas, items []LegendItem) (w, h float64) {
	em := c.em
	ts := textStyle{size: tickTextEm}
	tw := 0.0
	for _, it := range items {
		tw = math.Max(tw, c.measure(it.Label, ts))
	}
	return 0.7*em + sampleWidth(em, items) + 0.6*em + tw + 0.7*em, 0.5*em + float64(len(items))*1.5*em + 0.5*em
}

func legendBox(c *Canvas, area image.Rectangle, items []LegendItem, corner Corner, inset float64) box {
	w, h := legendSize(c, items)
	x0, y0 := float64(area.Max.X)-inset-w, float64(area.Min.Y)+inset
	if corner == TopLeft || corner == BottomLeft {
		x0 = float64(area.Min.X) + inset
	}
	if corner == BottomLeft || corner == BottomRight {
		y0 = float64(area.Max.Y) - inset - h
	}
	return box{x0, y0, x0 + w, y0 + h}
}

func drawLegend(c *Canvas, area image.Rectangle, items []LegendItem, corner Corner) {
	if len(items) == 0 {
		return
	}
	drawLegendBox(c, legendBox(c, area, items, corner, 0.8*c.em), items)
}

func drawLegendBox(c *Canvas, b box, items []LegendItem) {
	em := c.em
	c.fillBox(b, color.NRGBA{255, 255, 255, 240})
	c.strokeBox(b, LineStyle{Color: Frame})
	dc := c.dc
	for k, it := range items {
		cy := b.y0 + 0.5*em + (float64(k)+0.5)*1.5*em
		sx0, sx1 := b.x0+0.7*em, b.x0+0.7*em+sampleWidth(em, items)
		col := orInk(it.Color)
		switch it.Kind {
		case LegendLine:
			w := it.Width
			if w == 0 {
				w = 2 * c.thin()
			}
			c.applyLine(LineStyle{Color: col, Width: w, Dash: it.Dash})
			dc.DrawLine(sx0, cy, sx1, cy)
			dc.Stroke()
			dc.SetDash()
		case LegendSwatch:
			c.fillBox(box{sx0, cy - 0.5*em, sx1, cy + 0.5*em}, col)
			c.strokeBox(box{sx0, cy - 0.5*em, sx1, cy + 0.5*em}, LineStyle{Color: Frame})
		case LegendDot:
			dc.DrawCircle((sx0+sx1)/2, cy, 0.3*em)
			dc.SetColor(col)
			dc.Fill()
		case LegendRing:
			dc.DrawCircle((sx0+sx1)/2, cy, 0.5*em)
			c.applyLine(LineStyle{Color: col, Width: math.Max(2, em/8)})
			dc.Stroke()
		case LegendArrow:
			w := 1.5 * c.thin()
			l := sx1 - sx0
			if it.Length > 0 {
				l = it.Length
			}
			h, _ := arrowPath(c, sx0, cy, l, 0, w)
			c.applyLine(LineStyle{Color: col, Width: w})
			dc.Stroke()
			dc.MoveTo(h[0][0], h[0][1])
			dc.LineTo(h[1][0], h[1][1])
			dc.LineTo(h[2][0], h[2][1])
			dc.ClosePath()
			dc.SetColor(col)
			dc.Fill()
		}
		c.text(it.Label, sx1+0.6*em, cy, 0, 0.5, textStyle{size: tickTextEm})
	}
}
