package drift

import (
	"context"
	"fmt"
	"math"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// Drawing notes: the tolerance of every parameter a job's process terms act
// on, in the words of a fabrication drawing.
//
// Alone. With every other parameter nominal and the traces at the design
// offset, coupling ≈ c₀ + s·Δp (s the section's coupling sensitivity to the
// term's parameters at the design offset), so the change that takes the
// coupling to a spec limit L is Δp = (L − c₀)/s; ConfirmRoot's secant on
// direct solves of the perturbed section then moves Δp until the solved
// coupling meets L within ConfirmDB. The registration line is the section's
// confirmed offset tolerance (Tolerance).
//
// Together. Every σ of the registration model and of the process terms is
// scaled by one factor k (means, across-panel shapes and residual grids
// kept), and k is the root of P_worst(k) = target, P_worst the lowest
// PInSpec over the sites by the one site evaluator. Each note then carries
// ±3·k·σ: for a process term its site σ (panel and site parts), for a
// registration pair the largest across-line σ of its sites.

// DefaultTarget is the worst-site yield an allocation aims at: ±3σ of a
// normal, 99.73 % (common practice).
const DefaultTarget = 0.9973

// AllocTol is the width of the bracket on k at which the allocation stops,
// relative to k.
const AllocTol = 1e-6

// NoteLimit is one parameter's range alone in one section.
type NoteLimit struct {
	Section string `json:"section"`
	// Term is the process term's name; "" for the registration line.
	Term      string  `json:"term,omitempty"`
	Parameter string  `json:"parameter"` // drawing words, without the tolerance
	Per       string  `json:"per"`       // "m" or "er"
	Nominal   float64 `json:"nominal"`   // design value, m or εr (0 for registration)
	// SensitivityDB is dCoupling/dp at the design offset, dB per m or per εr.
	SensitivityDB float64 `json:"d_coupling_db,omitempty"`
	// LowDelta and HighDelta are the confirmed changes (negative, positive)
	// at which the coupling reaches a spec limit; nil when none is reached
	// inside the parameter's physical range.
	LowDelta    *float64 `json:"low_delta"`
	HighDelta   *float64 `json:"high_delta"`
	LinearLow   *float64 `json:"linear_low_delta,omitempty"` // first-order estimates
	LinearHigh  *float64 `json:"linear_high_delta,omitempty"`
	LimitLowDB  *float64 `json:"limit_low_db,omitempty"`
	LimitHighDB *float64 `json:"limit_high_db,omitempty"`
	SolvedLowDB *float64 `json:"solved_low_db,omitempty"` // direct solve at low_delta
	SolvedHiDB  *float64 `json:"solved_high_db,omitempty"`
}

// Tolerance returns the symmetric range of l: the smaller of the two
// confirmed changes (+Inf when neither limit is reached).
func (l *NoteLimit) Tolerance() float64 {
	t := math.Inf(1)
	for _, d := range []*float64{l.LowDelta, l.HighDelta} {
		if d != nil {
			t = math.Min(t, math.Abs(*d))
		}
	}
	return t
}

// NoteAlloc is one parameter's share of the allocation.
type NoteAlloc struct {
	Section   string  `json:"section,omitempty"` // registration lines only
	Term      string  `json:"term,omitempty"`
	Parameter string  `json:"parameter"`
	Per       string  `json:"per"`
	Nominal   float64 `json:"nominal"`
	SigmaIn   float64 `json:"sigma"`             // σ as given (m or εr)
	PlusMinus float64 `json:"plus_minus_3sigma"` // 3·k·σ
}

// Allocation is the common scale of every σ that brings the worst site to
// the target yield.
type Allocation struct {
	Target float64 `json:"target"`
	// Feasible is false when even a vanishing σ leaves the worst site below
	// the target (the means and shapes alone take it out of spec).
	Feasible bool        `json:"feasible"`
	K        float64     `json:"k"`
	WorstP   float64     `json:"worst_site_p_in_spec"` // at K
	Terms    []NoteAlloc `json:"terms,omitempty"`
}

// DrawingNotes are the drawing notes of a tolerance study (tol.json "notes",
// notes.txt).
type DrawingNotes struct {
	Alone      []NoteLimit `json:"alone"`
	Allocation *Allocation `json:"allocation,omitempty"`
}

// paramWords returns the drawing words and the design value of term t's
// parameter in section s.
func paramWords(s *section.Section, t *process.Term) (string, float64) {
	li := -1
	for i, l := range s.Stackup.Layers {
		if l.Name == t.Layer && t.Layer != "" {
			li = i
		}
	}
	trace := func() *section.Trace {
		for k := range s.Traces {
			if s.Traces[k].Layer == t.Layer {
				return &s.Traces[k]
			}
		}
		return nil
	}
	switch t.Quantity {
	case process.Er:
		if li < 0 {
			return "εr of the solder mask", s.Stackup.Mask.Er
		}
		return "εr of " + t.Layer, s.Stackup.Layers[li].Er
	case process.Thickness, process.Mask:
		if li < 0 {
			return "solder mask over laminate", s.Stackup.Mask.OverLaminate
		}
		l := s.Stackup.Layers[li]
		if l.Core {
			return "core " + t.Layer, l.Thickness
		}
		return "prepreg " + t.Layer, l.Thickness
	case process.Copper:
		l := s.Stackup.Layers[li]
		if t.Step > 0 && t.Step <= len(l.Plating) {
			return fmt.Sprintf("plating step %d on %s", t.Step, t.Layer), l.Plating[t.Step-1]
		}
		return "finished copper " + t.Layer, l.Thickness
	case process.Width:
		if tr := trace(); tr != nil {
			return "etched width on " + t.Layer, tr.Width
		}
	case process.Etch:
		if tr := trace(); tr != nil {
			return "etch undercut per side on " + t.Layer, tr.Etch
		}
	}
	return t.Name, 0
}

// registrationWords names the registration line of s.
func registrationWords(s *section.Section) string {
	return fmt.Sprintf("%s–%s layer-to-layer registration", s.Traces[0].Layer, s.Traces[1].Layer)
}

// perturbedAll returns s with every parameter in ps moved by dv, validated.
func perturbedAll(s *section.Section, ps []section.Param, dv float64) (*section.Section, error) {
	out := s
	for _, p := range ps {
		out = out.Perturbed(p, dv)
	}
	return out, out.Validate()
}

// termLimit finds the range alone of binding b of curve c's section.
func termLimit(ctx context.Context, c *Curve, set *Settings, m *process.Model, b process.Binding) (NoteLimit, error) {
	s := c.Section
	t := &m.Terms[b.Term]
	words, nominal := paramWords(s, t)
	params := c.Curve.Params()
	var ps []section.Param
	nom := s.NominalOffset()
	var slope float64
	for _, i := range b.Params {
		ps = append(ps, params[i])
		slope += c.Curve.CouplingSensitivity(i, nom)
	}
	nl := NoteLimit{Section: s.Name, Term: t.Name, Parameter: words, Per: per(ps[0]), Nominal: nominal, SensitivityDB: slope}
	if slope == 0 || !c.DesignInSpec {
		return nl, nil
	}
	solve := func(d float64) (float64, error) {
		ps2, err := perturbedAll(s, ps, d)
		if err != nil {
			return 0, err
		}
		return solvedCouplingOf(ps2, c, set, nom)
	}
	for _, sign := range []float64{-1, 1} {
		limit := s.Spec.Coupling + sign*s.Spec.Tolerance
		d := (limit - c.Nominal) / slope
		lin := d
		if _, err := perturbedAll(s, ps, d); err != nil {
			continue // the limit lies beyond the parameter's physical range
		}
		dr, solved, err := confirmWith(ctx, solve, d, slope, limit)
		if err != nil {
			return nl, fmt.Errorf("section %q, term %q: confirming the limit at %+.4g: %w", s.Name, t.Name, d, err)
		}
		l := limit
		if dr < 0 {
			nl.LowDelta, nl.LinearLow, nl.LimitLowDB, nl.SolvedLowDB = &dr, &lin, &l, &solved
		} else {
			nl.HighDelta, nl.LinearHigh, nl.LimitHighDB, nl.SolvedHiDB = &dr, &lin, &l, &solved
		}
	}
	return nl, nil
}

// scaledInput returns a copy of in whose registration and process σ are all
// multiplied by k (means, shapes and residual grids kept).
func scaledInput(in *Input, k float64) *Input {
	out := *in
	rm := *in.Model
	rm.Contributors = append([]registration.Contributor(nil), in.Model.Contributors...)
	for i := range rm.Contributors {
		c := &rm.Contributors[i]
		for j := range c.Terms {
			c.Terms[j].Spread *= k
		}
		c.SiteSigma *= k
	}
	out.Model = &rm
	if !in.Process.Empty() {
		pm := *in.Process
		pm.Terms = append([]process.Term(nil), in.Process.Terms...)
		for i := range pm.Terms {
			pm.Terms[i].Panel.Spread *= k
			pm.Terms[i].SiteSigma *= k
		}
		out.Process = &pm
	}
	return &out
}

// worstP evaluates in with every σ scaled by k on curves and returns the
// analysis and its lowest site PInSpec.
func worstP(in *Input, curves []*Curve, k float64) (*Analysis, float64) {
	a := New(scaledInput(in, k), nil)
	a.Evaluate(curves)
	p := 1.0
	for i := range a.Sites {
		p = math.Min(p, a.Sites[i].PInSpec)
	}
	return a, p
}

// allocMaxDoublings bounds the search for a bracket on k: 2^±30 covers any
// process from a billionth to a billion times the one given.
const allocMaxDoublings = 30

// Allocate finds the common σ scale k at which the worst site of in (on
// curves, one per used section) reaches target, by the Illinois regula
// falsi of crossing on a bracket found by doubling or halving k from 1.
func Allocate(in *Input, curves []*Curve, target float64) *Allocation {
	al := &Allocation{Target: target}
	g := func(k float64) float64 { _, p := worstP(in, curves, k); return p - target }
	lo, hi := 1.0, 1.0
	glo, ghi := g(1), g(1)
	for n := 0; ghi >= 0 && n < allocMaxDoublings; n++ {
		lo, glo = hi, ghi
		hi *= 2
		ghi = g(hi)
	}
	for n := 0; glo < 0 && n < allocMaxDoublings; n++ {
		hi, ghi = lo, glo
		lo /= 2
		glo = g(lo)
	}
	if glo < 0 {
		al.K, al.WorstP = lo, glo+target // the best the means and shapes allow
		return al
	}
	k := lo
	if ghi < 0 {
		k = crossing(lo, hi, glo, ghi, AllocTol*lo, g)
	}
	a, p := worstP(in, curves, k)
	al.Feasible, al.K, al.WorstP = true, k, p
	// Registration: per section, the largest across-line σ of its sites.
	sd := make([]float64, len(in.Sections))
	for i := range a.Sites {
		si := a.Sites[i].Section
		sd[si] = math.Max(sd[si], a.Sites[i].Stats.SDAcross)
	}
	for si, s := range in.Sections {
		if !a.Used(si) || OffsetKind(s) != "registration" {
			continue
		}
		al.Terms = append(al.Terms, NoteAlloc{Section: s.Name, Parameter: registrationWords(s), Per: "m", SigmaIn: sd[si] / k, PlusMinus: 3 * sd[si]})
	}
	if in.Process.Empty() {
		return al
	}
	for ti := range in.Process.Terms {
		t := &in.Process.Terms[ti]
		for si, c := range curves {
			if c == nil || a.procOf(si) == nil || !bindsTerm(a.procOf(si), ti) {
				continue
			}
			words, nominal := paramWords(c.Section, t)
			sig := math.Sqrt(t.Variance())
			pr := "m"
			if !t.Quantity.IsLength() {
				pr = "er"
			}
			al.Terms = append(al.Terms, NoteAlloc{Term: t.Name, Parameter: words, Per: pr, Nominal: nominal, SigmaIn: sig, PlusMinus: 3 * k * sig})
			break
		}
	}
	return al
}

func bindsTerm(p *Proc, ti int) bool {
	for _, b := range p.Bind {
		if b.Term == ti {
			return true
		}
	}
	return false
}

// Notes returns the drawing notes of in on the studied curves (per section;
// nil where not studied), with the registration ranges of the sections'
// tolerance results; the allocation needs every used section's curve.
func Notes(ctx context.Context, in *Input, curves []*Curve, secs []TolSection, set *Settings, target float64, complete bool) (*DrawingNotes, error) {
	dn := &DrawingNotes{}
	for _, st := range secs {
		si := in.SectionIndex(st.Name)
		c := curves[si]
		s := c.Section
		if st.OffsetIs == "registration" && st.DesignInSpec {
			lo, hi := *st.OffsetLowM-st.DesignOffsetM, *st.OffsetHighM-st.DesignOffsetM
			dn.Alone = append(dn.Alone, NoteLimit{Section: s.Name, Parameter: registrationWords(s), Per: "m",
				LowDelta: &lo, HighDelta: &hi, LimitLowDB: st.LimitLowDB, LimitHighDB: st.LimitHighDB,
				SolvedLowDB: st.SolvedLowDB, SolvedHiDB: st.SolvedHighDB})
		}
		if in.Process.Empty() {
			continue
		}
		bind, _, ok := in.Process.Bind(s, c.Curve.Params())
		if !ok {
			return nil, fmt.Errorf("section %q: its curve lacks the sensitivities of the process terms", s.Name)
		}
		for _, b := range bind {
			nl, err := termLimit(ctx, c, set, in.Process, b)
			if err != nil {
				return nil, err
			}
			dn.Alone = append(dn.Alone, nl)
		}
	}
	if complete {
		dn.Allocation = Allocate(in, curves, target)
	}
	return dn, nil
}
