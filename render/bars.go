package render

import (
	"image"
	"image/color"
	"math"
)

// BarChart is a horizontal bar chart of named values drawn top to bottom,
// such as the shares of an error budget. Fill in the fields and call Render.
type BarChart struct {
	Title  string
	XLabel string   // quantity and unit along the bars, e.g. "share of variance [%]"
	Labels []string // one per bar, written left of the axis
	Values []float64
	// Texts, if given, are written at the end of each bar; otherwise the
	// value is, with the precision of the axis ticks plus one digit.
	Texts []string
	// XMax fixes the end of the value axis; 0 means from the data.
	XMax  float64
	Color color.Color // nil means the first Qualitative colour
	// Colors, if given, colour each bar (a nil entry: Color), e.g. by sign.
	Colors []color.Color
}

// Render draws the chart width pixels wide. A height of 0 fits the bars:
// about two text lines per bar.
func (b *BarChart) Render(width, height int) *Canvas {
	n := len(b.Values)
	width = max(width, minSide)
	em := math.Max(10, float64(width)/64)
	if height <= 0 {
		height = int(math.Ceil((marginEm*2 + 2.2 + 3.4 + 1.0 + 2.2*float64(n)) * em))
	} else {
		height = max(height, minSide)
		em = math.Max(10, math.Min(float64(width), 1.4*float64(height))/64)
	}
	c := newCanvas(width, height, em)
	margin := marginEm * em
	ts := textStyle{size: tickTextEm}

	top := margin
	if b.Title != "" {
		t, ts := fitTitle(c, b.Title, float64(width)-2*margin)
		c.text(t, margin, top, 0, 0, ts)
		top += 2.2 * em
	}
	// Labels take at most 40 % of the width; longer ones are shortened
	// with an ellipsis rather than pushing the bars off the canvas.
	labels := append([]string(nil), b.Labels...)
	maxLabel := 0.4 * float64(width)
	labelW := 0.0
	for k, l := range labels {
		for c.measure(l, ts) > maxLabel && len([]rune(l)) > 2 {
			r := []rune(l)
			l = string(r[:len(r)-2]) + "…"
		}
		labels[k] = l
		labelW = math.Max(labelW, c.measure(l, ts))
	}
	left := margin + labelW + 0.8*em
	right := float64(width) - 1.6*em
	texts := make([]string, len(b.Values))
	lo, hi := 0.0, b.XMax
	if hi == 0 {
		for _, v := range b.Values {
			finiteRange(&lo, &hi, v)
		}
		lo, hi = fixRange(lo, hi)
	}
	_, step := Ticks(lo, hi, clampInt(int((right-left)/(4.5*em)), 2, 12))
	for k, v := range b.Values {
		if k < len(b.Texts) {
			texts[k] = b.Texts[k]
		} else {
			texts[k] = TickLabel(v, step/10)
		}
	}
	if b.XMax == 0 {
		// Widen the range until every bar's text fits inside the frame: a
		// fixed share of the span let long texts run past it.
		W := right - left
		for k, v := range b.Values {
			if math.IsNaN(v) {
				continue
			}
			room := W - 0.8*em - c.measure(texts[k], ts)
			if room < 0.2*W {
				room = 0.2 * W
			}
			if v > 0 {
				hi = math.Max(hi, lo+(v-lo)*W/room)
			} else if v < 0 {
				lo = math.Min(lo, hi-(hi-v)*W/room)
			}
		}
	}
	bottom := float64(height) - margin - 3.4*em
	area := image.Rect(int(left), int(top), int(right), int(bottom))
	f := plotFrame{area, lo, hi, 0, 1}
	ticks, step := Ticks(lo, hi, clampInt(int((right-left)/(4.5*em)), 2, 12))

	dc := c.dc
	fb := box{left, top, right, bottom}
	c.fillBox(fb, color.RGBA{255, 255, 255, 255})
	c.applyLine(LineStyle{Color: GridLine})
	for _, t := range ticks {
		dc.DrawLine(f.px(t), fb.y0, f.px(t), fb.y1)
	}
	dc.Stroke()
	col := b.Color
	if col == nil {
		col = Series(0)
	}
	row := (bottom - top) / math.Max(float64(n), 1)
	for k, v := range b.Values {
		if math.IsNaN(v) {
			continue
		}
		cy := top + (float64(k)+0.5)*row
		bh := 0.62 * row
		x0, x1 := f.px(0), f.px(v)
		if x1 < x0 {
			x0, x1 = x1, x0
		}
		bc := col
		if k < len(b.Colors) && b.Colors[k] != nil {
			bc = b.Colors[k]
		}
		c.fillBox(box{x0, cy - bh/2, x1, cy + bh/2}, bc)
		if k < len(labels) {
			c.text(labels[k], left-0.5*em, cy, 1, 0.5, ts)
		}
		txt := texts[k]
		if v >= 0 {
			c.text(txt, f.px(v)+0.4*em, cy, 0, 0.5, ts)
		} else {
			c.text(txt, f.px(v)-0.4*em, cy, 1, 0.5, ts)
		}
	}
	c.applyLine(LineStyle{Color: Frame})
	dc.DrawLine(f.px(0), fb.y0, f.px(0), fb.y1)
	dc.Stroke()
	c.strokeBox(fb, LineStyle{Color: Frame})
	tl := tickEm * em
	c.applyLine(LineStyle{Color: Frame})
	for _, t := range ticks {
		dc.DrawLine(f.px(t), fb.y1, f.px(t), fb.y1+tl)
		c.text(TickLabel(t, step), f.px(t), fb.y1+tl+0.45*em, 0.5, 0, ts)
	}
	c.applyLine(LineStyle{Color: Frame})
	dc.Stroke()
	if b.XLabel != "" {
		c.text(b.XLabel, (left+right)/2, float64(height)-margin-1.0*em, 0.5, 0.5, textStyle{})
	}
	return c
}
