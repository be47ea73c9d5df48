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
// Together. A drawing tolerance such as "finished copper L1 2.1 +0.5/−0.2
// mil" bounds the whole deviation of the finished part from nominal,
// wherever the part sits on the panel: the panel-to-panel part, the
// across-panel shape and the per-site scatter alike. So the allocation
// scales each term's whole deviation from nominal by one factor k: every
// process term's panel mean, its shape amplitude (a measured grid's
// values) and its σ (panel and site parts), and every registration
// contributor's term means and spreads (fixed terms included), its site σ
// and its residual grid. k is the root of P_worst(k) = target, P_worst the
// lowest PInSpec over the sites by the one site evaluator
// (Analysis.Evaluate, as map and yield use it).
//
// Why this rule. At k = 0 every site is at the design, so whenever the
// design is in spec a small enough k meets any target below 1: the rule
// always yields an allocation a drawing can carry. A scale of the σ alone
// (means and shapes kept) is defeated outright wherever the deterministic
// parts by themselves take a site out of spec (pattern plating built up
// at the panel edge), and where it does succeed it allocates ±3kσ about
// nominal while the means and shapes it kept move the part further than
// that, so its notes understate what the fabricator has to hold. One rule
// therefore, not two. k ≥ 1 says the process as modelled meets the target
// with room to spare; k < 1 how much tighter every part of it has to be.
//
// Each note states the range the scaled term covers over the sites it
// acts on, AllocCoverage σ about its mean at each: from k·min(mean − 3σ)
// to k·max(mean + 3σ), written "+a/−b" where the scaled mean is off
// nominal. For a process term the mean at a site is its panel mean plus
// its shape there and σ its site σ (panel and site parts); for a
// registration pair the mean and σ of the across offset at each of the
// section's sites (design offset excluded). The sites are the parts the
// drawing describes, so the rails and borders between them are not
// covered; a uniform panel part enters by its σ, so its ±3σ is wider than
// its half-width. The curves are the ones solved for the model as given:
// at k > 1 a site may reach past their solved offsets, which count as out
// of spec, so a k above 1 errs low. P_worst is not monotone in k
// in every conceivable job (a mean that moves the coupling back toward
// the middle of the window); the root is then the crossing inside the
// bracket found from k = 1, and the worst site meets the target there all
// the same.

// DefaultTarget is the worst-site yield an allocation aims at: ±3σ of a
// normal, 99.73 % (common practice).
const DefaultTarget = 0.9973

// AllocTol is the width of the bracket on k at which the allocation stops,
// relative to k, and AllocPTol how near the target the worst-site P(in
// spec) must come for it to stop sooner: 1e-9, four orders below the
// 0.001 % the yield is printed to. Whichever is met first ends the root
// find: the Illinois steps approach the root from one side while the
// bracket's other end closes only by the bisection of every third step.
const (
	AllocTol  = 1e-6
	AllocPTol = 1e-9
)

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

// NoteAlloc is one parameter's drawing tolerance in the allocation. Values
// are in the unit of Per, metres ("m") or units of εr ("er"), and are
// deviations from the design value Nominal (for a registration line, from
// the design offset; Nominal 0).
type NoteAlloc struct {
	// Section names a registration line's section; "" for a process term.
	Section string `json:"section,omitempty"`
	// Term is the process term's name; "" for a registration line.
	Term      string  `json:"term,omitempty"`
	Parameter string  `json:"parameter"` // drawing words, without the tolerance
	Per       string  `json:"per"`       // "m" or "er"
	Nominal   float64 `json:"nominal"`   // design value, m or εr (0 for registration)
	// MeanLow and MeanHigh are the lowest and highest deterministic
	// deviation over the sites as the job gives it (k = 1): the panel mean
	// plus the across-panel shape, or the mean across offset.
	MeanLow  float64 `json:"mean_low"`
	MeanHigh float64 `json:"mean_high"`
	// SigmaIn is the σ as the job gives it: a process term's site σ (panel
	// and site parts), a registration line's largest across σ of its sites.
	SigmaIn float64 `json:"sigma"`
	// Low and High are the drawing tolerance: the lowest and highest
	// deviation the scaled term covers, k·(mean − 3σ) and k·(mean + 3σ) at
	// the extreme sites (Allocation.Coverage σ).
	Low  float64 `json:"low_delta"`
	High float64 `json:"high_delta"`
}

