package main

import (
	"context"
	"fmt"
	"math"
	"slices"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/registration/history"
)

// traceLayers returns the layers of the two-layer sections the job's sites
// use, in order of first use.
func traceLayers(in *drift.Input) []string {
	var out []string
	for _, s := range in.Sites {
		i := in.SectionIndex(s.Section)
		if i < 0 {
			continue
		}
		tr := in.Sections[i].Traces
		if tr[0].Layer == tr[1].Layer {
			continue
		}
		for _, l := range []string{tr[0].Layer, tr[1].Layer} {
			if !slices.Contains(out, l) {
				out = append(out, l)
			}
		}
	}
	return out
}

// layerHistory is the scale table of one layer's history (x and y rows),
// nil rows when the history has no lot of it.
type layerHistory struct {
	layer string
	rows  [2]*history.TableRow
	trend [2]history.Trend
}

// readLayerHistory reads, per trace layer, its series (the material
// movement, lot by lot, of that layer name, within construction when it is
// not "") and the scale table's rows.
func readLayerHistory(ctx context.Context, path, construction string, layers []string) ([]layerHistory, error) {
	d, err := openHistory(ctx, path, false)
	if err != nil {
		return nil, err
	}
	defer d.Close()
	var out []layerHistory
	for _, l := range layers {
		ss, err := d.Series(ctx, history.Filter{Construction: construction, Layer: l}, registration.ScaleX, registration.ScaleY)
		if err != nil {
			return nil, err
		}
		h := layerHistory{layer: l}
		if len(ss) > 0 && len(ss[0].Points) > 0 {
			rows := history.Table(ss[:1])
			for a := range 2 {
				h.rows[a] = &rows[a]
			}
			h.trend = [2]history.Trend{history.NewTrend(&ss[0], registration.ScaleX), history.NewTrend(&ss[0], registration.ScaleY)}
		}
		out = append(out, h)
	}
	return out, nil
}

// historyModel returns model with each history layer's scale movement taken
// from the history: the contributors' scale terms on that layer are dropped
// (a contributor that also moves other layers is split so that they keep
// theirs) and a contributor holds the controller's estimate of the next
// lot's movement (the EWMA of the lot means, history.Table) with the
// lot-to-lot σ as its spread. It also returns the estimate's standard errors
// and notes.
func historyModel(model *registration.Model, hs []layerHistory, file string) (*registration.Model, map[string]registration.MovementSE, []string) {
	out := &registration.Model{Datum: model.Datum, Contributors: slices.Clone(model.Contributors)}
	se := map[string]registration.MovementSE{}
	var notes []string
	for _, h := range hs {
		if h.rows[0] == nil {
			notes = append(notes, fmt.Sprintf("the history %s has no lot of layer %s: its movement is the job's model", file, h.layer))
			continue
		}
		var next []registration.Contributor
		for _, c := range out.Contributors {
			if !c.Names(h.layer) || (c.Terms[registration.ScaleX] == registration.Term{} && c.Terms[registration.ScaleY] == registration.Term{}) {
				next = append(next, c)
				continue
			}
			if len(c.Layers) > 1 {
				rest := c
				rest.Layers = slices.DeleteFunc(slices.Clone(c.Layers), func(l string) bool { return l == h.layer })
				next = append(next, rest)
			}
			own := c
			own.Name, own.Layers = c.Name+" (on "+h.layer+", scale from the history)", []string{h.layer}
			own.Terms[registration.ScaleX], own.Terms[registration.ScaleY] = registration.Term{}, registration.Term{}
			next = append(next, own)
		}
		c := registration.Contributor{Name: fmt.Sprintf("history: next lot's movement of %s (EWMA of %d lots, %s)", h.layer, h.rows[0].Lots, file), Layers: []string{h.layer}}
		var s [2]float64
		for a, k := range []registration.TermKind{registration.ScaleX, registration.ScaleY} {
			r := h.rows[a]
			t := registration.Term{Mean: r.Movement}
			if sg := r.LotSigma; sg > 0 && !math.IsNaN(sg) {
				t.Spread, t.Dist = sg, registration.Normal
			}
			c.Terms[k] = t
			if !math.IsNaN(r.SE) {
				s[a] = r.SE
			}
			if r.Shifted() {
				notes = append(notes, fmt.Sprintf("the history of %s %s shows a shift in the latest lots (%s): the estimate may still lag", h.layer, r.Axis, r.SignalLots[len(r.SignalLots)-1]))
			}
		}
		out.Contributors = append(next, c)
		se[h.layer] = registration.MovementSE{X: s[0], Y: s[1], Panels: h.rows[0].Lots, From: "lots of history (EWMA)"}
		notes = append(notes, fmt.Sprintf("layer %s: next lot's movement from the history, X %+.1f ppm, Y %+.1f ppm (EWMA, λ = %.1f, %d lots, the last %s)",
			h.layer, h.rows[0].Movement*1e6, h.rows[1].Movement*1e6, history.ControllerLambda, h.rows[0].Lots, h.rows[0].LastLot))
	}
	return out, se, notes
}

// historyChecks compares each measured layer's material movement with its
// history's individuals chart (centre ± 3σ̂ from the average moving range).
func historyChecks(hs []layerHistory, lots []registration.Lot, applied registration.AppliedSet) []drift.HistoryCheck {
	var out []drift.HistoryCheck
	for _, l := range lots {
		if _, _, rel := registration.SplitLayer(l.Layer); rel {
			continue
		}
		i := slices.IndexFunc(hs, func(h layerHistory) bool { return h.layer == l.Layer })
		if i < 0 || hs[i].rows[0] == nil {
			continue
		}
		ax, ay, _ := applied.For(l.Layer)
		for a, k := range []registration.TermKind{registration.ScaleX, registration.ScaleY} {
			ch := hs[i].trend[a].Chart
			if math.IsNaN(ch.Sigma) {
				continue
			}
			m := registration.MaterialScale(l.Mean[k], []float64{ax, ay}[a])
			out = append(out, drift.HistoryCheck{Layer: l.Layer, Axis: []string{"x", "y"}[a], Lots: len(hs[i].trend[a].Values),
				MovementPPM: m * 1e6, CentrePPM: ch.Centre * 1e6, LCLPPM: ch.LCL * 1e6, UCLPPM: ch.UCL * 1e6,
				Inside: m >= ch.LCL && m <= ch.UCL})
		}
	}
	return out
}
