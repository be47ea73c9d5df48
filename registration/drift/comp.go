package drift

import (
	"context"
	"encoding/csv"
	"fmt"
	"github.com/regdrift/regdrift/panel/unit"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/regdrift/regdrift/registration"
)

// MeasuredModel returns a copy of m with fitted lots joined: the lots'
// contributors (registration.LotContributors, which keeps the pairing of
// layers measured on the same panels), named after each lot and the file it
// came from; unless keep, the layers a lot measures (both of a relative pair)
// are first taken out of m's contributors, and a contributor left with no
// layer is dropped. fits are the fits the lots came from. notes says what
// changed.
func MeasuredModel(m *registration.Model, fits []registration.Fit, lots []registration.Lot, file string, keep bool) (*registration.Model, []string) {
	out := &registration.Model{Datum: m.Datum}
	measured := registration.MeasuredLayers(lots)
	var notes []string
	for _, c := range m.Contributors {
		c.Layers = slices.Clone(c.Layers)
		if !keep {
			var kept, gone []string
			for _, l := range c.Layers {
				if measured[l] {
					gone = append(gone, l)
				} else {
					kept = append(kept, l)
				}
			}
			switch {
			case len(kept) == 0:
				notes = append(notes, fmt.Sprintf("contributor %q left out: the measurement holds %s", c.Name, strings.Join(gone, ", ")))
				continue
			case len(gone) > 0:
				notes = append(notes, fmt.Sprintf("contributor %q now moves %s only: the measurement holds %s", c.Name, strings.Join(kept, ", "), strings.Join(gone, ", ")))
			}
			c.Layers = kept
		}
		out.Contributors = append(out.Contributors, c)
	}
	lm := registration.LotContributors(fits, lots, func(l *registration.Lot) string {
		return fmt.Sprintf("measured %s (lot of %d panels, %s)", l.Layer, l.Panels, file)
	})
	for _, c := range lm.Contributors {
		out.Contributors = append(out.Contributors, c.Contributor)
	}
	return out, append(notes, lm.Notes...)
}

// Comparison is a panel before and after artwork scale compensation: the
// recommendation and both analyses, evaluated on one set of curves.
type Comparison struct {
	Result        *registration.CompResult
	Before, After *Analysis
	// Notes holds warnings about the curves (a design out of spec).
	Notes []string
}

// Compensate recommends the artwork scale compensation of in's trace layers
// under model (in.Model when nil) with settings cs, and evaluates the panel
// before and after it on one set of curves covering both. An error of the
// recommendation itself is a *CompError.
func Compensate(ctx context.Context, in *Input, model *registration.Model, cs *registration.CompSettings, set *Settings) (*Comparison, error) {
	if model == nil {
		model = in.Model
	}
	before := New(in, model)
	// The windows come first: each site is judged against its own section's
	// allowed interval, which the curve gives.
	curves, err := SolveCurves(ctx, set, before)
	if err != nil {
		return nil, err
	}
	sites := make([]registration.CompSite, len(in.Sites))
	for k := range in.Sites {
		si := before.Sites[k].Section
		sec := in.Sections[si]
		s := in.Sites[k]
		sites[k] = registration.CompSite{Pos: s.Pos, U: s.U, Upper: sec.Traces[0].Layer, Lower: sec.Traces[1].Layer,
			Nominal: sec.NominalOffset(), Allowed: curves[si].Allowed}
	}
	res, err := registration.Compensate(model, sites, cs)
	if err != nil {
		return nil, &CompError{err}
	}
	am := &registration.Model{Datum: model.Datum, Contributors: append(slices.Clone(model.Contributors), res.Contributors()...)}
	after := New(in, am)
	if r0, r1 := Reach(before), Reach(after); !within(r1, r0) {
		// The compensated sites reach offsets the curves were not solved
		// over: solve again over both (a cache hit in the usual case).
		if curves, err = SolveCurves(ctx, set, before, after); err != nil {
			return nil, err
		}
	}
	before.Evaluate(curves)
	after.Evaluate(curves)
	cmp := &Comparison{Result: res, Before: before, After: after}
	if n := before.activeTerms(); n > 0 {
		// The process terms move the cross-section, not the layers: no
		// artwork scale reaches them. Both analyses carry them unchanged
		// (one Input, one set of curves), so both yields include them.
		cmp.Notes = append(cmp.Notes, fmt.Sprintf("%d variation %s (thickness, εr, width, copper, mask) move the coupling, not the offsets: artwork scale does not compensate %s; the site yields before and after include %s",
			n, pick(n, "term", "terms"), pick(n, "it", "them"), pick(n, "it", "them")))
	}
	for _, c := range curves {
		if c != nil && !c.DesignInSpec {
			s := c.Section
			cmp.Notes = append(cmp.Notes, fmt.Sprintf("section %q: the design is outside its spec: coupling %.3f dB at the design offset, spec %.2f ± %.2f dB; its sites yield 0",
				s.Name, c.Nominal, s.Spec.Coupling, s.Spec.Tolerance))
		}
	}
	return cmp, nil
}