// Allocation is the common scale k of every deviation from nominal that
// brings the worst site to the target yield, and each parameter's drawing
// tolerance at k (see the notes above).
type Allocation struct {
	Target float64 `json:"target"` // worst-site P(in spec) aimed at, a fraction
	// Feasible is false when no scale reaches the target; Reason says why
	// (a design that is itself out of spec).
	Feasible bool    `json:"feasible"`
	Reason   string  `json:"reason,omitempty"`
	K        float64 `json:"k"`
	// WorstP is the lowest site P(in spec) at K, a fraction; WorstSite is
	// that site's name.
	WorstP    float64 `json:"worst_site_p_in_spec"`
	WorstSite string  `json:"worst_site,omitempty"`
	// Coverage is the number of σ about each site's mean the notes cover.
	Coverage float64     `json:"coverage_sigmas"`
	Terms    []NoteAlloc `json:"terms,omitempty"`
	// SecondOrderRefits counts the refits of the second-order process term
	// at the allocated scale (Notes; 0 without one).
	SecondOrderRefits int `json:"second_order_refits,omitempty"`
}

// DrawingNotes are the drawing notes of a tolerance study: tol.json
// "notes", and notes.txt in words. In the JSON (SI: lengths in m, εr as a
// number, couplings in dB, yields as fractions):
//
//	alone       one NoteLimit per section and parameter: the registration
//	            line (no "term") and each process term's parameter, with
//	            "low_delta" and "high_delta", the confirmed changes from
//	            nominal at which the coupling meets a spec limit, every
//	            other parameter nominal at the design offset ("per" says m
//	            or er; null where no limit is reached inside the
//	            parameter's physical range), the first-order estimates,
//	            the limits met and the coupling solved directly there
//	allocation  all together: "k" (every deviation from nominal scaled
//	            by it), "worst_site" and its "worst_site_p_in_spec" at k
//	            against "target", "coverage_sigmas", and per parameter
//	            ("terms") the as-given "mean_low", "mean_high" and "sigma"
//	            with the drawing tolerance "low_delta" to "high_delta"
//	            from nominal; absent when a used section was not studied
//	            (tol --section)
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

// AllocCoverage is the coverage of the allocation's notes in standard
// deviations about each site's mean: ±3σ holds 99.73 % of a normal, the
// common practice on drawings.
const AllocCoverage = 3

// scaledInput returns a copy of in with every deviation from nominal
// multiplied by k: the registration contributors' term means and spreads,
// site σ and residual grids, and the process terms' panel means and
// spreads, shape amplitudes and grids, and site σ (see the notes above).
// Weights, the datum, the shapes' decay lengths and the panel are kept.
func scaledInput(in *Input, k float64) *Input {
	out := *in
	rm := *in.Model
	rm.Contributors = append([]registration.Contributor(nil), in.Model.Contributors...)
	for i := range rm.Contributors {
		c := &rm.Contributors[i]
		for j := range c.Terms {
			c.Terms[j].Mean *= k
			c.Terms[j].Spread *= k
		}
		c.SiteSigma *= k
		c.Residual = scaledGrid(c.Residual, k)
	}
	out.Model = &rm
	if !in.Process.Empty() {
		pm := *in.Process
		pm.Terms = append([]process.Term(nil), in.Process.Terms...)
		for i := range pm.Terms {
			t := &pm.Terms[i]
			t.Panel.Mean *= k
			t.Panel.Spread *= k
			t.SiteSigma *= k
			t.Shape.Amplitude *= k
			t.Shape.Values = scaledGrid(t.Shape.Values, k)
		}
		out.Process = &pm
	}
	return &out
}

// scaledCurves returns curves with each second-order process term scaled
// for every deviation from nominal multiplied by k (SecondOrder.Scaled);
// a curve without one is shared.
func scaledCurves(curves []*Curve, k float64) []*Curve {
	out := make([]*Curve, len(curves))
	for i, c := range curves {
		out[i] = c
		if c != nil && c.Second != nil {
			cc := *c
			cc.Second = c.Second.Scaled(k)
			out[i] = &cc
		}
	}
	return out
}

// scaledGrid returns a copy of g with its values multiplied by k (the
// nodes shared); nil for nil.
func scaledGrid(g *registration.Grid, k float64) *registration.Grid {
	if g == nil {
		return nil
	}
	sc := func(a [][]float64) [][]float64 {
		if a == nil {
			return nil
		}
		out := make([][]float64, len(a))
		for j, row := range a {
			out[j] = make([]float64, len(row))
			for i, v := range row {
				out[j][i] = k * v
			}
		}
		return out
	}
	return &registration.Grid{X: g.X, Y: g.Y, DX: sc(g.DX), DY: sc(g.DY)}
}

