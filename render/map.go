package render

import (
	"image"
	"image/color"
	"math"
	"strings"
)

// LengthUnit is the unit the axes of a map are labelled in.
type LengthUnit struct {
	Name   string  // as printed in axis titles, e.g. "in"
	Metres float64 // size of one unit in metres
}

// Axis units. The inch is the international inch of 1959, 25.4 mm exactly.
var (
	Inch       = LengthUnit{"in", 0.0254}
	Millimetre = LengthUnit{"mm", 0.001}
)

// MapSpec describes the layout of a panel map. Zero fields take the
// defaults stated beside them.
type MapSpec struct {
	// Width is the image width in pixels; 0 means 2400, and widths below
	// 200 are raised to 200. Text, margins and line widths scale with it.
	Width int
	// Extent is the part of the panel each view shows, in metres in panel
	// coordinates (usually the panel outline); a small margin is added
	// around it. It must have positive width and height.
	Extent Rect
	// Views is the number of views, all showing Extent and sharing one
	// colour bar (two for a before/after comparison); 0 means 1.
	Views int
	// Columns is how many views go side by side before the next row
	// starts (for one view per layer); 0 means all in one row.
	Columns int
	// Title holds the lines of the title block; the first is set in bold.
	Title []string
	// Captions, if given, are printed above the views, one per view.
	Captions []string
	// Unit labels the axes; the zero value means Inch.
	Unit LengthUnit
	// NoColorBar leaves out the space for a colour bar below the views.
	NoColorBar bool
	// Legend, if given, is drawn at the right of the title block, clear of
	// the panel.
	Legend []LegendItem
}

// Map is a canvas laid out for one or more views of a panel, with a title
// block, axes and an optional colour bar. Draw on each view in panel
// coordinates, then call ColorBar and EncodePNG.
type Map struct {
	*Canvas
	// Views are the panel views from left to right.
	Views []*View

	bar          image.Rectangle
	barLo, barHi float64 // range of the colour bar drawn, for marks
	barDrawn     bool
}

// View is one drawing of the panel on a Map, mapping panel coordinates in
// metres (y up) to pixels (y down) at a uniform scale.
type View struct {
	c    *Canvas
	area image.Rectangle // the plot area in pixels
	ext  Rect            // panel coordinates shown in area
	s    float64         // pixels per metre
	inv  float64         // metres per pixel
}

// Layout, in multiples of the body text size em.
const (
	mapEmDivisor = 100  // em = image width / 100
	marginEm     = 1.2  // outer margin
	tickEm       = 0.45 // tick length
	tickTextEm   = 0.85 // size of tick labels
	titleEm      = 1.35 // size of the first title line
	extentPad    = 0.03 // margin around Extent, as a fraction of its larger side
)

