package history

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/render"
)

// maxMarkers is the number of lots above which the lot means are drawn as
// a line without markers, which would merge into a band anyway.
const maxMarkers = 400

// chunkPoints is the most points one drawn line holds. The rasteriser's
// cost grows with the square of a path's length (it looks up every cell of
// the path in a list), so a series of thousands of lots is drawn as many
// short lines that join end to end.
const chunkPoints = 64

// chunked splits a line into pieces of at most chunkPoints points that
// share their end points; only the first keeps the label. NaN breaks are
// kept, so error bars split the same way.
func chunked(l render.Line) []render.Line {
	if len(l.X) <= chunkPoints {
		return []render.Line{l}
	}
	var out []render.Line
	for i := 0; i < len(l.X)-1; i += chunkPoints - 1 {
		j := min(i+chunkPoints, len(l.X))
		p := l
		p.X, p.Y = l.X[i:j], l.Y[i:j]
		if i > 0 {
			p.Label = ""
		}
		out = append(out, p)
	}
	return out
}

// ruleMarkers gives each signal its own marker shape, so that the legend
// says which rule a flagged lot broke.
var ruleMarkers = map[Rule]render.MarkerShape{
	Beyond3: render.Circle, TwoOf3: render.Square, FourOf5: render.Triangle, EightInRow: render.Diamond, EWMAOut: render.Circle,
}

// Plot returns the trend as a chart: x is the lot's place in the series
// (1 = the first lot by date); the lot means with a bar of ±1 within-lot
// standard deviation, the individuals chart's centre and 3σ̂ limits, the
// EWMA with its time-varying limits, and the lots that broke a rule with
// one marker shape per rule. Its lower panel is the EWMA chart on its own.
//
// A series of more lots than the plot has pixel columns is drawn decimated
// to what the pixels can show: the lots are split into buckets of about
// two pixel columns each (width/2 buckets), and each bucket keeps its
// first, lowest, highest and last point of a line (so every excursion
// stays visible), one error bar from its lowest to its highest end, and
// one marker per rule. width is the image width in pixels.
func (t *Trend) Plot(width int) *render.Plot {
	kind, u := TermUnit(t.Term)
	s := t.Series
	n := len(t.Values)
	xs := make([]float64, n)
	ys := make([]float64, n)
	bx := make([]float64, 0, 3*n)
	by := make([]float64, 0, 3*n)
	for i, v := range t.Values {
		xs[i] = float64(i + 1)
		ys[i] = unit.In(v, kind, u)
		sd := unit.In(s.Points[i].SD[t.Term], kind, u)
		if sd > 0 {
			bx = append(bx, xs[i], xs[i], math.NaN())
			by = append(by, ys[i]-sd, ys[i]+sd, math.NaN())
		}
	}
	buckets := max(width/2, 50)
	if n > 4*buckets {
		bx, by = decimateBars(bx, by, n, buckets)
	}
	dec := func(x, y []float64) ([]float64, []float64) {
		if n > 4*buckets {
			return decimate(x, y, buckets)
		}
		return x, y
	}
	ink := color.RGBA{40, 40, 40, 255}
	grey := color.RGBA{160, 160, 160, 255}
	mx, my := dec(xs, ys)
	mean := render.Line{Label: "lot mean", X: mx, Y: my, Color: render.Series(0)}
	if n <= maxMarkers {
		mean.Marker = render.Circle
	}
	conv := func(v []float64) []float64 {
		out := make([]float64, len(v))
		for i, x := range v {
			out[i] = unit.In(x, kind, u)
		}
		return out
	}
	ez, eu, el := conv(t.EWMA.Z), conv(t.EWMA.UCL), conv(t.EWMA.LCL)
	top := &render.Axes{YLabel: fmt.Sprintf("%s movement [%s]", t.Term, u), Weight: 2}
	if len(bx) > 0 {
		top.Lines = append(top.Lines, chunked(render.Line{Label: "±1 SD within the lot", X: bx, Y: by, Color: grey})...)
	}
	top.Lines = append(top.Lines, chunked(mean)...)
	if !math.IsNaN(t.Chart.Sigma) {
		c, ucl, lcl := unit.In(t.Chart.Centre, kind, u), unit.In(t.Chart.UCL, kind, u), unit.In(t.Chart.LCL, kind, u)
		top.HLines = append(top.HLines,
			render.HLine{Y: ucl, Label: fmt.Sprintf("UCL %.4g", ucl), Color: ink, Dash: []float64{6, 4}},
			render.HLine{Y: c, Label: fmt.Sprintf("centre %.4g", c), Color: ink},
			render.HLine{Y: lcl, Label: fmt.Sprintf("LCL %.4g", lcl), Color: ink, Dash: []float64{6, 4}})
	}
	// The flagged lots, one series per rule; a lot that broke several
	// Western Electric rules is marked once, with the first of them (the
	// signals come in order of index and rule), so markers do not hide
	// each other.
	byRule := map[Rule][]int{}
	marked := map[int]bool{}
	for _, sg := range t.Signals {
		if sg.Rule != EWMAOut {
			if marked[sg.Index] {
				continue
			}
			marked[sg.Index] = true
		}
		byRule[sg.Rule] = append(byRule[sg.Rule], sg.Index)
	}
	bottom := &render.Axes{YLabel: fmt.Sprintf("EWMA λ=%.2g [%s]", t.EWMA.Lambda, u), Weight: 1}
	zx, zy := dec(xs, ez)
	ux, uy := dec(xs, eu)
	lx, ly := dec(xs, el)
	for _, l := range []render.Line{
		{Label: "EWMA", X: zx, Y: zy, Color: render.Series(1)},
		{Label: fmt.Sprintf("EWMA limits (L=%g)", t.EWMA.L), X: ux, Y: uy, Color: ink, Dash: []float64{3, 2}},
		{X: lx, Y: ly, Color: ink, Dash: []float64{3, 2}},
	} {
		bottom.Lines = append(bottom.Lines, chunked(l)...)
	}
	for r := Beyond3; r <= EWMAOut; r++ {
		idx := byRule[r]
		if len(idx) == 0 {
			continue
		}
		l := render.Line{Label: fmt.Sprintf("%s (%d lots)", r, len(idx)), Width: -1, Marker: ruleMarkers[r], Color: render.Series(2 + int(r))}
		lastBucket := -1
		for _, i := range idx {
			if n > 4*buckets {
				b := i * buckets / n
				if b == lastBucket {
					continue
				}
				lastBucket = b
			}
			l.X = append(l.X, xs[i])
			if r == EWMAOut {
				l.Y = append(l.Y, ez[i])
			} else {
				l.Y = append(l.Y, ys[i])
			}
		}
		if r == EWMAOut {
			bottom.Lines = append(bottom.Lines, l)
		} else {
			top.Lines = append(top.Lines, l)
		}
	}
	title := fmt.Sprintf("%s, %s: %s, %d lots", s.Construction, s.Role, t.Term, n)
	if s.Layer != "" {
		title = fmt.Sprintf("%s, layer %s (%s): %s, %d lots", s.Construction, s.Layer, s.Role, t.Term, n)
	}
	if n > 0 {
		title += fmt.Sprintf(" %s to %s", s.Points[0].Date, s.Points[n-1].Date)
	}
	if !math.IsNaN(t.Chart.Sigma) {
		title += fmt.Sprintf("; σ %.3g %s (MR/d₂)", unit.In(t.Chart.Sigma, kind, u), u)
	}
	return &render.Plot{Title: title, XLabel: "lot, in order of date", Axes: []*render.Axes{top, bottom}}
}

