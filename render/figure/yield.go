package figure

import (
	"fmt"
	"github.com/regdrift/regdrift/panel/unit"
	"image/color"
	"io"
	"math"
	"strconv"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// yieldWidth is the width of yield.png in pixels.
const yieldWidth = 2400

// Yield draws the closed-form site yield over the panel (yield.png): over
// each array the lowest of its coupler kinds, contours at 99.9, 99 and 95 %,
// part outlines and each site's Monte Carlo yield res as a bar.
func Yield(w io.Writer, a *drift.Analysis, res *registration.MCResult, sum *drift.YieldSummary, u unit.Output) error {
	in := a.In
	cells := yieldWidth / 6
	if !in.Process.Empty() {
		// With variation terms each cell is an integral over the offset
		// (drift's P(in spec)), some fifty times a registration-only
		// cell; the process shapes are smooth over the panel, so a
		// sixteenth of the cells draws the same field.
		cells = yieldWidth / 24
	}
	grid := fieldGrid(in, cells, lowestField(a, a.Zones(), drift.PInSpec, 100))
	lo, _ := grid.Range()
	for i := range a.Sites {
		lo = math.Min(lo, 100*res.SiteYield(i))
	}
	hi := 100.0
	if hi-lo < 0.1 {
		lo = hi - 0.1
	}
	gp := sum.GoodPartsPerPanel
	title := []string{
		in.Title,
		fmt.Sprintf("site yield: %d panels, seed %d; site yield %.3f %%, part yield %.3f %%, good parts per panel %.1f of %d (5th percentile %d)",
			sum.Trials, sum.Seed, 100*sum.SiteYieldMean, 100*sum.PartYieldMean, gp.Mean, sum.Parts, gp.P05),
		"field: closed-form site yield, over each array the lowest of its couplers' line directions; contours at 99.9, 99 and 95 %; bars: each site's Monte Carlo yield",
	}
	m := newPanelMap(in, u, render.MapSpec{Width: yieldWidth, Title: title})
	v := m.Views[0]
	pal := yieldPalette
	drawPanel(v, in, grid, pal, lo, hi, true)
	// Contours in ink or white, whichever stands out on the field at that
	// level; 99.9 % shows where a high-yield panel loses its last tenth.
	for _, c := range []struct {
		level float64
		dash  []float64
	}{{99.9, []float64{3, 3}}, {99, nil}, {95, []float64{8, 5}}} {
		var col color.Color = render.Ink
		if render.Luma(pal.Map(c.level, lo, hi)) < 0.45 {
			col = color.White
		}
		v.Contour(grid, c.level, render.LineStyle{Color: col, Width: 2.5, Dash: c.dash}, strconv.FormatFloat(c.level, 'f', -1, 64)+" %")
	}
	v.Bars(siteBars(a, func(k int, _ *drift.Site) color.RGBA {
		return pal.Map(100*res.SiteYield(k), lo, hi)
	}), render.BarStyle{})
	m.ColorBar(pal, lo, hi, "site yield [%]")
	return m.EncodePNG(w)
}

// yieldPalette colours yield.png: dark at the bad end, as on every map (the
// drift map's large drifts, the window map's edge): here the low yields.
var yieldPalette = reversedSequential

// Parts draws the histogram of good parts per panel with its mean and 5th
// percentile (parts.png); title names the panel.
func Parts(w io.Writer, res *registration.MCResult, sum *drift.YieldSummary, title string) error {
	gp := sum.GoodPartsPerPanel
	h := render.Hist{Label: "panels"}
	for k := gp.Min; k <= gp.Max; k++ {
		h.Edges = append(h.Edges, float64(k)-0.5)
		h.Counts = append(h.Counts, float64(res.GoodParts[k]))
	}
	h.Edges = append(h.Edges, float64(gp.Max)+0.5)
	// Below the histogram, the share of panels with at least k good parts:
	// a rare bad panel that the histogram can only show as a sliver reads
	// there as a step, and "90 % of panels give at least k" reads off it.
	var xs, ys []float64
	above := res.Trials
	for k := gp.Min; k <= gp.Max; k++ {
		xs, ys = append(xs, float64(k)), append(ys, 100*float64(above)/float64(res.Trials))
		above -= int(res.GoodParts[k])
	}
	share := render.Line{Label: "share of panels with at least k good parts", X: xs, Y: ys, Color: render.Series(0)}
	if len(xs) <= 60 {
		share.Marker = render.Circle
	}
	vlines := []render.VLine{
		{X: gp.Mean, Label: fmt.Sprintf("mean %.1f", gp.Mean)},
		{X: float64(gp.P05), Label: fmt.Sprintf("5th percentile %d", gp.P05), Dash: []float64{3, 3}},
	}
	p := render.Plot{
		Title: fmt.Sprintf("Good parts per panel: %.1f %% of %d panels had all %d parts good, the worst %d (%s)",
			100*allGood(res, sum.Parts), sum.Trials, sum.Parts, gp.Min, title),
		XLabel: "good parts per panel",
		Axes: []*render.Axes{{
			YLabel: "panels",
			Hists:  []render.Hist{h},
			VLines: vlines,
			Weight: 1.4,
			Legend: render.NoLegend,
		}, {
			YLabel: "panels with at least this many [%]",
			Lines:  []render.Line{share},
			VLines: vlines,
			YMin:   math.Max(0, math.Floor(ys[len(ys)-1]/10)*10-5), YMax: 102,
			Legend: render.AtBottomLeft,
		}},
	}
	if gp.Min == gp.Max {
		p.XMin, p.XMax = float64(gp.Min)-2, float64(gp.Max)+2
	}
	return p.Render(1600, 1000).EncodePNG(w)
}

// allGood returns the share of the panels of res on which all parts were
// good.
func allGood(res *registration.MCResult, parts int) float64 {
	if parts >= len(res.GoodParts) || res.Trials == 0 {
		return 0
	}
	return float64(res.GoodParts[parts]) / float64(res.Trials)
}

// Budget draws the panel's error budget as horizontal bars, with the share at
// the worst site beside each (budget.png).
func Budget(w io.Writer, sum *drift.YieldSummary) error {
	if cb := sum.CouplingBudget; cb != nil && len(cb.Panel) > 0 {
		return couplingBudget(w, cb)
	}
	atWorst := map[string]float64{}
	for _, r := range sum.Budget.AtWorst {
		atWorst[r.Contributor+"\x00"+r.Term] = r.Share
	}
	const rows = 12
	b := render.BarChart{
		Title:  fmt.Sprintf("Error budget over the panel; in brackets: at the worst site, %s", sum.Budget.WorstSite),
		XLabel: "share of variance over the panel [%]",
	}
	if n := len(sum.Budget.Panel); n > rows {
		b.Title += fmt.Sprintf(" (the %d largest of %d terms)", rows, n)
	}
	for _, r := range sum.Budget.Panel[:min(rows, len(sum.Budget.Panel))] {
		b.Labels = append(b.Labels, r.Contributor+": "+r.Term)
		b.Values = append(b.Values, 100*r.Share)
		b.Texts = append(b.Texts, fmt.Sprintf("%.1f %% (%.1f %%)", 100*r.Share, 100*atWorst[r.Contributor+"\x00"+r.Term]))
	}
	return b.Render(2000, 0).EncodePNG(w)
}

// couplingBudget draws a yield study's coupling budget (with variation
// terms): registration and variation terms ranked together by their share
// of the coupling variance, coloured by source, the share at the worst
// site beside each.
func couplingBudget(w io.Writer, cb *drift.CouplingBudget) error {
	atWorst := map[string]float64{}
	for _, r := range cb.AtWorst {
		atWorst[r.Source+"\x00"+r.Name] = r.Share
	}
	const rows = 12
	b := render.BarChart{
		Title:  fmt.Sprintf("Coupling variance by term over the panel; in brackets: at the worst site, %s", cb.WorstSite),
		XLabel: "share of the coupling variance over the panel [%]; blue: registration, orange: variation",
	}
	if n := len(cb.Panel); n > rows {
		b.Title += fmt.Sprintf(" (the %d largest of %d terms)", rows, n)
	}
	for _, r := range cb.Panel[:min(rows, len(cb.Panel))] {
		b.Labels = append(b.Labels, r.Name)
		b.Values = append(b.Values, 100*r.Share)
		b.Texts = append(b.Texts, fmt.Sprintf("%.1f %% (%.1f %%)", 100*r.Share, 100*atWorst[r.Source+"\x00"+r.Name]))
		c := render.Qualitative[1]
		if r.Source == "registration" {
			c = render.Qualitative[0]
		}
		b.Colors = append(b.Colors, c)
	}
	return b.Render(2000, 0).EncodePNG(w)
}
