package drift

import (
	"fmt"
	"math"
	"slices"
	"sync"

	"gonum.org/v1/gonum/integrate/quad"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// Process variation in the site evaluator.
//
// With process terms (Input.Process) the coupling of a site whose across
// offset is δ and whose parameters moved by Δpᵢ is taken as
//
//	C(δ, Δp) = c(δ) + Σᵢ sᵢ(δ)·Δpᵢ,
//
// exact in the offset (the solved curve c) and first order in the process
// terms (sᵢ the solver's coupling sensitivity curves, section.Curve.
// CouplingSensitivity). A site's terms are independent, each with mean
// μᵢ(p) = panel mean + shape(p) and variance σᵢ² = panel + site variance,
// so conditional on δ the coupling is normal with
//
//	m(δ) = c(δ) + Σ sᵢ(δ)·μᵢ,  v(δ) = Σ sᵢ(δ)²·σᵢ²
//
// (uniform panel parts enter by their variance, w²/3: a sum of a dozen
// terms is close to normal by the central limit theorem; BUG below).
//
// In spec. A realisation is in spec when its coupling is inside the spec
// window and its offset lies in the section's offset domain: the connected
// interval about the design offset over which the curve stays inside the
// window widened by the largest process reach W of the section's sites
// (|Σ sᵢμᵢ| + 6·√v at the design offset). Without process terms W = 0,
// the domain is the allowed interval and the rule is the registration
// rule (Curve.InSpec); with them, a coupling that re-enters the window far
// from the design (through offsets where no process excursion could keep
// it in spec) still counts as out of spec, as before.
//
// P(in spec) = ∫ φ_δ(δ)·[Φ((hi − m)/√v) − Φ((lo − m)/√v)] dδ over the
// domain, δ normal (its registration mean and standard deviation). The
// integrand steps where m(δ) crosses a spec limit, with a width √v/|m'|
// that is anything from the whole range to nothing; Gauss–Hermite nodes
// spread over the line cannot sit on such a step, so the range mean ± 8σ
// (Φ(−8) = 6.2e-16, Abramowitz & Stegun 26.2.29) is split at every
// crossing and each piece integrated by Gauss–Legendre (gonum
// integrate/quad.Legendre): a sharp step then falls on a piece boundary
// and each piece is smooth.
//
// BUG(variation): with process terms, uniform registration terms enter the
// offset distribution by their variance (normal of the same σ), not exactly
// as in registration.SiteProb; and Monte Carlo yield samples registration
// only.

// procSigmas is how many standard deviations of the process part the
// offset domain allows for (see above); a normal tail beyond 6σ holds
// Φ(−6) = 9.9e-10 (Abramowitz & Stegun 26.2.29).
const procSigmas = 6

// procRangeSigmas is how far the offset integral reaches each side of the
// mean: Φ(−8) = 6.2e-16 is lost.
const procRangeSigmas = 8

// procScan is the number of steps mean ± 8σ is scanned in for the spec
// crossings of m(δ); m is a sum of monotone cubics on the curve's 0.5 mil
// grid, so two crossings closer than 16σ/procScan (a site whose σ spans
// many curve points) could be missed: a pair of crossings that close would
// be a re-entry of the window between two curve points.
const procScan = 32

// procMaxCross bounds the spec crossings found per site; a monotone or
// single-peaked curve has at most four within a window's two limits.
const procMaxCross = 8

// procGrade places the extra piece boundaries about a crossing, in widths
// of the window's step √v/|m'|: Φ over [0, 1], [1, 3], [3, 9] and
// beyond (Φ(−9) ≈ 1e-19) is smooth on each piece, so the step is resolved
// whether it is sharp, wide or in between.
var procGrade = [...]float64{1, 3, 9}

// procBisect is the number of bisections of each crossing: the step is
// placed to 2⁻³⁰ of a scan step.
const procBisect = 30

// procNodes is the number of Gauss–Legendre nodes per piece, and
// procPiece the widest piece in standard deviations of the offset. A
// piece holds a part of a normal density at most 2σ wide times a smooth
// window probability; 8 nodes integrate a polynomial of degree 15 exactly,
// and the Taylor remainder of exp(−z²/2) over a 2σ piece is below 1e-9
// (the tests check 1e-6 against the registration yield of a step).
const (
	procNodes = 8
	procPiece = 2
)

var (
	legendreOnce   sync.Once
	legendreX      [procNodes]float64
	legendreWeight [procNodes]float64
)

// legendre returns the Gauss–Legendre nodes and weights on [−1, 1].
func legendre() (*[procNodes]float64, *[procNodes]float64) {
	legendreOnce.Do(func() { quad.Legendre{}.FixedLocations(legendreX[:], legendreWeight[:], -1, 1) })
	return &legendreX, &legendreWeight
}

// Proc is the process side of the evaluator of one section: the terms
// that move its parameters and its offset domain.
type Proc struct {
	Model *process.Model
	// Bind are the terms that move a parameter of the section, with the
	// indices of their parameters in the curve's sensitivities.
	Bind []process.Binding
	// Domain is the section's offset domain (see the package notes above).
	Domain registration.Interval
}

// maxStackTerms is the number of bound terms a site is evaluated with on
// the stack; more take one allocation per evaluation.
const maxStackTerms = 24

// procRow is a site's process terms: per binding its mean and variance.
type procRow struct {
	mu, va []float64
	buf    [2 * maxStackTerms]float64
}

// row fills r with the process terms of a site at p.
func (pr *Proc) row(r *procRow, p panel.Vec) {
	n := len(pr.Bind)
	if n <= maxStackTerms {
		r.mu, r.va = r.buf[:n], r.buf[maxStackTerms:maxStackTerms+n]
	} else {
		r.mu, r.va = make([]float64, n), make([]float64, n)
	}
	for b, bd := range pr.Bind {
		t := &pr.Model.Terms[bd.Term]
		r.mu[b] = t.Mean(p, pr.Model.Size)
		r.va[b] = t.Variance()
	}
}

// termSens returns binding b's coupling sensitivity at offset off: the sum
// over its parameters (a mask coat moves two).
func (e *Evaluator) termSens(b int, off float64) float64 {
	var s float64
	for _, k := range e.Proc.Bind[b].Params {
		s += e.Curve.Curve.CouplingSensitivity(k, off)
	}
	return s
}

// at returns the mean m(δ) and variance v(δ) of the coupling at offset off
// for process row r.
func (e *Evaluator) at(off float64, r *procRow) (m, v float64) {
	m = e.Curve.Coupling(off)
	for b := range r.mu {
		s := e.termSens(b, off)
		m += s * r.mu[b]
		v += s * s * r.va[b]
	}
	return m, v
}

// mean returns m(δ) only.
func (e *Evaluator) mean(off float64, r *procRow) float64 {
	m := e.Curve.Coupling(off)
	for b := range r.mu {
		m += e.termSens(b, off) * r.mu[b]
	}
	return m
}

// window returns P(lo ≤ coupling ≤ hi) for a normal coupling of mean m and
// variance v.
func window(m, v, lo, hi float64) float64 {
	if v <= 0 {
		if m >= lo && m <= hi {
			return 1
		}
		return 0
	}
	s := math.Sqrt(v)
	return math.Max(0, registration.NormalCDF((hi-m)/s)-registration.NormalCDF((lo-m)/s))
}

// hasProc reports whether the evaluator has process terms bound.
func (e *Evaluator) hasProc() bool { return e.Proc != nil && len(e.Proc.Bind) > 0 }

// evalProc fills the coupling quantities of r (whose statistics and mean
// offset are set) with the process terms of row pr.
func (e *Evaluator) evalProc(r *Eval, pr *procRow) {
	c := e.Curve
	sp := c.Section.Spec
	sd := r.Stats.SDAcross
	m, v := e.at(r.Offset, pr)
	creg := c.Coupling(r.Offset)
	r.Coupling = m
	r.Drift = m - c.Nominal
	r.DriftRegistration = creg - c.Nominal
	r.DriftProcess = m - creg
	r.ProcessSD = math.Sqrt(v)
	r.InSpec = e.Proc.Domain.Contains(r.Offset) && math.Abs(m-sp.Coupling) <= sp.Tolerance
	r.Margin = sp.Tolerance - math.Abs(m-sp.Coupling)
	if !r.InSpec {
		r.Margin = -math.Abs(r.Margin)
	}
	r.CouplingLo = e.mean(r.Offset-3*sd, pr)
	r.CouplingHi = e.mean(r.Offset+3*sd, pr)
	r.WorstDrift = e.worstDriftProc(r.Offset, sd, pr)
	r.PInSpec = e.pInSpecProc(r.Offset, sd, pr)
}

// worstDriftProc is worstDrift with the process terms: the largest
// |m(δ) ± 3√v(δ) − nominal| over the offsets within mean ± 3σ.
func (e *Evaluator) worstDriftProc(mean, sd float64, pr *procRow) float64 {
	lo, hi := mean-3*sd, mean+3*sd
	worst := 0.0
	for k := 0; k <= worstDriftSamples; k++ {
		m, v := e.at(lo+(hi-lo)*float64(k)/worstDriftSamples, pr)
		s := 3 * math.Sqrt(v)
		for _, d := range [2]float64{m - s - e.Curve.Nominal, m + s - e.Curve.Nominal} {
			if math.Abs(d) > math.Abs(worst) {
				worst = d
			}
		}
	}
	return worst
}

// pInSpecProc returns P(in spec) of a site whose offset is normal with
// mean mu and standard deviation sd, with process row pr (see the package
// notes above).
func (e *Evaluator) pInSpecProc(mu, sd float64, pr *procRow) float64 {
	sp := e.Curve.Section.Spec
	lo, hi := sp.Coupling-sp.Tolerance, sp.Coupling+sp.Tolerance
	dom := e.Proc.Domain
	if sd == 0 {
		if !dom.Contains(mu) {
			return 0
		}
		m, v := e.at(mu, pr)
		return window(m, v, lo, hi)
	}
	a, b := math.Max(mu-procRangeSigmas*sd, dom.Lo), math.Min(mu+procRangeSigmas*sd, dom.Hi)
	if !(a < b) {
		return 0
	}
	// Pieces split at the crossings of m(δ) with lo and hi, graded about
	// each crossing.
	var cuts [procMaxCross * (1 + 2*len(procGrade))]float64
	nc := 0
	add := func(x float64) {
		if x > a && x < b && nc < len(cuts) {
			cuts[nc] = x
			nc++
		}
	}
	g := func(x float64) (float64, float64) { m := e.mean(x, pr); return m - lo, m - hi }
	x0 := a
	g0l, g0h := g(x0)
	cross := 0
	for k := 1; k <= procScan; k++ {
		x1 := a + (b-a)*float64(k)/procScan
		g1l, g1h := g(x1)
		for lim, pair := range [2][2]float64{{g0l, g1l}, {g0h, g1h}} {
			if pair[0]*pair[1] >= 0 || cross == procMaxCross {
				continue
			}
			cross++
			l, r, gl := x0, x1, pair[0]
			for range procBisect {
				mid := 0.5 * (l + r)
				gm, gmh := g(mid)
				if lim == 1 {
					gm = gmh
				}
				if gm*gl > 0 {
					l, gl = mid, gm
				} else {
					r = mid
				}
			}
			xc := 0.5 * (l + r)
			add(xc)
			// The window steps over a width √v/|m'| about xc.
			_, v := e.at(xc, pr)
			slope := math.Abs(pair[1]-pair[0]) / (x1 - x0)
			if w := math.Sqrt(v) / slope; w > 0 && slope > 0 {
				for _, f := range procGrade {
					add(xc - f*w)
					add(xc + f*w)
				}
			}
		}
		x0, g0l, g0h = x1, g1l, g1h
	}
	// Pieces of at most procPiece standard deviations of the offset.
	for k := -procRangeSigmas + procPiece; k < procRangeSigmas; k += procPiece {
		add(mu + float64(k)*sd)
	}
	slices.Sort(cuts[:nc])
	xs, ws := legendre()
	norm := 1 / (sd * math.Sqrt(2*math.Pi))
	var p float64
	left := a
	for i := 0; i <= nc; i++ {
		right := b
		if i < nc {
			right = cuts[i]
		}
		if right > left {
			h, c := (right-left)/2, (right+left)/2
			for k := range xs {
				x := c + h*xs[k]
				z := (x - mu) / sd
				m, v := e.at(x, pr)
				p += h * ws[k] * norm * math.Exp(-0.5*z*z) * window(m, v, lo, hi)
			}
		}
		left = right
	}
	return math.Min(1, math.Max(0, p))
}

// bindProc returns the process side of the evaluator of curve c under
// model m for the sites at the positions given: the bindings and the
// offset domain. It panics when a term moves a parameter whose sensitivity
// the curve lacks (a curve solved without Settings.Sensitivities, which
// SolveCurves always asks for with process terms).
func bindProc(m *process.Model, c *Curve, positions []panel.Vec) *Proc {
	if m.Empty() || c == nil {
		return nil
	}
	bind, name, ok := m.Bind(c.Section, c.Curve.Params())
	if !ok {
		panic(fmt.Sprintf("drift: the curve of section %q has no sensitivity for process term %q; solve it with Settings.Sensitivities", c.Section.Name, name))
	}
	if len(bind) == 0 {
		return nil
	}
	pr := &Proc{Model: m, Bind: bind, Domain: c.Allowed}
	e := Evaluator{Curve: c, Proc: pr}
	nom := c.Section.NominalOffset()
	var reach float64
	var row procRow
	for _, p := range positions {
		pr.row(&row, p)
		var shift, v float64
		for b := range bind {
			s := e.termSens(b, nom)
			shift += s * row.mu[b]
			v += s * s * row.va[b]
		}
		reach = math.Max(reach, math.Abs(shift)+procSigmas*math.Sqrt(v))
	}
	sp := c.Section.Spec
	lo, hi := c.Curve.Range()
	iv, _, err := registration.SpecInterval(c.Coupling, lo, hi, nom, sp.Coupling, sp.Tolerance+reach)
	if err != nil {
		iv = registration.EmptyInterval()
	}
	pr.Domain = iv
	return pr
}

// withSensitivities returns set asking for sensitivities when in has
// process terms.
func withSensitivities(set *Settings, in *Input) *Settings {
	if in.Process.Empty() || (set != nil && set.Sensitivities) {
		return set
	}
	var s Settings
	if set != nil {
		s = *set
	}
	s.Sensitivities = true
	return &s
}

// valueProc is Evaluator.Value with process terms.
func (e *Evaluator) valueProc(q Quantity, row registration.Row, p panel.Vec) float64 {
	st := e.Rel.Stats(row)
	c := e.Curve
	off := c.Section.NominalOffset() + st.MeanAcross
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
	var pr procRow
	e.Proc.row(&pr, p)
	if q >= termDriftBase {
		for b, bd := range e.Proc.Bind {
			if bd.Term == int(q-termDriftBase) {
				return e.termSens(b, off) * pr.mu[b]
			}
		}
		return 0
	}
	switch q {
	case WorstDrift:
		return e.worstDriftProc(off, st.SDAcross, &pr)
	case PInSpec:
		return e.pInSpecProc(off, st.SDAcross, &pr)
	case ProcessDrift:
		return e.mean(off, &pr) - c.Coupling(off)
	case Margin:
		sp := c.Section.Spec
		m := sp.Tolerance - math.Abs(e.mean(off, &pr)-sp.Coupling)
		if !e.Proc.Domain.Contains(off) || m < 0 {
			return -math.Abs(m)
		}
		return m
	}
	return e.mean(off, &pr) - c.Nominal
}

// bindProcess binds the input's process terms to every used section's
// curve (Analysis.proc).
func (a *Analysis) bindProcess() {
	a.proc = nil
	if a.In.Process.Empty() {
		return
	}
	a.proc = make([]*Proc, len(a.Curves))
	pos := make([][]panel.Vec, len(a.Curves))
	for k := range a.Sites {
		si := a.Sites[k].Section
		pos[si] = append(pos[si], a.Sites[k].Site.Pos)
	}
	for i, c := range a.Curves {
		if a.used[i] {
			a.proc[i] = bindProc(a.In.Process, c, pos[i])
		}
	}
}

// procOf returns the process side of section i's evaluator, or nil.
func (a *Analysis) procOf(i int) *Proc {
	if i < len(a.proc) {
		return a.proc[i]
	}
	return nil
}