// NewMap lays out a map and draws its title block, axes and frames. It
// panics if spec.Extent is empty.
func NewMap(spec MapSpec) *Map {
	if !(spec.Extent.Dx() > 0 && spec.Extent.Dy() > 0) {
		panic("render: map extent must have positive size")
	}
	w := spec.Width
	if w <= 0 {
		w = 2400
	}
	w = max(w, minSide)
	n := max(spec.Views, 1)
	cols := n
	if spec.Columns > 0 {
		cols = min(spec.Columns, n)
	}
	rows := (n + cols - 1) / cols
	unit := spec.Unit
	if unit.Metres == 0 {
		unit = Inch
	}
	em := math.Max(10, float64(w)/mapEmDivisor)
	pad := extentPad * math.Max(spec.Extent.Dx(), spec.Extent.Dy())
	ext := spec.Extent.Inset(-pad)
	aspect := ext.Dy() / ext.Dx()

	// A first guess of the plot width fixes the tick density, which fixes the
	// width of the y tick labels, which fixes the plot width.
	probe := newCanvas(1, 1, em)
	margin := marginEm * em
	pw0 := (float64(w) - 2*margin - float64(cols)*7*em) / float64(cols)
	xt, xstep := Ticks(ext.Min.X/unit.Metres, ext.Max.X/unit.Metres, clampInt(int(pw0/(4.5*em)), 3, 10))
	yt, ystep := Ticks(ext.Min.Y/unit.Metres, ext.Max.Y/unit.Metres, clampInt(int(pw0*aspect/(3.5*em)), 3, 14))
	labelW := 0.0
	for _, v := range yt {
		labelW = math.Max(labelW, probe.measure(TickLabel(v, ystep), textStyle{size: tickTextEm}))
	}
	axisTitleW := 1.8 * em
	left0 := margin + axisTitleW + labelW + tickEm*em + 0.4*em
	leftN := labelW + tickEm*em + 0.4*em + 1.4*em
	pw := math.Floor((float64(w) - left0 - float64(cols-1)*leftN - margin) / float64(cols))
	ph := math.Ceil(pw * aspect)

	top := margin
	for k := range spec.Title {
		if k == 0 {
			top += titleEm * 1.45 * em
		} else {
			top += 1.45 * em
		}
	}
	if len(spec.Title) > 0 {
		top += 0.7 * em
	}
	var legend box
	if len(spec.Legend) > 0 {
		lw, lh := legendSize(probe, spec.Legend)
		legend = box{float64(w) - margin - lw, margin, float64(w) - margin, margin + lh}
		top = math.Max(top, legend.y1+0.8*em)
	}
	// A caption wider than its view is broken at "; " into lines that fit
	// (each still shrunk or cut by fitLine if one part alone is too wide).
	captionStyle := textStyle{size: 1.1, bold: true}
	captions := make([][]string, len(spec.Captions))
	lines := 0
	for i, cp := range spec.Captions {
		captions[i] = wrapCaption(probe, cp, captionStyle, pw)
		lines = max(lines, len(captions[i]))
	}
	captionStep := 1.45 * em * captionStyle.size
	captionH := 0.0
	if len(spec.Captions) > 0 {
		captionH = 1.9*em + float64(lines-1)*captionStep
	}
	xAxisH := 3.8 * em
	rowH := captionH + ph + xAxisH + 0.6*em
	barH := 0.0
	if !spec.NoColorBar {
		barH = 7.4 * em
	}
	h := int(math.Ceil(top + float64(rows)*rowH - 0.6*em + barH + margin))

	m := &Map{Canvas: newCanvas(w, h, em)}
	c := m.Canvas

	// Title block.
	// A line too long for the canvas (or for the room beside the legend)
	// is set smaller and, if need be, cut with an ellipsis, rather than run
	// off the edge or under the legend.
	y := margin
	for k, line := range spec.Title {
		ts := textStyle{size: 1}
		if k == 0 {
			ts = textStyle{size: titleEm, bold: true}
		}
		step := 1.45 * em * math.Max(ts.size, 1)
		room := float64(w) - 2*margin
		if len(spec.Legend) > 0 && y < legend.y1 {
			room = legend.x0 - margin - em
		}
		line, ts = fitLine(c, line, ts, room)
		c.text(line, margin, y, 0, 0, ts)
		y += step
	}

	if len(spec.Legend) > 0 {
		drawLegendBox(c, legend, spec.Legend)
	}

	for i := range n {
		row, col := i/cols, i%cols
		x := left0 + float64(col)*(pw+leftN)
		rowTop := top + float64(row)*rowH
		v := &View{c: c, ext: ext, s: pw / ext.Dx(), inv: ext.Dx() / pw}
		v.area = image.Rect(int(x), int(rowTop+captionH), int(x+pw), int(rowTop+captionH+ph))
		m.Views = append(m.Views, v)
		if i < len(spec.Captions) {
			for k, line := range captions[i] {
				line, ts := fitLine(c, line, captionStyle, pw)
				c.text(line, x+pw/2, rowTop+float64(k)*captionStep, 0.5, 0, ts)
			}
		}
		v.drawAxes(xt, xstep, yt, ystep, unit, col == 0)
	}
	if !spec.NoColorBar {
		first, last := m.Views[0].area, m.Views[cols-1].area
		span := float64(last.Max.X - first.Min.X)
		bw := 0.7 * span
		if cols > 1 {
			bw = 0.5 * span
		}
		bx := float64(first.Min.X) + (span-bw)/2
		by := float64(m.Views[n-1].area.Max.Y) + xAxisH + 1.8*em // room above for marks
		m.bar = image.Rect(int(bx), int(by), int(bx+bw), int(by+1.1*em))
	}
	return m
}

func clampInt(v, lo, hi int) int { return max(lo, min(hi, v)) }