// worstP evaluates in with every deviation from nominal scaled by k on
// curves and returns the analysis, its lowest site PInSpec and that
// site's index (−1 without sites).
//
// The curves' second-order terms were fitted for the input scaled by k0
// (1: the job as given) and are scaled from there (SecondOrder.Scaled).
func worstP(in *Input, curves []*Curve, k, k0 float64) (*Analysis, float64, int) {
	a := New(scaledInput(in, k), nil)
	a.Evaluate(scaledCurves(curves, k/k0))
	p, worst := 1.0, -1
	for i := range a.Sites {
		if worst < 0 || a.Sites[i].PInSpec < p {
			p, worst = a.Sites[i].PInSpec, i
		}
	}
	return a, p, worst
}

// allocMaxDoublings bounds the search for a bracket on k: 2^±30 covers any
// process from a billionth to a billion times the one given.
const allocMaxDoublings = 30

// Allocate finds the common scale k of every deviation from nominal at
// which the worst site of in (on curves, one per used section) reaches
// target, by the Illinois regula falsi of crossing on a bracket found by
// doubling or halving k from 1, and states each parameter's drawing
// tolerance at k (see the notes above). It is infeasible only when a used
// section's design is itself out of spec (no k > 0 helps) or when even
// k = 2^−30 misses the target.
func Allocate(in *Input, curves []*Curve, target float64) *Allocation {
	return allocate(in, curves, target, 1)
}

// allocate is Allocate on curves whose second-order process terms were
// fitted for the input scaled by k0 (worstP).
func allocate(in *Input, curves []*Curve, target, k0 float64) *Allocation {
	al := &Allocation{Target: target, Coverage: AllocCoverage}
	for _, st := range in.Sites {
		c := curves[in.SectionIndex(st.Section)]
		if c != nil && !c.DesignInSpec {
			al.Reason = fmt.Sprintf("section %q: the design itself is outside its spec (coupling %.3f dB at the design offset), so no scale of the process reaches the target",
				c.Section.Name, c.Nominal)
			return al
		}
	}
	// The last evaluation is kept: the root find usually ends on it.
	var last struct {
		k, p  float64
		a     *Analysis
		worst int
	}
	g := func(k float64) float64 {
		last.a, last.p, last.worst = worstP(in, curves, k, k0)
		last.k = k
		if math.Abs(last.p-target) <= AllocPTol {
			return 0 // at the target: crossing stops here
		}
		return last.p - target
	}
	lo, hi := 1.0, 1.0
	glo := g(1)
	ghi := glo
	for n := 0; ghi > 0 && n < allocMaxDoublings; n++ {
		lo, glo = hi, ghi
		hi *= 2
		ghi = g(hi)
	}
	for n := 0; glo < 0 && n < allocMaxDoublings; n++ {
		hi, ghi = lo, glo
		lo /= 2
		glo = g(lo)
	}
	var k float64
	switch {
	case glo < 0:
		al.K, al.WorstP = lo, last.p
		al.Reason = fmt.Sprintf("even every deviation from nominal x %.3g leaves the worst site at %.4g %%", lo, 100*al.WorstP)
		return al
	case ghi == 0:
		k = hi
	case glo == 0 || ghi > 0:
		// At the target at lo, or still above it at 2^30: no bound found.
		k = lo
	default:
		k = crossing(lo, hi, glo, ghi, AllocTol*lo, g)
	}
	if last.k != k {
		g(k)
	}
	a, p, worst := last.a, last.p, last.worst
	al.Feasible, al.K, al.WorstP = true, k, p
	if worst >= 0 {
		al.WorstSite = a.Sites[worst].Site.Name
	}
	al.Terms = allocTerms(a, in, curves, k)
	return al
}