// WritePNG draws the trend chart at the given size as PNG.
func (t *Trend) WritePNG(w io.Writer, width, height int) error {
	return t.Plot(width).Render(width, height).EncodePNG(w)
}

// decimate keeps, of each of the buckets runs of consecutive points, the
// first, the lowest, the highest and the last, in order of x.
func decimate(x, y []float64, buckets int) ([]float64, []float64) {
	n := len(x)
	ox, oy := make([]float64, 0, 4*buckets), make([]float64, 0, 4*buckets)
	for b := range buckets {
		i0, i1 := b*n/buckets, (b+1)*n/buckets
		if i0 >= i1 {
			continue
		}
		lo, hi := i0, i0
		for i := i0; i < i1; i++ {
			if y[i] < y[lo] {
				lo = i
			}
			if y[i] > y[hi] {
				hi = i
			}
		}
		keep := []int{i0, lo, hi, i1 - 1}
		if lo > hi {
			keep[1], keep[2] = hi, lo
		}
		prev := -1
		for _, i := range keep {
			if i != prev {
				ox, oy = append(ox, x[i]), append(oy, y[i])
				prev = i
			}
		}
	}
	return ox, oy
}

// decimateBars merges the NaN-separated vertical bars (x, lo, hi) of n lots
// into one bar per bucket, from the lowest end to the highest, at the
// bucket's middle lot.
func decimateBars(bx, by []float64, n, buckets int) ([]float64, []float64) {
	lo := make([]float64, buckets)
	hi := make([]float64, buckets)
	for b := range lo {
		lo[b], hi[b] = math.Inf(1), math.Inf(-1)
	}
	for i := 0; i+1 < len(bx); i += 3 {
		b := min(int(bx[i]-1)*buckets/n, buckets-1)
		lo[b], hi[b] = math.Min(lo[b], by[i]), math.Max(hi[b], by[i+1])
	}
	var ox, oy []float64
	for b := range lo {
		if lo[b] <= hi[b] {
			x := float64((2*b+1)*n/(2*buckets) + 1)
			ox = append(ox, x, x, math.NaN())
			oy = append(oy, lo[b], hi[b], math.NaN())
		}
	}
	return ox, oy
}
