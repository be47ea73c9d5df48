package figure

import (
	"fmt"
	"github.com/regdrift/regdrift/panel/unit"
	"image/color"
	"io"
	"math"
	"strings"

	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// Comp draws the mean misregistration across the lines (design offset
// excluded) before and after compensation side by side on one diverging
// colour scale (comp.png); width is in pixels, 0 meaning 2400.
func Comp(w io.Writer, c *drift.Comparison, sum *drift.CompSummary, width int, u unit.Output) error {
	if width == 0 {
		width = 2400
	}
	in := c.Before.In
	zones := c.Before.Zones()
	global := zones[len(zones)-1].Kinds[0]
	states := []*drift.Analysis{c.Before, c.After}
	var grids []*render.Grid
	var lim float64
	for _, a := range states {
		g := fieldGrid(in, width/12, zoneField(a, zones, drift.Misregistration, 1/u.LengthSI()))
		lo, hi := g.Range()
		lim = math.Max(lim, math.Max(-lo, hi))
		for i := range a.Sites {
			lim = math.Max(lim, math.Abs(a.Sites[i].Stats.MeanAcross/u.LengthSI()))
		}
		grids = append(grids, g)
	}
	if !(lim > 0) {
		lim = 1e-3
	}
	var comp []string
	for _, l := range sum.Layers {
		comp = append(comp, fmt.Sprintf("%s X %+.1f Y %+.1f ppm (change %+.1f, %+.1f)", l.Layer, l.SettingXPPM, l.SettingYPPM, l.ScaleXPPM, l.ScaleYPPM))
	}
	title := []string{
		in.Title,
		fmt.Sprintf("new artwork scale settings (%s objective): %s", sum.Objective, strings.Join(comp, "; ")),
		fmt.Sprintf("field: over each array its most common coupler (elsewhere %s, lines at %.0f deg); bars: each site; common part: %s",
			in.Sections[global.Section].Name, math.Atan2(global.U.Y, global.U.X)*180/math.Pi, strings.SplitN(sum.Common, ":", 2)[0]),
	}
	caption := func(name string, v drift.CompState) string {
		s := fmt.Sprintf("%s: site yield %.3f %%, worst %.2f %s",
			name, 100*v.SiteYield, v.WorstOffsetM/u.LengthSI(), u.Length())
		if v.WindowUsed != nil {
			s += fmt.Sprintf(", window used %.2f", *v.WindowUsed)
		}
		return s
	}
	after := "recommended"
	if sum.BelowApplied {
		after = "recommended (LOWER yield)"
	}
	m := newPanelMap(in, u, render.MapSpec{Width: width, Views: 2, Title: title,
		Captions: []string{caption("keep applied", sum.Before), caption(after, sum.After)}})
	for vi, a := range states {
		v := m.Views[vi]
		drawPanel(v, in, grids[vi], render.Diverging, -lim, lim, false)
		v.Bars(siteBars(a, func(_ int, r *drift.Site) color.RGBA {
			return render.Diverging.Map(r.Stats.MeanAcross/u.LengthSI(), -lim, lim)
		}), render.BarStyle{})
	}
	m.ColorBar(render.Diverging, -lim, lim, "mean broadside offset across the lines, design offset excluded ["+u.Length()+"]")
	return m.EncodePNG(w)
}
