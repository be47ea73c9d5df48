package drift

import (
	"math"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration"
)

// Eval is the evaluation of one coupler site: its offset statistics and the
// coupling its section's curve gives them.
type Eval struct {
	Row   registration.Row
	Stats registration.Stats // design offset excluded
	// Offset is the mean across-line offset, design offset included; Along
	// the mean along-line offset.
	Offset, Along float64
	Coupling      float64 // dB at the mean offset
	Drift         float64 // dB, Coupling minus the coupling at the design offset
	Margin        float64 // dB to the nearer spec limit; negative out of spec
	InSpec        bool    // the mean offset is in the allowed interval
	CouplingLo    float64 // dB at mean − 3σ
	CouplingHi    float64 // dB at mean + 3σ
	// WorstDrift is the drift of the coupling farthest from the design value
	// over the offsets within mean ± 3σ, with its sign.
	WorstDrift float64
	// PInSpec is the closed-form probability that the site meets its
	// spec: that the offset lies in the allowed interval
	// (registration.SiteProb.Prob), or with process terms the integral of
	// variation.go. It is the site's yield.
	PInSpec float64
	// DriftRegistration is the part of Drift the offset causes (the curve
	// at the mean offset against the design), DriftProcess the part the
	// process terms' means cause there, dB; they sum to Drift. ProcessSD is
	// the standard deviation of the coupling the process terms cause at the
	// mean offset, dB (0 without them).
	DriftRegistration, DriftProcess, ProcessSD float64
	// TermDrifts holds, with process terms, each term's part of
	// DriftProcess (indexed as process.Model.Terms; 0 for a term that moves
	// nothing of the section); nil without them.
	TermDrifts []float64
	// DriftSecondOrder is the part of DriftProcess beyond the terms' sum:
	// the second-order term's shift and curvature (variation_quad.go), dB.
	DriftSecondOrder float64
}

// Evaluator evaluates sites of one kind: a section's curve and the relative
// displacement of its two trace layers under a model.
type Evaluator struct {
	Curve *Curve
	Rel   *registration.Relative
	// Proc holds the process terms that move the section's parameters;
	// nil (or none bound) evaluates registration alone.
	Proc *Proc
}

// Quantity names one value of Eval, for fields drawn over a panel.
type Quantity int

const (
	Drift             Quantity = iota // Eval.Drift, dB
	WorstDrift                        // Eval.WorstDrift, dB
	Offset                            // Eval.Offset, m
	Sigma                             // Eval.Stats.SDAcross, m
	Margin                            // Eval.Margin, dB
	PInSpec                           // Eval.PInSpec
	Misregistration                   // Eval.Stats.MeanAcross (design offset excluded), m
	RegistrationDrift                 // Eval.DriftRegistration, dB
	ProcessDrift                      // Eval.DriftProcess, dB
)

// termDriftBase is where the quantities of one process term's drift begin.
const termDriftBase Quantity = 1 << 16

// TermDrift is the quantity of process term i's drift (i indexes
// process.Model.Terms): its sensitivity at the mean offset times its mean
// at the site, dB; 0 where the term moves nothing of the section.
func TermDrift(i int) Quantity { return termDriftBase + Quantity(i) }

// Eval evaluates a site at p whose lines run along u.
func (e Evaluator) Eval(p, u panel.Vec) Eval { return e.EvalSite(e.Rel.Row(p, u), p) }

// EvalSite evaluates a site at p with sensitivity row row: registration and
// the process terms at p.
func (e Evaluator) EvalSite(row registration.Row, p panel.Vec) Eval {
	if !e.hasProc() {
		return e.EvalRow(row)
	}
	r := Eval{Row: row, Stats: e.Rel.Stats(row)}
	r.Offset = e.Curve.Section.NominalOffset() + r.Stats.MeanAcross
	r.Along = r.Stats.MeanAlong
	var pr procRow
	e.Proc.row(&pr, p)
	e.evalProc(&r, &pr)
	return r
}