// drawAxes draws the frame, ticks and tick labels of a view, and the axis
// titles (the y title only on the first view of a row).
func (v *View) drawAxes(xt []float64, xstep float64, yt []float64, ystep float64, unit LengthUnit, yTitle bool) {
	c := v.c
	em := c.em
	a := v.area
	fb := box{float64(a.Min.X), float64(a.Min.Y), float64(a.Max.X), float64(a.Max.Y)}
	c.strokeBox(fb.grow(0.5*c.thin()), LineStyle{Color: Frame}) // just outside the area, so fields never cover it
	ts := textStyle{size: tickTextEm}
	c.applyLine(LineStyle{Color: Frame})
	tl := tickEm * em
	for _, t := range xt {
		px, _ := v.Pixel(Point{t * unit.Metres, 0})
		c.dc.DrawLine(px, fb.y1, px, fb.y1+tl)
		c.text(TickLabel(t, xstep), px, fb.y1+tl+0.45*em, 0.5, 0, ts)
	}
	for _, t := range yt {
		_, py := v.Pixel(Point{0, t * unit.Metres})
		c.dc.DrawLine(fb.x0-tl, py, fb.x0, py)
		c.text(TickLabel(t, ystep), fb.x0-tl-0.35*em, py, 1, 0.5, ts)
	}
	c.applyLine(LineStyle{Color: Frame})
	c.dc.Stroke()
	c.text("x ["+unit.Name+"]", (fb.x0+fb.x1)/2, fb.y1+tl+2.1*em, 0.5, 0, textStyle{})
	if yTitle {
		c.textUp("y ["+unit.Name+"]", float64(c.Bounds().Min.X)+marginEm*em+0.6*em, (fb.y0+fb.y1)/2, textStyle{})
	}
}

// ColorBar draws the colour scale below the views: the palette from lo
// (left end) to hi (right end), ticks at round values in between, and label
// (the quantity and its unit, e.g. "drift [dB]") beneath. lo may exceed hi,
// to run a palette backwards (for a yield, where low values are the bad
// ones). It does nothing if the map was made with NoColorBar.
func (m *Map) ColorBar(p *Palette, lo, hi float64, label string) {
	if m.bar.Empty() {
		return
	}
	c := m.Canvas
	b := m.bar
	bw := b.Dx()
	m.barLo, m.barHi, m.barDrawn = lo, hi, true
	for i := range bw {
		col := p.At(float64(i) / float64(bw-1))
		for j := b.Min.Y; j < b.Max.Y; j++ {
			o := c.img.PixOffset(b.Min.X+i, j)
			c.img.Pix[o], c.img.Pix[o+1], c.img.Pix[o+2], c.img.Pix[o+3] = col.R, col.G, col.B, 255
		}
	}
	fb := box{float64(b.Min.X), float64(b.Min.Y), float64(b.Max.X), float64(b.Max.Y)}
	c.strokeBox(fb.grow(0.5*c.thin()), LineStyle{Color: Frame})
	em := c.em
	ticks, step := Ticks(math.Min(lo, hi), math.Max(lo, hi), clampInt(int(float64(bw)/(5*em)), 2, 11))
	tl := tickEm * em
	ts := textStyle{size: tickTextEm}
	c.applyLine(LineStyle{Color: Frame})
	for _, t := range ticks {
		x := fb.x0 + 0.5
		if hi != lo {
			x += (t - lo) / (hi - lo) * float64(bw-1)
		}
		c.dc.DrawLine(x, fb.y1, x, fb.y1+tl)
		c.text(TickLabel(t, step), x, fb.y1+tl+0.45*em, 0.5, 0, ts)
	}
	c.applyLine(LineStyle{Color: Frame})
	c.dc.Stroke()
	c.text(label, (fb.x0+fb.x1)/2, fb.y1+tl+2.1*em, 0.5, 0, textStyle{})
}

// ColorBarMark marks value v on the colour bar drawn by ColorBar with a
// line across the bar and label above it, such as a spec limit. Values
// outside the bar's range, and calls before ColorBar, draw nothing.
func (m *Map) ColorBarMark(v float64, label string) {
	lo, hi := m.barLo, m.barHi
	if !m.barDrawn || hi == lo || (v-lo)*(v-hi) > 0 {
		return
	}
	c := m.Canvas
	b := m.bar
	x := float64(b.Min.X) + 0.5 + (v-lo)/(hi-lo)*float64(b.Dx()-1)
	y0, y1 := float64(b.Min.Y)-0.35*c.em, float64(b.Max.Y)
	c.applyLine(LineStyle{Color: Halo, Width: 3 * c.thin()})
	c.dc.DrawLine(x, y0, x, y1)
	c.dc.Stroke()
	c.applyLine(LineStyle{Color: Ink, Width: 1.5 * c.thin()})
	c.dc.DrawLine(x, y0, x, y1)
	c.dc.Stroke()
	if label != "" {
		c.text(label, x, y0-0.3*c.em, 0.5, 1, textStyle{size: 0.8})
	}
}

// ColorBarRect returns the pixel rectangle of the colour bar (empty with
// NoColorBar). Its first column has the palette's first colour and its last
// column the last colour.
func (m *Map) ColorBarRect() image.Rectangle { return m.bar }

