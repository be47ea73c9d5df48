package render

import (
	"image"
	"image/color"
	"math"
)

// Plot is an XY chart of one or more panels stacked top to bottom that
// share one x axis, such as coupling, impedance and directivity against
// offset. Fill in the fields and call Render. Zero fields take the defaults
// stated beside them.
type Plot struct {
	Title  string
	XLabel string // quantity and unit, e.g. "offset [mil]"
	// XMin and XMax fix the x range; when both are zero it covers the data.
	XMin, XMax float64
	// Axes are the panels of the plot, drawn top to bottom; only the
	// bottom one has x tick labels.
	Axes []*Axes
}

// Axes is one panel of a Plot.
type Axes struct {
	YLabel string // quantity and unit, e.g. "coupling [dB]"
	// YMin and YMax fix the y range; when both are zero it covers the data
	// (bands and horizontal lines included) with a small margin.
	YMin, YMax float64
	// Weight is the panel's share of the height relative to the others;
	// 0 means 1.
	Weight float64

	Lines  []Line
	Bands  []Band
	HLines []HLine
	VLines []VLine
	Hists  []Hist

	// Legend is where the legend goes; Auto (the zero value) picks the
	// corner that covers the fewest data points. Lines, bands and
	// histograms with a label get an entry.
	Legend LegendPlace
}

// LegendPlace says where a plot panel's legend goes.
type LegendPlace int

const (
	Auto       LegendPlace = iota // the corner covering the fewest data points
	NoLegend                      // no legend
	AtTopRight                    // fixed corners
	AtTopLeft
	AtBottomLeft
	AtBottomRight
	// Outside puts the legend to the right of the panel, clear of the data
	// whatever it covers; the plot narrows to make room.
	Outside
)

// MarkerShape is the symbol drawn at each point of a Line.
type MarkerShape int

const (
	NoMarker MarkerShape = iota
	Circle
	Square
	Triangle
	Diamond
)

// Line is a data series drawn as a polyline. Points with a NaN coordinate
// break the line.
type Line struct {
	Label  string
	X, Y   []float64
	Color  color.Color // nil means the next Qualitative colour, counted across the plot
	Width  float64     // pixels; 0 means about a sixth of the text size, < 0 draws markers only
	Dash   []float64   // in multiples of the line width; nil means solid
	Marker MarkerShape
}

// Band is a horizontal strip from Lo to Hi across the whole panel, such as
// a spec window.
type Band struct {
	Lo, Hi float64
	Label  string
	Color  color.Color // nil means a pale translucent green
}

// HLine is a horizontal reference line.
type HLine struct {
	Y     float64
	Label string // written at the right end, above the line
	Color color.Color
	Dash  []float64 // pixels; nil means solid
}

// VLine is a vertical marker line with a label at the top of the panel,
// such as the offset at which a curve leaves its spec.
type VLine struct {
	X     float64
	Label string
	Color color.Color // nil means Ink
	Dash  []float64   // pixels; nil means a short dash
}

// Hist is a histogram: Counts[k] is the height of the bin from Edges[k] to
// Edges[k+1].
type Hist struct {
	Label  string
	Edges  []float64
	Counts []float64
	Color  color.Color // nil means the next Qualitative colour, counted across the plot
}

// IntegerHist bins whole numbers into unit-wide bins centred on each value
// from the smallest to the largest, such as good parts per panel.
func IntegerHist(label string, data []int) Hist {
	if len(data) == 0 {
		return Hist{Label: label}
	}
	lo, hi := data[0], data[0]
	for _, v := range data {
		lo, hi = min(lo, v), max(hi, v)
	}
	h := Hist{Label: label, Counts: make([]float64, hi-lo+1)}
	for k := lo; k <= hi+1; k++ {
		h.Edges = append(h.Edges, float64(k)-0.5)
	}
	for _, v := range data {
		h.Counts[v-lo]++
	}
	return h
}

// minSide is the smallest width or height of a plot or map, in pixels:
// below it the fixed margins leave no room to draw.
const minSide = 200

// DefaultBand is the fill of a Band without a colour.
var DefaultBand = color.NRGBA{60, 170, 90, 46}