// within reports whether every a_i ≤ b_i.
func within(a, b []float64) bool {
	for i := range a {
		if a[i] > b[i] {
			return false
		}
	}
	return true
}

// CompError is a compensation that the model and the settings do not allow
// (registration.ErrInfeasible, or no site whose traces are on two layers):
// the input's fault, not the solver's.
type CompError struct{ Err error }

func (e *CompError) Error() string { return e.Err.Error() }
func (e *CompError) Unwrap() error { return e.Err }

// CompLayer is one layer's recommended compensation. Scale and factor are
// the change from the applied artwork; setting and setting factor the new
// absolute artwork scale, (1 + applied)(1 + change) − 1; movement the
// material movement, the mean scale as built with the applied artwork taken
// out (registration.Applied).
type CompLayer struct {
	Layer          string   `json:"layer"`
	ScaleXPPM      float64  `json:"scale_x_ppm"`
	ScaleYPPM      float64  `json:"scale_y_ppm"`
	FactorX        float64  `json:"factor_x"`
	FactorY        float64  `json:"factor_y"`
	AppliedXPPM    float64  `json:"applied_x_ppm"`
	AppliedYPPM    float64  `json:"applied_y_ppm"`
	SettingXPPM    float64  `json:"setting_x_ppm"`
	SettingYPPM    float64  `json:"setting_y_ppm"`
	SettingFactorX float64  `json:"setting_factor_x"`
	SettingFactorY float64  `json:"setting_factor_y"`
	MovementXPPM   float64  `json:"movement_x_ppm"`
	MovementYPPM   float64  `json:"movement_y_ppm"`
	SEXPPM         float64  `json:"se_x_ppm,omitempty"`
	SEYPPM         float64  `json:"se_y_ppm,omitempty"`
	NetXPPM        float64  `json:"net_x_ppm"`
	NetYPPM        float64  `json:"net_y_ppm"`
	MeanScaleX     float64  `json:"mean_scale_x_ppm"`
	MeanScaleY     float64  `json:"mean_scale_y_ppm"`
	FreeX, FreeY   bool     `json:"-"`
	Free           []string `json:"free_axes"`
}

// CompPair is the compensation difference across one coupled layer pair.
type CompPair struct {
	Upper    string  `json:"upper"`
	Lower    string  `json:"lower"`
	DiffXPPM float64 `json:"diff_x_ppm"`
	DiffYPPM float64 `json:"diff_y_ppm"`
	SEXPPM   float64 `json:"se_x_ppm,omitempty"`
	SEYPPM   float64 `json:"se_y_ppm,omitempty"`
}

// CompState is the panel before (keeping the applied artwork) or after
// compensation. Offsets exclude the design offset. DrillWorstM is nil when a
// measured lot is relative (L3-L4): it carries no registration to the drilled
// holes.
type CompState struct {
	Sites        int      `json:"sites"`
	WorstOffsetM float64  `json:"worst_offset_m"`
	RMSOffsetM   float64  `json:"rms_offset_m"`
	InSpec       int      `json:"in_spec"`
	SiteYield    float64  `json:"site_yield"`
	WindowUsed   *float64 `json:"window_used,omitempty"`
	DrillWorstM  *float64 `json:"drill_worst_m,omitempty"`
}

// CompSummary is the summary of a compensation (comp.json).
type CompSummary struct {
	Job         string      `json:"job"`
	Objective   string      `json:"objective"`
	DrillBudget float64     `json:"drill_budget_m,omitempty"`
	Measured    []string    `json:"measured_layers,omitempty"`
	Layers      []CompLayer `json:"layers"`
	Pairs       []CompPair  `json:"pairs"`
	Common      string      `json:"common_part"`
	// BelowApplied is set when the recommendation predicts a lower site
	// yield than keeping the applied artwork; StepFinerThanSE when the
	// rounding step is finer than the recommendation's standard error.
	BelowApplied    bool      `json:"below_applied"`
	StepFinerThanSE bool      `json:"step_finer_than_se"`
	Notes           []string  `json:"notes"`
	Before          CompState `json:"before"`
	After           CompState `json:"after"`
	// History compares the measured lot with its history (comp --history
	// with --targets).
	History []HistoryCheck `json:"history,omitempty"`
}

// HistoryCheck compares one measured layer's material movement on one axis
// with the individuals chart of its history (centre ± 3σ̂).
type HistoryCheck struct {
	Layer       string  `json:"layer"`
	Axis        string  `json:"axis"`
	Lots        int     `json:"lots"`
	MovementPPM float64 `json:"movement_ppm"`
	CentrePPM   float64 `json:"centre_ppm"`
	LCLPPM      float64 `json:"lcl_ppm"`
	UCLPPM      float64 `json:"ucl_ppm"`
	Inside      bool    `json:"inside"`
}