// allocTerms states every parameter's drawing tolerance at k from a, the
// analysis of the input scaled by k: per registration section the range of
// its sites' across offsets, per process term the range of its values at
// the sites of the sections it acts on, each ± AllocCoverage σ.
func allocTerms(a *Analysis, in *Input, curves []*Curve, k float64) []NoteAlloc {
	var out []NoteAlloc
	for si, s := range in.Sections {
		if !a.Used(si) || OffsetKind(s) != "registration" {
			continue
		}
		mlo, mhi, lo, hi, sd := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1), 0.0
		for i := range a.Sites {
			if a.Sites[i].Section != si {
				continue
			}
			st := a.Sites[i].Stats
			mlo, mhi = math.Min(mlo, st.MeanAcross), math.Max(mhi, st.MeanAcross)
			lo = math.Min(lo, st.MeanAcross-AllocCoverage*st.SDAcross)
			hi = math.Max(hi, st.MeanAcross+AllocCoverage*st.SDAcross)
			sd = math.Max(sd, st.SDAcross)
		}
		// a is the analysis of the scaled input: the offsets are linear in
		// the model, so the means and σ as given are its own over k.
		out = append(out, NoteAlloc{Section: s.Name, Parameter: registrationWords(s), Per: "m",
			MeanLow: mlo / k, MeanHigh: mhi / k, SigmaIn: sd / k, Low: lo, High: hi})
	}
	if in.Process.Empty() {
		return out
	}
	size := in.Process.Size
	for ti := range in.Process.Terms {
		t := &in.Process.Terms[ti]
		var words string
		var nominal float64
		mlo, mhi := math.Inf(1), math.Inf(-1)
		for i := range a.Sites {
			si := a.Sites[i].Section
			if pr := a.procOf(si); pr == nil || !bindsTerm(pr, ti) {
				continue
			}
			if words == "" {
				words, nominal = paramWords(curves[si].Section, t)
			}
			m := t.Mean(a.Sites[i].Site.Pos, size)
			mlo, mhi = math.Min(mlo, m), math.Max(mhi, m)
		}
		if words == "" {
			continue // the term moves nothing of a section used
		}
		sig := math.Sqrt(t.Variance())
		pr := "m"
		if !t.Quantity.IsLength() {
			pr = "er"
		}
		out = append(out, NoteAlloc{Term: t.Name, Parameter: words, Per: pr, Nominal: nominal,
			MeanLow: mlo, MeanHigh: mhi, SigmaIn: sig,
			Low: k * (mlo - AllocCoverage*sig), High: k * (mhi + AllocCoverage*sig)})
	}
	return out
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
		al, err := allocateRefit(ctx, in, curves, set, target)
		if err != nil {
			return nil, err
		}
		dn.Allocation = al
	}
	return dn, nil
}

// allocRefits bounds the refits of the second-order term in
// allocateRefit; each costs its direct solves (3 per fit node and
// section), and the scale of the term from the last fit is within a few
// per cent of 1 after the first.
const allocRefits = 3

// allocateRefit is Allocate with the curves solved again for the input
// scaled by the allocated k (solveFor, so that the solved offsets hold the
// scaled job's domain) and their second-order process term refitted by
// direct solves for it, then allocated again from there, until k moves by
// less than the root's tolerance. The
// term's scaling (SecondOrder.Scaled) takes the coupling as quadratic in
// the parameters about the nominal section; where it is not (the
// edge-coupled microstrip of the topology samples: a fresh analysis of the
// job scaled by the first k found its worst site at 0.9990 against the
// target 0.9973), the refit is what yield would say of a job built to the
// allocated tolerances.
func allocateRefit(ctx context.Context, in *Input, curves []*Curve, set *Settings, target float64) (*Allocation, error) {
	al := Allocate(in, curves, target)
	if in.Process.Empty() || !al.Feasible {
		return al, nil
	}
	has := false
	for _, c := range curves {
		has = has || (c != nil && c.Second != nil)
	}
	set = withSensitivities(set, in)
	base := Reach(New(in, nil))
	for n := 0; has && n < allocRefits; n++ {
		k0 := al.K
		// The scaled job's curves by the one rule of how far to solve
		// (solveFor: its sites' offsets and the process domain, wider
		// when k > 1), never from a shorter start than the job's own.
		sa := New(scaledInput(in, k0), nil)
		reach := Reach(sa)
		refit := make([]*Curve, len(curves))
		for i, c := range curves {
			if c == nil {
				continue
			}
			rc, err := solveFor(ctx, set, in.Sections[i], i, math.Max(reach[i], base[i]), []*Analysis{sa})
			if err != nil {
				return nil, err
			}
			refit[i] = rc
		}
		if err := FitSecondOrder(ctx, set, refit, sa); err != nil {
			return nil, err
		}
		next := allocate(in, refit, target, k0)
		next.SecondOrderRefits = n + 1
		if !next.Feasible {
			return al, nil
		}
		al = next
		if math.Abs(al.K-k0) <= AllocTol*k0 {
			break
		}
	}
	return al, nil
}