// EvalRow evaluates a site with sensitivity row row, from registration
// alone (the process terms, which depend on the position, are EvalSite's).
func (e Evaluator) EvalRow(row registration.Row) Eval {
	c := e.Curve
	r := Eval{Row: row, Stats: e.Rel.Stats(row)}
	sd := r.Stats.SDAcross
	r.Offset = c.Section.NominalOffset() + r.Stats.MeanAcross
	r.Along = r.Stats.MeanAlong
	r.Coupling = c.Coupling(r.Offset)
	r.Drift = r.Coupling - c.Nominal
	r.InSpec = c.InSpec(r.Offset)
	r.Margin = c.Margin(r.Offset, r.Coupling)
	r.CouplingLo = c.Coupling(r.Offset - 3*sd)
	r.CouplingHi = c.Coupling(r.Offset + 3*sd)
	r.WorstDrift = worstDrift(c, r.Offset, sd)
	r.PInSpec = e.pInSpec(&r.Row)
	r.DriftRegistration = r.Drift
	return r
}

// Value returns quantity q of the site at p with lines along u, by the same
// steps as Eval but computing only what q needs.
func (e Evaluator) Value(q Quantity, p, u panel.Vec) float64 {
	row := e.Rel.Row(p, u)
	st := e.Rel.Stats(row)
	c := e.Curve
	off := c.Section.NominalOffset() + st.MeanAcross
	// The offset statistics and the registration drift do not depend on
	// the process terms.
	switch q {
	case Offset:
		return off
	case Sigma:
		return st.SDAcross
	case Misregistration:
		return st.MeanAcross
	case RegistrationDrift:
		return c.Coupling(off) - c.Nominal
	}
	if e.hasProc() {
		return e.valueProc(q, &row, st, off, p)
	}
	switch {
	case q >= termDriftBase || q == ProcessDrift:
		return 0
	case q == PInSpec:
		return e.pInSpec(&row)
	case q == Margin:
		return c.Margin(off, c.Coupling(off))
	case q == WorstDrift:
		return worstDrift(c, off, st.SDAcross)
	}
	return c.Coupling(off) - c.Nominal
}

func (e Evaluator) pInSpec(row *registration.Row) float64 {
	return e.Rel.Prob(row, e.Curve.Section.NominalOffset()).Prob(e.Curve.Allowed)
}

// worstDriftSamples is the number of intervals mean ± 3σ is sampled in for
// the worst drift. The ends are the extremes of a monotone curve, and a
// centred pair's single peak is the design value itself, so 16 intervals find
// the worst case to well within a colour step of the maps.
const worstDriftSamples = 16

// worstDrift returns the largest drift from the design coupling over the
// offsets within mean ± 3σ, keeping its sign.
func worstDrift(c *Curve, mean, sd float64) float64 {
	lo, hi := mean-3*sd, mean+3*sd
	worst := 0.0
	for k := 0; k <= worstDriftSamples; k++ {
		d := c.Coupling(lo+(hi-lo)*float64(k)/worstDriftSamples) - c.Nominal
		if math.Abs(d) > math.Abs(worst) {
			worst = d
		}
	}
	return worst
}

// Value returns quantity q of the evaluated site (the same value
// Evaluator.Value computes for a point).
func (r *Eval) Value(q Quantity) float64 {
	switch q {
	case WorstDrift:
		return r.WorstDrift
	case Offset:
		return r.Offset
	case Sigma:
		return r.Stats.SDAcross
	case Margin:
		return r.Margin
	case PInSpec:
		return r.PInSpec
	case Misregistration:
		return r.Stats.MeanAcross
	case RegistrationDrift:
		return r.DriftRegistration
	case ProcessDrift:
		return r.DriftProcess
	}
	if q >= termDriftBase {
		if i := int(q - termDriftBase); i < len(r.TermDrifts) {
			return r.TermDrifts[i]
		}
		return 0
	}
	return r.Drift
}