// Summary returns the comparison's summary; measured names the layers whose
// movement was measured (a relative one, "L3-L4", carries no registration to
// the drilled holes, so none is reported then), and notes are added after
// the recommendation's own.
func (c *Comparison) Summary(measured, notes []string) *CompSummary {
	r := c.Result
	relative := slices.ContainsFunc(measured, func(l string) bool { _, _, rel := registration.SplitLayer(l); return rel })
	s := &CompSummary{Job: c.Before.In.Source, Objective: r.Objective.String(), Measured: measured, Common: r.Common,
		BelowApplied: r.BelowApplied, StepFinerThanSE: r.StepFinerThanSE, Notes: append(slices.Clone(r.Notes), notes...)}
	for _, l := range r.Layers {
		lj := CompLayer{Layer: l.Layer, ScaleXPPM: l.X.Scale / 1e-6, ScaleYPPM: l.Y.Scale / 1e-6,
			FactorX: l.X.Factor, FactorY: l.Y.Factor,
			AppliedXPPM: l.X.Applied / 1e-6, AppliedYPPM: l.Y.Applied / 1e-6,
			SettingXPPM: l.X.Setting / 1e-6, SettingYPPM: l.Y.Setting / 1e-6,
			SettingFactorX: l.X.SettingFactor, SettingFactorY: l.Y.SettingFactor,
			MovementXPPM: l.X.Movement / 1e-6, MovementYPPM: l.Y.Movement / 1e-6,
			SEXPPM: l.X.SE / 1e-6, SEYPPM: l.Y.SE / 1e-6,
			NetXPPM: l.X.Net / 1e-6, NetYPPM: l.Y.Net / 1e-6,
			MeanScaleX: l.MeanScale[0] / 1e-6, MeanScaleY: l.MeanScale[1] / 1e-6, FreeX: l.X.Free, FreeY: l.Y.Free, Free: []string{}}
		if l.X.Free {
			lj.Free = append(lj.Free, "x")
		}
		if l.Y.Free {
			lj.Free = append(lj.Free, "y")
		}
		s.Layers = append(s.Layers, lj)
	}
	for _, p := range r.Pairs {
		s.Pairs = append(s.Pairs, CompPair{p.Upper, p.Lower, p.Net[0] / 1e-6, p.Net[1] / 1e-6, p.SE[0] / 1e-6, p.SE[1] / 1e-6})
	}
	n := len(c.Before.Sites)
	s.Before = CompState{n, r.WorstBefore, r.RMSBefore, c.Before.InSpec(), c.Before.MeanPInSpec(), nil, nil}
	s.After = CompState{n, r.WorstAfter, r.RMSAfter, c.After.InSpec(), c.After.MeanPInSpec(), nil, nil}
	if !math.IsNaN(r.UsedBefore) {
		ub, ua := r.UsedBefore, r.UsedAfter
		s.Before.WindowUsed, s.After.WindowUsed = &ub, &ua
	}
	if !relative {
		db, da := r.DrillBefore, r.DrillAfter
		s.Before.DrillWorstM, s.After.DrillWorstM = &db, &da
	}
	return s
}

// WriteCSV writes one row per site before and after (comp.csv).
func (c *Comparison) WriteCSV(w io.Writer, u unit.Output) error {
	cw := csv.NewWriter(w)
	L, P := "["+u.Length()+"]", "["+u.Panel()+"]"
	// The offsets are the misregistration across the lines with the design
	// offset excluded, as in the table, comp.json and comp.png; the design
	// offset has its own column.
	header := []string{"site", "section", "x " + P, "y " + P, "angle [deg]", "design_offset " + L,
		"misreg_before_excl_design " + L, "misreg_after_excl_design " + L, "sigma " + L, "in_spec_before", "in_spec_after", "p_before", "p_after"}
	if err := cw.Write(header); err != nil {
		return err
	}
	for k := range c.Before.Sites {
		b, a := &c.Before.Sites[k], &c.After.Sites[k]
		s := b.Site
		rec := []string{s.Name, s.Section, fixed(s.Pos.X/u.PanelSI(), 4), fixed(s.Pos.Y/u.PanelSI(), 4), fixed(s.Angle*180/math.Pi, 2),
			fixed((b.Offset-b.Stats.MeanAcross)/u.LengthSI(), 4),
			fixed(b.Stats.MeanAcross/u.LengthSI(), 4), fixed(a.Stats.MeanAcross/u.LengthSI(), 4), fixed(a.Stats.SDAcross/u.LengthSI(), 4),
			strconv.FormatBool(b.InSpec), strconv.FormatBool(a.InSpec),
			fixed(b.PInSpec, 6), fixed(a.PInSpec, 6)}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// pick returns one when n is 1, else many.
func pick(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