// Area returns the view's plot area in pixels.
func (v *View) Area() image.Rectangle { return v.area }

// Extent returns the panel rectangle the view shows, in metres.
func (v *View) Extent() Rect { return v.ext }

// Pixel returns the image position of panel point p, in pixels with
// fractions: pixel (i, j) covers [i, i+1) x [j, j+1).
func (v *View) Pixel(p Point) (x, y float64) {
	return float64(v.area.Min.X) + (p.X-v.ext.Min.X)*v.s,
		float64(v.area.Min.Y) + (v.ext.Max.Y-p.Y)*v.s
}

// PixelCenter returns the panel point at the centre of pixel (i, j): the
// point at which Field evaluates the field for that pixel.
func (v *View) PixelCenter(i, j int) Point {
	return Point{
		v.ext.Min.X + (float64(i-v.area.Min.X)+0.5)*v.inv,
		v.ext.Max.Y - (float64(j-v.area.Min.Y)+0.5)*v.inv,
	}
}

// PixelLen returns how many pixels a length of d metres covers, so that the
// caller can leave out details too small to see.
func (v *View) PixelLen(d float64) float64 { return d * v.s }

// pixelSpan returns the pixel columns (or rows) lo..hi inclusive whose
// centres at(i) fall in [a, b], within [first, last].
func pixelSpan(first, last int, a, b float64, at func(int) float64, increasing bool) (int, int) {
	lo, hi := first, last
	if increasing {
		for lo <= last && at(lo) < a {
			lo++
		}
		for hi >= lo && at(hi) > b {
			hi--
		}
	} else {
		for lo <= last && at(lo) > b {
			lo++
		}
		for hi >= lo && at(hi) < a {
			hi--
		}
	}
	return lo, hi
}

// span returns the pixel columns i0..i1 and rows j0..j1 (inclusive) whose
// centres lie in r, clipped to the plot area, and the x of each column.
func (v *View) span(r Rect) (i0, i1, j0, j1 int, xs []float64) {
	a := v.area
	colX := func(i int) float64 { return v.PixelCenter(i, a.Min.Y).X }
	rowY := func(j int) float64 { return v.PixelCenter(a.Min.X, j).Y }
	// Start from the analytic guess and let pixelSpan trim exactly.
	gx0 := clampInt(int(math.Floor(float64(a.Min.X)+(r.Min.X-v.ext.Min.X)*v.s))-1, a.Min.X, a.Max.X-1)
	gx1 := clampInt(int(math.Ceil(float64(a.Min.X)+(r.Max.X-v.ext.Min.X)*v.s))+1, a.Min.X, a.Max.X-1)
	gy0 := clampInt(int(math.Floor(float64(a.Min.Y)+(v.ext.Max.Y-r.Max.Y)*v.s))-1, a.Min.Y, a.Max.Y-1)
	gy1 := clampInt(int(math.Ceil(float64(a.Min.Y)+(v.ext.Max.Y-r.Min.Y)*v.s))+1, a.Min.Y, a.Max.Y-1)
	i0, i1 = pixelSpan(gx0, gx1, r.Min.X, r.Max.X, colX, true)
	j0, j1 = pixelSpan(gy0, gy1, r.Min.Y, r.Max.Y, rowY, false)
	if i1 >= i0 {
		xs = make([]float64, i1-i0+1)
		for k := range xs {
			xs[k] = colX(i0 + k)
		}
	}
	return
}

// Field paints the pixels whose centres lie in r with the colour of
// f(x, y) on palette p over [lo, hi], writing straight into the image. f is
// called once per pixel, row by row, with panel coordinates in metres.
// Draw the field first: it overwrites whatever is beneath.
func (v *View) Field(r Rect, f func(x, y float64) float64, p *Palette, lo, hi float64) {
	i0, _, j0, j1, xs := v.span(r)
	if xs == nil {
		return
	}
	img := v.c.img
	scale, base := lutMap(lo, hi)
	nan := p.NaN
	for j := j0; j <= j1; j++ {
		y := v.PixelCenter(i0, j).Y
		off := img.PixOffset(i0, j)
		pix := img.Pix[off : off+4*len(xs) : off+4*len(xs)]
		for k, x := range xs {
			val := f(x, y)
			col := nan
			if val == val {
				col = p.lut[lutIndex((val-lo)*scale+base)]
			}
			q := pix[4*k : 4*k+4 : 4*k+4]
			q[0], q[1], q[2], q[3] = col.R, col.G, col.B, 255
		}
	}
}