// plotFrame maps data to pixels inside one panel's plot area.
type plotFrame struct {
	area           image.Rectangle
	x0, x1, y0, y1 float64 // data range
}

func (f plotFrame) px(x float64) float64 {
	return float64(f.area.Min.X) + (x-f.x0)/(f.x1-f.x0)*float64(f.area.Dx())
}

func (f plotFrame) py(y float64) float64 {
	return float64(f.area.Max.Y) - (y-f.y0)/(f.y1-f.y0)*float64(f.area.Dy())
}

func finiteRange(lo, hi *float64, vs ...float64) {
	for _, v := range vs {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			*lo, *hi = math.Min(*lo, v), math.Max(*hi, v)
		}
	}
}

func (p *Plot) xRange() (float64, float64) {
	if p.XMin != 0 || p.XMax != 0 {
		return p.XMin, p.XMax
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, a := range p.Axes {
		for _, l := range a.Lines {
			finiteRange(&lo, &hi, l.X...)
		}
		for _, h := range a.Hists {
			finiteRange(&lo, &hi, h.Edges...)
		}
		for _, v := range a.VLines {
			finiteRange(&lo, &hi, v.X)
		}
	}
	return fixRange(lo, hi)
}

// fixRange turns an empty or degenerate range into a usable one.
func fixRange(lo, hi float64) (float64, float64) {
	if lo > hi {
		return 0, 1
	}
	if lo == hi {
		d := math.Max(math.Abs(lo)*0.1, 1)
		return lo - d, hi + d
	}
	return lo, hi
}

func (a *Axes) yRange(x0, x1 float64) (float64, float64) {
	if a.YMin != 0 || a.YMax != 0 {
		return a.YMin, a.YMax
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, l := range a.Lines {
		for k := range l.Y {
			if k < len(l.X) && l.X[k] >= x0 && l.X[k] <= x1 {
				finiteRange(&lo, &hi, l.Y[k])
			}
		}
	}
	for _, b := range a.Bands {
		finiteRange(&lo, &hi, b.Lo, b.Hi)
	}
	for _, h := range a.HLines {
		finiteRange(&lo, &hi, h.Y)
	}
	for _, h := range a.Hists {
		lo = math.Min(lo, 0)
		finiteRange(&lo, &hi, h.Counts...)
	}
	lo, hi = fixRange(lo, hi)
	pad := 0.06 * (hi - lo)
	if len(a.Hists) > 0 && lo == 0 {
		return 0, hi + pad // histograms stand on zero
	}
	return lo - pad, hi + pad
}

// Render draws the plot on a width x height canvas (at least minSide on
// each side). Text scales with the smaller of the width and 1.4 times the
// height.
func (p *Plot) Render(width, height int) *Canvas {
	width, height = max(width, minSide), max(height, minSide)
	em := math.Max(10, math.Min(float64(width), 1.4*float64(height))/64)
	c := newCanvas(width, height, em)
	margin := marginEm * em
	ts := textStyle{size: tickTextEm}

	x0, x1 := p.xRange()
	top := margin
	if p.Title != "" {
		t, ts := fitTitle(c, p.Title, float64(width)-2*margin)
		c.text(t, margin, top, 0, 0, ts)
		top += 2.2 * em
	} else {
		top += 0.5 * em
	}
	bottom := float64(height) - margin - 3.4*em
	// Widest y tick label over all panels fixes the left edge.
	type prepared struct {
		a      *Axes
		y0, y1 float64
		ticks  []float64
		step   float64
	}
	var preps []prepared
	var weights float64
	for _, a := range p.Axes {
		weights += weightOf(a)
	}
	if weights == 0 {
		return c
	}
	gap := 1.3 * em
	avail := bottom - top - gap*float64(max(len(p.Axes)-1, 0))
	labelW := 0.0
	for _, a := range p.Axes {
		y0, y1 := a.yRange(x0, x1)
		h := avail * weightOf(a) / weights
		ticks, step := Ticks(y0, y1, clampInt(int(h/(2.2*em)), 2, 10))
		for _, t := range ticks {
			labelW = math.Max(labelW, c.measure(TickLabel(t, step), ts))
		}
		preps = append(preps, prepared{a, y0, y1, ticks, step})
	}
	left := margin + 1.9*em + labelW + tickEm*em + 0.4*em
	right := float64(width) - 1.6*em
	outside := 0.0
	for _, a := range p.Axes {
		if items := legendLabels(a); a.Legend == Outside && len(items) > 0 {
			w, _ := legendSize(c, items)
			outside = math.Max(outside, w+0.8*em)
		}
	}
	right -= outside
	xticks, xstep := Ticks(x0, x1, clampInt(int((right-left)/(4.5*em)), 2, 12))

	y := top
	colour := 0
	for k, pr := range preps {
		h := avail * weightOf(pr.a) / weights
		f := plotFrame{image.Rect(int(left), int(y), int(right), int(y+h)), x0, x1, pr.y0, pr.y1}
		if c.makeLegendRoom(pr.a, &f) {
			pr.ticks, pr.step = Ticks(f.y0, f.y1, clampInt(int(h/(2.2*em)), 2, 10))
		}
		c.drawAxesPanel(pr.a, f, pr.ticks, pr.step, xticks, xstep, k == len(preps)-1, &colour)
		y += h + gap
	}
	if p.XLabel != "" {
		c.text(p.XLabel, (left+right)/2, float64(height)-margin-1.0*em, 0.5, 0.5, textStyle{})
	}
	return c
}

// fitTitle returns a one-line plot title and its style: bold at 1.2 em, or
// smaller (fitLine), so that a long title (a job's own title inside it)
// stays on the canvas instead of running off its edge.
func fitTitle(c *Canvas, title string, room float64) (string, textStyle) {
	return fitLine(c, title, textStyle{size: 1.2, bold: true}, room)
}

// fitLine returns line and ts made to fit in room pixels: the text size
// lowered as far as the tick labels' size, then the line cut with an
// ellipsis.
func fitLine(c *Canvas, line string, ts textStyle, room float64) (string, textStyle) {
	if w := c.measure(line, ts); w > room && ts.size > tickTextEm {
		ts.size = math.Max(tickTextEm, ts.size*room/w)
	}
	for r := []rune(line); c.measure(line, ts) > room && len(r) > 1; {
		r = r[:len(r)-1]
		line = string(r) + "…"
	}
	return line, ts
}

// makeLegendRoom raises the top of an automatic y range when every corner
// of the panel holds data, so that the legend fits above the data instead
// of over it. It reports whether it changed f.
func (c *Canvas) makeLegendRoom(a *Axes, f *plotFrame) bool {
	if a.Legend != Auto || a.YMin != 0 || a.YMax != 0 {
		return false
	}
	items := legendLabels(a)
	if len(items) == 0 {
		return false
	}
	if _, n := c.quietCorner(f.area, items, dataPoints(a, *f, c.em)); n == 0 {
		return false
	}
	_, lh := legendSize(c, items)
	frac := (lh + 1.4*c.em) / float64(f.area.Dy())
	if frac > 0.45 {
		return false // a panel too short to give up that much
	}
	f.y1 = f.y0 + (f.y1-f.y0)/(1-frac)
	return true
}

// legendLabels returns the legend entries of a panel without their
// colours, in the order drawAxesPanel lists them, for sizing.
func legendLabels(a *Axes) []LegendItem {
	var items []LegendItem
	for _, b := range a.Bands {
		if b.Label != "" {
			items = append(items, LegendItem{Label: b.Label})
		}
	}
	for _, h := range a.Hists {
		if h.Label != "" {
			items = append(items, LegendItem{Label: h.Label})
		}
	}
	for _, l := range a.Lines {
		if l.Label != "" {
			items = append(items, LegendItem{Label: l.Label})
		}
	}
	return items
}

// dataPoints returns pixel positions covered by a panel's lines (their
// vertices and points every half em along each segment) and histogram
// bars, for keeping the legend off the data.
func dataPoints(a *Axes, f plotFrame, em float64) [][2]float64 {
	var pts [][2]float64
	for _, h := range a.Hists {
		for k := 0; k+1 < len(h.Edges) && k < len(h.Counts); k++ {
			for i := 0; i <= 4; i++ {
				x := f.px(h.Edges[k] + (h.Edges[k+1]-h.Edges[k])*float64(i)/4)
				for j := 0; j <= 4; j++ {
					pts = append(pts, [2]float64{x, f.py(h.Counts[k] * float64(j) / 4)})
				}
			}
		}
	}
	for _, l := range a.Lines {
		var prev [2]float64
		have := false
		for k := 0; k < len(l.X) && k < len(l.Y); k++ {
			if math.IsNaN(l.X[k]) || math.IsNaN(l.Y[k]) {
				have = false
				continue
			}
			p := [2]float64{f.px(l.X[k]), f.py(l.Y[k])}
			if have && l.Width >= 0 {
				d := math.Hypot(p[0]-prev[0], p[1]-prev[1])
				for n, steps := 1, int(d/(0.5*em)); n < steps && n < 1000; n++ {
					t := float64(n) / float64(steps)
					pts = append(pts, [2]float64{prev[0] + t*(p[0]-prev[0]), prev[1] + t*(p[1]-prev[1])})
				}
			}
			pts = append(pts, p)
			prev, have = p, true
		}
	}
	return pts
}

func weightOf(a *Axes) float64 {
	if a.Weight > 0 {
		return a.Weight
	}
	return 1
}

// drawAxesPanel draws one panel: grid, bands, histograms, lines, markers,
// vertical markers, frame, ticks, labels and legend.
func (c *Canvas) drawAxesPanel(a *Axes, f plotFrame, yt []float64, ystep float64, xt []float64, xstep float64, xLabels bool, colour *int) {
	em := c.em
	dc := c.dc
	ar := f.area
	fb := box{float64(ar.Min.X), float64(ar.Min.Y), float64(ar.Max.X), float64(ar.Max.Y)}
	c.fillBox(fb, color.RGBA{255, 255, 255, 255})
	inX := func(x float64) bool { return x >= f.x0 && x <= f.x1 }
	inY := func(y float64) bool { return y >= f.y0 && y <= f.y1 }

	// Grid.
	c.applyLine(LineStyle{Color: GridLine, Width: c.thin()})
	for _, t := range xt {
		dc.DrawLine(f.px(t), fb.y0, f.px(t), fb.y1)
	}
	for _, t := range yt {
		dc.DrawLine(fb.x0, f.py(t), fb.x1, f.py(t))
	}
	dc.Stroke()

	dc.DrawRectangle(fb.x0, fb.y0, fb.x1-fb.x0, fb.y1-fb.y0)
	dc.Clip()
	c.clipped = true
	var legend []LegendItem
	for _, b := range a.Bands {
		col := b.Color
		if col == nil {
			col = DefaultBand
		}
		ylo, yhi := f.py(math.Max(b.Lo, f.y0)), f.py(math.Min(b.Hi, f.y1))
		c.fillBox(box{fb.x0, yhi, fb.x1, ylo}, col)
		if b.Label != "" {
			legend = append(legend, LegendItem{Label: b.Label, Kind: LegendSwatch, Color: col})
		}
	}
	for _, h := range a.HLines {
		if !inY(h.Y) {
			continue
		}
		c.applyLine(LineStyle{Color: orInk(h.Color), Dash: h.Dash})
		dc.DrawLine(fb.x0, f.py(h.Y), fb.x1, f.py(h.Y))
		dc.Stroke()
		dc.SetDash()
	}
	for _, h := range a.Hists {
		col := h.Color
		if col == nil {
			col = Series(*colour)
			*colour++
		}
		// A bin that holds anything is drawn at least minBin pixels tall and
		// wide: one panel in four thousand must not vanish beside the
		// tallest bar (parts.png at 700 parts a panel looked empty).
		minBin := 2.5 * c.thin()
		narrow := false
		for k := 0; k+1 < len(h.Edges) && k < len(h.Counts); k++ {
			if h.Counts[k] == 0 {
				continue
			}
			x0, x1 := f.px(h.Edges[k]), f.px(h.Edges[k+1])
			if x1-x0 < minBin {
				m := (x0 + x1) / 2
				x0, x1 = m-minBin/2, m+minBin/2
				narrow = true
			}
			y0, y1 := f.py(h.Counts[k]), f.py(0)
			y0 = math.Min(y0, y1-minBin)
			dc.DrawRectangle(x0, y0, x1-x0, y1-y0)
		}
		dc.SetColor(col)
		if narrow || (len(h.Edges) > 1 && f.px(h.Edges[1])-f.px(h.Edges[0]) < 4*c.thin()) {
			dc.Fill() // a separating stroke would eat bars this narrow
		} else {
			dc.FillPreserve()
			c.applyLine(LineStyle{Color: Background, Width: c.thin()})
			dc.Stroke()
		}
		if h.Label != "" {
			legend = append(legend, LegendItem{Label: h.Label, Kind: LegendSwatch, Color: col})
		}
	}
	for _, l := range a.Lines {
		col := l.Color
		if col == nil {
			col = Series(*colour)
			*colour++
		}
		w := l.Width
		if w == 0 {
			w = math.Max(1.5, em/6)
		}
		var dash []float64
		for _, d := range l.Dash {
			dash = append(dash, d*w)
		}
		pen := false
		for k := 0; k < len(l.X) && k < len(l.Y); k++ {
			if math.IsNaN(l.X[k]) || math.IsNaN(l.Y[k]) {
				pen = false
				continue
			}
			x, y := f.px(l.X[k]), f.py(l.Y[k])
			if pen {
				dc.LineTo(x, y)
			} else {
				dc.MoveTo(x, y)
				pen = true
			}
		}
		if l.Width < 0 {
			dc.ClearPath()
		} else {
			c.applyLine(LineStyle{Color: col, Width: w, Dash: dash})
			dc.SetLineCapRound()
			dc.Stroke()
			dc.SetDash()
		}
		if l.Marker != NoMarker {
			r := math.Max(2.5, 0.28*em)
			for k := 0; k < len(l.X) && k < len(l.Y); k++ {
				if inX(l.X[k]) && inY(l.Y[k]) {
					c.marker(l.Marker, f.px(l.X[k]), f.py(l.Y[k]), r)
				}
			}
			dc.SetColor(col)
			dc.FillPreserve()
			c.applyLine(LineStyle{Color: Background, Width: math.Max(1, em/14)})
			dc.Stroke()
		}
		if l.Label != "" {
			item := LegendItem{Label: l.Label, Kind: LegendLine, Color: col, Dash: dash, Width: w}
			if l.Width < 0 {
				item.Kind = LegendDot
			}
			legend = append(legend, item)
		}
	}
	// The legend goes in the emptiest corner (or where asked); the labels
	// of vertical markers keep clear of it.
	corner, showLegend := TopRight, len(legend) > 0 && a.Legend != NoLegend
	switch a.Legend {
	case Auto:
		corner, _ = c.quietCorner(ar, legend, dataPoints(a, f, em))
	case AtTopLeft:
		corner = TopLeft
	case AtBottomLeft:
		corner = BottomLeft
	case AtBottomRight:
		corner = BottomRight
	}
	var placed []box
	if showLegend && a.Legend != Outside {
		placed = append(placed, legendBox(c, ar, legend, corner, 0.8*em))
	}
	// Vertical markers: labels at the top, right of the line (or left of
	// it), moved down a row at a time until clear of the labels placed.
	var labels []func()
	for _, v := range a.VLines {
		if !inX(v.X) {
			continue
		}
		dash := v.Dash
		if dash == nil {
			dash = []float64{0.5 * em, 0.3 * em}
		}
		x := f.px(v.X)
		c.applyLine(LineStyle{Color: orInk(v.Color), Width: 1.5 * c.thin(), Dash: dash})
		dc.DrawLine(x, fb.y0, x, fb.y1)
		dc.Stroke()
		dc.SetDash()
		if v.Label == "" {
			continue
		}
		lts := textStyle{size: 0.8, halo: true, color: orInk(v.Color)}
		var lx, ly, ax float64
		var b box
	search:
		for row := 0; row < 40; row++ {
			ly = fb.y0 + 0.5*em + float64(row)*1.3*em
			for _, side := range [2]float64{1, -1} {
				lx, ax = x+side*0.3*em, (1-side)/2
				b = c.textBox(v.Label, lx, ly, ax, 0, lts)
				if b.x0 < fb.x0 || b.x1 > fb.x1 {
					continue
				}
				clear := true
				for _, o := range placed {
					clear = clear && !b.overlaps(o)
				}
				if clear {
					break search
				}
			}
		}
		placed = append(placed, b)
		labels = append(labels, func() { c.text(v.Label, lx, ly, ax, 0, lts) })
	}
	// Text is drawn after the clip is lifted: gg draws text under a clip
	// mask through a scratch image the size of the whole canvas.
	dc.ResetClip()
	c.clipped = false
	for _, l := range labels {
		l()
	}
	for _, h := range a.HLines {
		if h.Label != "" && inY(h.Y) {
			c.text(h.Label, fb.x1-0.4*em, f.py(h.Y)-0.3*em, 1, 1, textStyle{size: 0.8, halo: true, color: orInk(h.Color)})
		}
	}

	// Frame, ticks and labels.
	c.strokeBox(fb, LineStyle{Color: Frame})
	ts := textStyle{size: tickTextEm}
	tl := tickEm * em
	c.applyLine(LineStyle{Color: Frame})
	for _, t := range xt {
		dc.DrawLine(f.px(t), fb.y1, f.px(t), fb.y1+tl)
	}
	for _, t := range yt {
		dc.DrawLine(fb.x0-tl, f.py(t), fb.x0, f.py(t))
	}
	dc.Stroke()
	if xLabels {
		for _, t := range xt {
			c.text(TickLabel(t, xstep), f.px(t), fb.y1+tl+0.45*em, 0.5, 0, ts)
		}
	}
	for _, t := range yt {
		c.text(TickLabel(t, ystep), fb.x0-tl-0.35*em, f.py(t), 1, 0.5, ts)
	}
	if a.YLabel != "" {
		c.textUp(a.YLabel, float64(marginEm*em)+0.6*em, (fb.y0+fb.y1)/2, textStyle{})
	}
	switch {
	case showLegend && a.Legend == Outside:
		w, h := legendSize(c, legend)
		x0 := fb.x1 + 0.8*em
		drawLegendBox(c, box{x0, fb.y0, x0 + w, fb.y0 + h}, legend)
	case showLegend:
		drawLegend(c, ar, legend, corner)
	}
}

// quietCorner returns the corner whose legend box covers the fewest points
// (top right on a tie, then top left, bottom left, bottom right), and how
// many it covers.
func (c *Canvas) quietCorner(area image.Rectangle, items []LegendItem, pts [][2]float64) (Corner, int) {
	best, bestN := TopRight, math.MaxInt
	for _, k := range []Corner{TopRight, TopLeft, BottomLeft, BottomRight} {
		b := legendBox(c, area, items, k, 0.8*c.em).grow(0.3 * c.em)
		n := 0
		for _, p := range pts {
			if p[0] >= b.x0 && p[0] <= b.x1 && p[1] >= b.y0 && p[1] <= b.y1 {
				n++
			}
		}
		if n < bestN {
			best, bestN = k, n
		}
	}
	return best, bestN
}

// marker adds a marker shape of radius r at (x, y) to the current path.
func (c *Canvas) marker(m MarkerShape, x, y, r float64) {
	dc := c.dc
	switch m {
	case Circle:
		dc.DrawCircle(x, y, r)
	case Square:
		dc.DrawRectangle(x-0.85*r, y-0.85*r, 1.7*r, 1.7*r)
	case Triangle:
		dc.DrawRegularPolygon(3, x, y, 1.2*r, 0)
	case Diamond:
		dc.DrawRegularPolygon(4, x, y, 1.15*r, 0)
	}
	dc.NewSubPath()
}
