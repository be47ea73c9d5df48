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
func (t *Trend) Plot() *render.Plot {
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
	ink := color.RGBA{40, 40, 40, 255}
	grey := color.RGBA{160, 160, 160, 255}
	mean := render.Line{Label: "lot mean", X: xs, Y: ys, Color: render.Series(0)}
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
		top.Lines = append(top.Lines, render.Line{Label: "±1 SD within the lot", X: bx, Y: by, Color: grey})
	}
	top.Lines = append(top.Lines, mean)
	if !math.IsNaN(t.Chart.Sigma) {
		c, ucl, lcl := unit.In(t.Chart.Centre, kind, u), unit.In(t.Chart.UCL, kind, u), unit.In(t.Chart.LCL, kind, u)
		top.HLines = append(top.HLines,
			render.HLine{Y: ucl, Label: fmt.Sprintf("UCL %.4g", ucl), Color: ink, Dash: []float64{6, 4}},
			render.HLine{Y: c, Label: fmt.Sprintf("centre %.4g", c), Color: ink},
			render.HLine{Y: lcl, Label: fmt.Sprintf("LCL %.4g", lcl), Color: ink, Dash: []float64{6, 4}})
	}
	// The flagged lots, one series per rule.
	byRule := map[Rule][]int{}
	for _, sg := range t.Signals {
		byRule[sg.Rule] = append(byRule[sg.Rule], sg.Index)
	}
	bottom := &render.Axes{YLabel: fmt.Sprintf("EWMA λ=%.2g [%s]", t.EWMA.Lambda, u), Weight: 1}
	bottom.Lines = append(bottom.Lines,
		render.Line{Label: "EWMA", X: xs, Y: ez, Color: render.Series(1)},
		render.Line{Label: fmt.Sprintf("EWMA limits (L=%g)", t.EWMA.L), X: xs, Y: eu, Color: ink, Dash: []float64{3, 2}},
		render.Line{X: xs, Y: el, Color: ink, Dash: []float64{3, 2}})
	for r := Beyond3; r <= EWMAOut; r++ {
		idx := byRule[r]
		if len(idx) == 0 {
			continue
		}
		l := render.Line{Label: fmt.Sprintf("%s (%d)", r, len(idx)), Width: -1, Marker: ruleMarkers[r], Color: render.Series(2 + int(r))}
		for _, i := range idx {
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
	title := fmt.Sprintf("%s, %s: %s movement, %d lots", s.Construction, s.Role, t.Term, n)
	if s.Layer != "" {
		title = fmt.Sprintf("%s, layer %s (%s): %s movement, %d lots", s.Construction, s.Layer, s.Role, t.Term, n)
	}
	if n > 0 {
		title += fmt.Sprintf(" from %s to %s", s.Points[0].Date, s.Points[n-1].Date)
	}
	return &render.Plot{Title: title, XLabel: "lot, in order of date", Axes: []*render.Axes{top, bottom}}
}

// WritePNG draws the trend chart at the given size as PNG.
func (t *Trend) WritePNG(w io.Writer, width, height int) error {
	return t.Plot().Render(width, height).EncodePNG(w)
}