// FieldGrid paints the pixels whose centres lie in g.Bounds with the
// bilinear interpolation of g (exactly g.At at each pixel centre) on
// palette p over [lo, hi]. Use it for a field that is costly to evaluate:
// sample it on a grid a few pixels apart and let FieldGrid upsample.
func (v *View) FieldGrid(g *Grid, p *Palette, lo, hi float64) {
	i0, _, j0, j1, xs := v.span(g.Bounds)
	if xs == nil {
		return
	}
	ci := make([]int, len(xs))
	cf := make([]float64, len(xs))
	for k, x := range xs {
		ci[k], cf[k] = cell(x, g.Bounds.Min.X, g.Bounds.Max.X, g.NX)
	}
	img := v.c.img
	scale, base := lutMap(lo, hi)
	for j := j0; j <= j1; j++ {
		gj, fy := cell(v.PixelCenter(i0, j).Y, g.Bounds.Min.Y, g.Bounds.Max.Y, g.NY)
		off := img.PixOffset(i0, j)
		pix := img.Pix[off : off+4*len(xs) : off+4*len(xs)]
		for k := range xs {
			val := g.bilinear(ci[k], cf[k], gj, fy)
			col := p.NaN
			if val == val {
				col = p.lut[lutIndex((val-lo)*scale+base)]
			}
			q := pix[4*k : 4*k+4 : 4*k+4]
			q[0], q[1], q[2], q[3] = col.R, col.G, col.B, 255
		}
	}
}

// StrokeRect draws the outline of r (panel outline, border, part outline).
func (v *View) StrokeRect(r Rect, s LineStyle) {
	x0, y0 := v.Pixel(Point{r.Min.X, r.Max.Y})
	x1, y1 := v.Pixel(Point{r.Max.X, r.Min.Y})
	v.c.strokeBox(box{x0, y0, x1, y1}, s)
}

// StrokeRects draws the outlines of many rectangles in one pass, cheaper
// than StrokeRect for hundreds of part outlines.
func (v *View) StrokeRects(rs []Rect, s LineStyle) {
	dc := v.c.dc
	// Stroke in small batches: gg's rasterizer slows down badly (its cell search
	// grows with the path) when thousands of rectangles share one path.
	const batch = 4
	for k := 0; k < len(rs); k += batch {
		for _, r := range rs[k:min(k+batch, len(rs))] {
			x0, y0 := v.Pixel(Point{r.Min.X, r.Max.Y})
			x1, y1 := v.Pixel(Point{r.Max.X, r.Min.Y})
			dc.DrawRectangle(x0, y0, x1-x0, y1-y0)
		}
		v.c.applyLine(s)
		dc.Stroke()
	}
	dc.SetDash()
}

// FillRect fills r with col (which may be translucent).
func (v *View) FillRect(r Rect, col color.Color) {
	x0, y0 := v.Pixel(Point{r.Min.X, r.Max.Y})
	x1, y1 := v.Pixel(Point{r.Max.X, r.Min.Y})
	v.c.fillBox(box{x0, y0, x1, y1}, col)
}

// Polyline draws a line through pts.
func (v *View) Polyline(pts []Point, s LineStyle) {
	if len(pts) < 2 {
		return
	}
	dc := v.c.dc
	for k, p := range pts {
		x, y := v.Pixel(p)
		if k == 0 {
			dc.MoveTo(x, y)
		} else {
			dc.LineTo(x, y)
		}
	}
	v.c.applyLine(s)
	dc.Stroke()
	dc.SetDash()
}

// Label writes text centred on panel point at, with a white halo so that it
// reads over any background.
func (v *View) Label(at Point, text string) {
	x, y := v.Pixel(at)
	v.c.text(text, x, y, 0.5, 0.5, textStyle{size: 0.9, halo: true})
}

// wrapCaption breaks caption after its "; " and ", " into the fewest
// lines, filled greedily, that fit room in style ts; a caption that fits
// is one line.
func wrapCaption(c *Canvas, caption string, ts textStyle, room float64) []string {
	if c.measure(caption, ts) <= room {
		return []string{caption}
	}
	// The pieces, each ending in its separator's punctuation.
	var pieces []string
	rest := caption
	for {
		i := strings.Index(rest, "; ")
		if j := strings.Index(rest, ", "); j >= 0 && (i < 0 || j < i) {
			i = j
		}
		if i < 0 {
			pieces = append(pieces, rest)
			break
		}
		pieces = append(pieces, rest[:i+1])
		rest = rest[i+2:]
	}
	var out []string
	line := ""
	for _, p := range pieces {
		switch {
		case line == "":
			line = p
		case c.measure(line+" "+p, ts) <= room:
			line += " " + p
		default:
			out = append(out, line)
			line = p
		}
	}
	return append(out, line)
}
