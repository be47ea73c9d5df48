package drift

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"sync"

	"gonum.org/v1/gonum/integrate/quad"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
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
// so conditional on δ the coupling has mean and variance
//
//	m(δ) = c(δ) + Σ sᵢ(δ)·μᵢ,  v(δ) = Σ sᵢ(δ)²·σᵢ²
//
// and is normal when every panel part is normal or fixed. A uniform panel
// part (half-width w, variance w²/3 in v) is held as it is distributed:
// the deviation is then a normal part plus boxes, whose CDF has a closed
// form in the repeated integrals of erfc (variation_uniform.go); the
// window, the worst drift (the deviation's 0.135 % points, where a normal
// one's 3σ lie) and the reach of the offset domain (the box edge) read it,
// and a job without uniform panel parts takes the normal path unchanged.
// Beyond maxBoxes uniform parts wide against the normal part, the
// narrowest of them are taken by their variance (measured error below
// 1e-3).
// The offset's own distribution is the registration yield's, uniform terms
// exact (registration.SiteProb: its density PDF, its probability CDF).
//
// Second order. The evaluator adds to this a second-order term along the
// direction of steepest change, fitted per section by direct solves
// (variation_quad.go): m(δ) gains the shift e₀(δ), the linear part's
// standard deviation is κ(δ)·√v(δ), and the coupling gains q(δ)·t², t the
// standardised linear part; conditional on δ it is then m + √v·t + q·t²
// (at), whose window probability windowQuad gives in closed form. Every
// command reads it; a curve without the term (solved by SolveSection
// alone, as some tests do) evaluates the first-order model below.
//
// In spec. A realisation is in spec when its coupling is inside the spec
// window and its offset lies in the section's offset domain: the connected
// interval about the design offset over which the curve stays inside the
// window widened by the largest process reach W of the section's sites
// (|Σ sᵢμᵢ| + 6·√v at the design offset; with uniform parts 6σ of the
// normal part plus each box's half-width). Without process terms W = 0,
// the domain is the allowed interval and the rule is the registration
// rule (Curve.InSpec); with them, a coupling that re-enters the window far
// from the design (through offsets where no process excursion could keep
// it in spec) still counts as out of spec, as before.
//
// P(in spec) = ∫ φ_δ(δ)·[Φ((hi − m)/√v) − Φ((lo − m)/√v)] dδ over the
// domain (first order with normal parts; windowQuadOf with the
// second-order term, and the deviation's own CDF for Φ with uniform
// parts), δ normal
// (its registration mean and standard deviation). The
// integrand steps where m(δ) crosses a spec limit, with a width √v/|m'|
// that is anything from the whole range to nothing; Gauss–Hermite nodes
// spread over the line cannot sit on such a step, so the range mean ± 6σ
// (procRangeSigmas) is split at every
// crossing and each piece integrated by Gauss–Legendre (gonum
// integrate/quad.Legendre): a sharp step then falls on a piece boundary
// and each piece is smooth.
//
// The coupling budget (variation_budget.go) shares variances, where a
// uniform part's w²/3 is exact; only its second-order part, 2q², is the
// normal's Var t² (a uniform part's is smaller).

// procSigmas is how many standard deviations of the process part the
// offset domain allows for (see above); a normal tail beyond 6σ holds
// Φ(−6) = 9.9e-10 (Abramowitz & Stegun 26.2.29).
const procSigmas = 6

// procRangeSigmas is how far the offset integral reaches each side of the
// mean: 2·Φ(−6) = 2.0e-9 of probability is lost (Abramowitz & Stegun
// 26.2.29), below the sixth decimal the yield is written with.
const procRangeSigmas = 6

// procScan is the number of steps mean ± 6σ is scanned in for the spec
// crossings of m(δ); m is a sum of monotone cubics on the curve's 0.5 mil
// grid, so two crossings closer than 12σ/procScan (a site whose σ spans
// many curve points) could be missed: a pair of crossings that close would
// be a re-entry of the window between two curve points.
const procScan = 16

// procMaxCross bounds the spec crossings found per site; a monotone or
// single-peaked curve has at most four within a window's two limits.
const procMaxCross = 8

// procGrade places the extra piece boundaries about a crossing, in widths
// of the window's step √v/|m'|: Φ over [0, 1], [1, 3], [3, 9] and
// beyond (Φ(−9) ≈ 1e-19) is smooth on each piece, so the step is resolved
// whether it is sharp, wide or in between.
var procGrade = [...]float64{1, 3, 9}

// procCrossTol is the width, in scan steps, to which a crossing is
// placed: 1e-7 of a step (below 1e-7 mil), where the P(in spec) error of a
// misplaced sharp step is that width times the offset density.
const procCrossTol = 1e-7

// procCrossIter bounds the iterations of crossing; the Illinois method
// converges superlinearly (order 1.44), so a dozen reach 1e-7 of the step
// from any bracket of a smooth function, and the bisection fallback
// guarantees it.
const procCrossIter = 40

// procNodes is the number of Gauss–Legendre nodes per piece, and
// procPiece the widest piece in standard deviations of the offset. 8 nodes
// integrate a polynomial of degree 15 exactly; on the normal density they
// err by 9e-9 over [0, 4σ] and 1.8e-9 over [2σ, 6σ] (measured against
// erf with gonum's rule), so the three pieces of ±6σ lose about 1e-8 of
// probability, below the sixth decimal the yield is written with; a
// window step inside is cut out by its own pieces.
const (
	procNodes = 8
	procPiece = 4
)

// procMaxPieces bounds the fixed pieces of the offset range (uniform parts
// wider than the normal part spread it beyond ±6σ).
const procMaxPieces = 16

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
	// Domain is the section's offset domain (see the package notes above);
	// Clipped says which of its ends the range of the solved offsets cut.
	Domain  registration.Interval
	Clipped [2]bool

	// tab holds each binding's coupling sensitivity at procTabPerSpan
	// points per interval of the curve's offsets, row i (offset tabLo +
	// i·tabStep) holding every binding: the evaluator reads two rows and
	// interpolates linearly instead of a cubic per parameter.
	tab            []float64
	tabLo, tabStep float64
	tabRows        int
	// second holds per table row e₀, κ and ρ of the curve's second-order
	// term (variation_quad.go); nil for a curve without one, which
	// evaluates first order (e₀ = 0, κ = 1, ρ = 0).
	second []float64
	// wideCum[i] counts the table intervals below i where a uniform part
	// may be wide (boxNormal's corners) at some offset (tabulateWide);
	// nil without uniform parts.
	wideCum []int32
	// boxTab holds X's distribution per table interval where set can be
	// shared between the sites (tabulateBoxes); nil where it cannot.
	boxTab *boxTab
	// means are the parts of the term that follow a site's means
	// (MeanTerm), added to its procRow by row.
	means []MeanTerm
}

// procTabPerSpan is the number of table intervals per interval of the
// curve's solved offsets. Linear interpolation errs by h²/8·|s″|: on the
// 0.5 mil grid of section.DefaultOffsets h is 0.0078 mil, and a
// sensitivity curve that changes by its own size over 1 mil errs by
// 8e-6 of itself; at the solved offsets the table is the curve.
const procTabPerSpan = 64

// tabulate fills the table of pr from curve c (every binding's exact
// sensitivity, section.Curve.CouplingSensitivity, summed over its
// parameters).
func (pr *Proc) tabulate(c *Curve) {
	lo, hi := c.Curve.Range()
	n := procTabPerSpan * max(1, len(c.Curve.Points)-1)
	nb := len(pr.Bind)
	pr.tabLo, pr.tabStep, pr.tabRows = lo, (hi-lo)/float64(n), n+1
	pr.tab = make([]float64, (n+1)*nb)
	for i := 0; i <= n; i++ {
		off := lo + float64(i)*pr.tabStep
		if i == n {
			off = hi
		}
		for b, bd := range pr.Bind {
			var v float64
			for _, k := range bd.Params {
				v += c.Curve.CouplingSensitivity(k, off)
			}
			pr.tab[i*nb+b] = v
		}
	}
	if so := c.Second; so != nil {
		pr.means = so.Means
		pr.second = make([]float64, 3*(n+1))
		for i := 0; i <= n; i++ {
			off := lo + float64(i)*pr.tabStep
			if i == n {
				off = hi
			}
			pr.second[3*i], pr.second[3*i+1], pr.second[3*i+2] = so.at(off)
		}
	}
}

// secondAt returns e₀, κ and ρ at offset off from the table (rows' index
// and weight) for a site whose own part is ss; 0, 1, 0 without a
// second-order term.
func (pr *Proc) secondAt(off float64, ss siteSecond) (e0, kappa, rho float64) {
	if pr.second == nil {
		return 0, 1, 0
	}
	i, f := pr.rowAt(off)
	return pr.secondRow(i, f, ss)
}

// rows returns the two table rows about off and the weight of the second,
// clamped to the table (the sensitivities are clamped to the curve's
// range, as CouplingSensitivity's).
func (pr *Proc) rows(off float64) (r0, r1 []float64, f float64) {
	r0, r1, _, f = pr.rowsAt(off)
	return r0, r1, f
}

// rowsAt is rows with the index of the first row.
func (pr *Proc) rowsAt(off float64) (r0, r1 []float64, i int, f float64) {
	nb := len(pr.Bind)
	if pr.tabRows < 2 {
		return pr.tab[:nb], pr.tab[:nb], 0, 0
	}
	i, f = pr.rowAt(off)
	return pr.tab[i*nb : i*nb+nb], pr.tab[(i+1)*nb : (i+1)*nb+nb], i, f
}

// secondRow returns e₀, κ and ρ between table rows i and i + 1 at weight
// f (rowsAt), for a site whose own part (its MeanTerms) is ss; 0, 1, 0
// without a second-order term.
func (pr *Proc) secondRow(i int, f float64, ss siteSecond) (e0, kappa, rho float64) {
	if pr.second == nil {
		return 0, 1, 0
	}
	j := min(i+1, pr.tabRows-1)
	r0, r1 := pr.second[3*i:3*i+3], pr.second[3*j:3*j+3]
	return r0[0] + f*(r1[0]-r0[0]) + ss.e0, r0[1] + f*(r1[1]-r0[1]) + ss.kappa, r0[2] + f*(r1[2]-r0[2]) + ss.rho
}

// rowAt returns the index of the table row at or below off and the weight
// of the next, clamped to the table.
func (pr *Proc) rowAt(off float64) (i int, f float64) {
	if pr.tabRows < 2 {
		return 0, 0
	}
	x := (off - pr.tabLo) / pr.tabStep
	switch {
	case !(x > 0):
	case x >= float64(pr.tabRows-1):
		i, f = pr.tabRows-2, 1
	default:
		i = int(x)
		f = x - float64(i)
	}
	return i, f
}

// maxStackTerms is the number of bound terms a site is evaluated with on
// the stack; more take one allocation per evaluation.
const maxStackTerms = 24

// procRow is a site's process terms: per binding its mean, variance and
// the half-width of its uniform panel part (0 for a normal or fixed one),
// held in the row itself up to maxStackTerms bindings (so that a row on
// the stack does not escape), on the heap beyond; boxes counts the
// bindings with a uniform part.
type procRow struct {
	n            int
	mu, va, w    [maxStackTerms]float64
	muH, vaH, wH []float64
	boxes        int
	// second is the site's part of the second-order term (MeanTerm).
	second siteSecond
}

// means and vars return the row's means and variances per binding.
func (r *procRow) means() []float64 {
	if r.muH != nil {
		return r.muH
	}
	return r.mu[:r.n]
}

func (r *procRow) vars() []float64 {
	if r.vaH != nil {
		return r.vaH
	}
	return r.va[:r.n]
}

// halfWidths returns the row's uniform half-widths per binding.
func (r *procRow) halfWidths() []float64 {
	if r.wH != nil {
		return r.wH
	}
	return r.w[:r.n]
}

// extreme returns how far binding b's deviation reaches at z standard
// deviations: z·σ, a uniform panel part of half-width w counted to its box
// edge instead (z·σₙ + w, σₙ the normal parts' standard deviation), since
// a box holds nothing beyond its edge.
func (r *procRow) extreme(b int, z float64) float64 {
	va, w := r.vars()[b], r.halfWidths()[b]
	if w == 0 {
		return z * math.Sqrt(va)
	}
	return z*math.Sqrt(math.Max(0, va-w*w/3)) + w
}

// row fills r with the process terms of a site at p.
func (pr *Proc) row(r *procRow, p panel.Vec) {
	n := len(pr.Bind)
	r.n, r.muH, r.vaH, r.wH, r.boxes = n, nil, nil, nil, 0
	if n > maxStackTerms {
		r.muH, r.vaH, r.wH = make([]float64, n), make([]float64, n), make([]float64, n)
	}
	mu, va, w := r.means(), r.vars(), r.halfWidths()
	for b, bd := range pr.Bind {
		t := &pr.Model.Terms[bd.Term]
		mu[b] = t.Mean(p, pr.Model.Size)
		va[b] = t.Variance()
		w[b] = 0
		if t.Panel.Dist == registration.Uniform && t.Panel.Spread > 0 {
			w[b] = t.Panel.Spread
			r.boxes++
		}
	}
	r.second = siteSecond{}
	for i := range pr.means {
		mt := &pr.means[i]
		e0, kappa, rho := mt.at(mu[mt.Bind])
		r.second.e0 += e0
		r.second.kappa += kappa
		r.second.rho += rho
	}
}

// termSens returns binding b's coupling sensitivity at offset off: the sum
// over its parameters (a mask coat moves two), from the table.
func (e *Evaluator) termSens(b int, off float64) float64 {
	r0, r1, f := e.Proc.rows(off)
	return r0[b] + f*(r1[b]-r0[b])
}

// at returns, at offset off for process row r, the coupling at the site's
// mean parameters m(δ) = c + Σ sᵢμᵢ + e₀, the variance v = κ²·Σ sᵢ²σᵢ²
// of its linear part s·t and its curvature q = ρ·Σ sᵢ²σᵢ²: conditional
// on δ the coupling is m + √v·t + q·t², t standard normal
// (variation_quad.go), of mean m + q and variance v + 2q².
func (e *Evaluator) at(off float64, r *procRow) (m, v, q float64) {
	r0, r1, i, f := e.Proc.rowsAt(off)
	m, v = linearPart(e.Curve.Coupling(off), r0, r1, f, r)
	return e.withSecond(m, v, i, f, r)
}

// withSecond returns the first-order m and v between table rows i and
// i + 1 at weight f with the second-order term of the site of row r:
// m + e₀, κ²·v and q = ρ·v (m, v and 0 without a term).
func (e *Evaluator) withSecond(m, v float64, i int, f float64, r *procRow) (float64, float64, float64) {
	if e.Proc.second == nil {
		return m, v, 0
	}
	e0, kappa, rho := e.Proc.secondRow(i, f, r.second)
	return m + e0, kappa * kappa * v, rho * v
}

// linearPart returns m plus the row's Σ sᵢμᵢ and its variance Σ sᵢ²σᵢ²,
// the sensitivities at weight f between table rows r0 and r1.
func linearPart(m float64, r0, r1 []float64, f float64, r *procRow) (float64, float64) {
	mus, va := r.means(), r.vars()
	r0, r1, va = r0[:len(mus)], r1[:len(mus)], va[:len(mus)]
	var v float64
	for b, mu := range mus {
		s := r0[b] + f*(r1[b]-r0[b])
		m += s * mu
		v += s * s * va[b]
	}
	return m, v
}

// atBoxes is at for a row with uniform parts (r.boxes > 0): it fills d
// with the distribution of X = L/√v₁, L the first-order deviation and
// v₁ = Σ sᵢ²σᵢ² its variance (variation_uniform.go); conditional on δ the
// coupling is m + √v·X + q·X².
func (e *Evaluator) atBoxes(off float64, r *procRow, d *boxNormal) (m, v, q float64) {
	return e.atBoxesOf(off, r, d, true)
}

// atBoxesOf is atBoxes; without series d holds only the split of the boxes
// (boxNormal.setOf).
func (e *Evaluator) atBoxesOf(off float64, r *procRow, d *boxNormal, series bool) (m, v, q float64) {
	m = e.Curve.Coupling(off)
	r0, r1, i, f := e.Proc.rowsAt(off)
	if series && e.Proc.boxTab.has(i) {
		// The distribution from the section's table (tabulateBoxes).
		m, v = linearPart(m, r0, r1, f, r)
		e.Proc.boxTab.fill(i, f, d)
	} else {
		m, v = setBoxes(m, r0, r1, f, r, d, series)
	}
	return e.withSecond(m, v, i, f, r)
}

// setBoxes returns m plus the row's Σ sᵢμᵢ and its variance Σ sᵢ²σᵢ² at
// weight f between table rows r0 and r1, and sets d by boxNormal.setOf.
func setBoxes(m float64, r0, r1 []float64, f float64, r *procRow, d *boxNormal, series bool) (float64, float64) {
	mus, va, ws := r.means(), r.vars(), r.halfWidths()
	r0, r1, va, ws = r0[:len(mus)], r1[:len(mus)], va[:len(mus)], ws[:len(mus)]
	var buf [maxStackTerms]float64
	a := buf[:0]
	var v, vn float64
	for b, mu := range mus {
		s := r0[b] + f*(r1[b]-r0[b])
		m += s * mu
		v += s * s * va[b]
		if w := ws[b]; w > 0 {
			vn += s * s * (va[b] - w*w/3)
			a = append(a, math.Abs(s)*w)
		} else {
			vn += s * s * va[b]
		}
	}
	if v > 0 {
		d.setOf(vn, a, v, series)
	} else {
		*d = boxNormal{sd: 1, sd0: 1}
	}
	return m, v
}

// meanCoupling returns the conditional mean m(δ) + q(δ) of the coupling.
func (e *Evaluator) meanCoupling(off float64, r *procRow) float64 {
	m, _, q := e.at(off, r)
	return m + q
}

// mean returns m(δ) only: the coupling at the site's mean parameters.
func (e *Evaluator) mean(off float64, r *procRow) float64 {
	m := e.Curve.Coupling(off)
	r0, r1, i, f := e.Proc.rowsAt(off)
	mus := r.means()
	r0, r1 = r0[:len(mus)], r1[:len(mus)]
	for b, mu := range mus {
		m += (r0[b] + f*(r1[b]-r0[b])) * mu
	}
	if sec := e.Proc.second; sec != nil {
		j := min(i+1, e.Proc.tabRows-1)
		m += sec[3*i] + f*(sec[3*j]-sec[3*i]) + r.second.e0
	}
	return m
}

// windowOf returns P(lo ≤ m + √v·X ≤ hi) for X distributed as d (nil:
// standard normal).
func windowOf(d *boxNormal, m, v, lo, hi float64) float64 {
	if v <= 0 {
		if m >= lo && m <= hi {
			return 1
		}
		return 0
	}
	s := math.Sqrt(v)
	return math.Max(0, d.cdf((hi-m)/s)-d.cdf((lo-m)/s))
}

// windowFar is where Φ(x) rounds to 1 in float64: 1 − Φ(8.3) = 5.2e-17 <
// 2⁻⁵³ (Abramowitz & Stegun 26.2.29), so a limit that far is skipped.
const windowFar = 8.3

// normCDF is Φ, 0 or 1 beyond windowFar.
func normCDF(x float64) float64 {
	switch {
	case x <= -windowFar:
		return 0
	case x >= windowFar:
		return 1
	}
	return registration.NormalCDF(x)
}

// windowAt returns the window probability at offset off: with uniform
// parts in the row, of the coupling m + √v·X + q·X² with X as distributed
// (atBoxes); without, X standard normal.
func (e *Evaluator) windowAt(off float64, pr *procRow, lo, hi float64) float64 {
	if pr.boxes == 0 {
		m, v, q := e.at(off, pr)
		return windowQuad(m, math.Sqrt(v), q, lo, hi)
	}
	var d boxNormal
	m, v, q := e.atBoxes(off, pr, &d)
	return windowQuadOf(&d, m, math.Sqrt(v), q, lo, hi)
}

// procSure is how close to 1 (or 0) the window probability must be at both
// ends and the middle of a piece for the piece to count as wholly in (or
// out of) spec. No crossing of a spec limit lies inside a piece, so the
// window is monotone in m there; the error is below procSure times the
// piece's probability.
const procSure = 1e-12

// hasProc reports whether the evaluator has process terms bound.
func (e *Evaluator) hasProc() bool { return e.Proc != nil && len(e.Proc.Bind) > 0 }

// evalProc fills the coupling quantities of r (whose statistics and mean
// offset are set) with the process terms of row pr.
func (e *Evaluator) evalProc(r *Eval, pr *procRow) {
	c := e.Curve
	sp := c.Section.Spec
	sd := r.Stats.SDAcross
	m0, v, q := e.at(r.Offset, pr)
	m := m0 + q // the mean coupling
	creg := c.Coupling(r.Offset)
	r.Coupling = m
	r.Drift = m - c.Nominal
	r.DriftRegistration = creg - c.Nominal
	r.DriftProcess = m - creg
	_, sq := e.squareVar(r.Offset, pr) // 2 unless a panel part is uniform
	r.ProcessSD = math.Sqrt(v + sq*q*q)
	r.TermDrifts = make([]float64, len(e.Proc.Model.Terms))
	var sum float64
	for b, bd := range e.Proc.Bind {
		r.TermDrifts[bd.Term] = e.termSens(b, r.Offset) * pr.means()[b]
		sum += r.TermDrifts[bd.Term]
	}
	r.DriftSecondOrder = r.DriftProcess - sum
	r.InSpec = e.Proc.Domain.Contains(r.Offset) && math.Abs(m-sp.Coupling) <= sp.Tolerance
	r.Margin = sp.Tolerance - math.Abs(m-sp.Coupling)
	if !r.InSpec {
		r.Margin = -math.Abs(r.Margin)
	}
	r.CouplingLo = e.meanCoupling(r.Offset-3*sd, pr)
	r.CouplingHi = e.meanCoupling(r.Offset+3*sd, pr)
	r.WorstDrift = e.worstDriftProc(r.Offset, sd, pr)
	r.PInSpec = e.pInSpecProc(e.Rel.Prob(&r.Row, c.Section.NominalOffset()), pr)
}

// worstDriftProc is worstDrift with the process terms: the largest
// |m(δ) + √v(δ)·t + q(δ)·t² − nominal| over |t| ≤ 3 and the offsets
// within mean ± 3σ. With uniform parts t ranges over |t| ≤ z, z the point
// the deviation passes with the probability of a normal one's 3σ,
// Φ(−3) = 0.135 % each side (boxNormal.quantileSigmas): a uniform alone
// reaches 0.9973 of its half-width, a normal part its 3σ.
func (e *Evaluator) worstDriftProc(mean, sd float64, pr *procRow) float64 {
	lo, hi := mean-3*sd, mean+3*sd
	worst := 0.0
	z, cf0 := 3.0, 3.0
	for k := 0; k <= worstDriftSamples; k++ {
		off := lo + (hi-lo)*float64(k)/worstDriftSamples
		var m, v, q float64
		if pr.boxes == 0 {
			m, v, q = e.at(off, pr)
		} else {
			// The point starts where the last offset's lay, moved as
			// its Cornish–Fisher expansion moved (at the first, that
			// expansion): Newton then settles it in a step or two.
			var d boxNormal
			m, v, q = e.atBoxes(off, pr, &d)
			cf := d.cornishFisher(3)
			if k == 0 {
				z = cf
			} else {
				z += cf - cf0
			}
			z, cf0 = d.quantileSigmas(3, z), cf
		}
		cl, ch := quadExtremes(m, math.Sqrt(v), q, z)
		for _, d := range [2]float64{cl - e.Curve.Nominal, ch - e.Curve.Nominal} {
			if math.Abs(d) > math.Abs(worst) {
				worst = d
			}
		}
	}
	return worst
}

// pInSpecProc returns P(in spec) of a site whose offset is distributed as
// op (a normal part and up to two uniform parts, exactly as in the
// registration yield), with process row pr (see the package notes above).
func (e *Evaluator) pInSpecProc(op registration.SiteProb, pr *procRow) float64 {
	sp := e.Curve.Section.Spec
	lo, hi := sp.Coupling-sp.Tolerance, sp.Coupling+sp.Tolerance
	dom := e.Proc.Domain
	mu, sd := op.Mean, op.SD
	boxes := op.Uniform + op.Uniform2
	if sd == 0 && boxes == 0 {
		if !dom.Contains(mu) {
			return 0
		}
		return e.windowAt(mu, pr, lo, hi)
	}
	reach := procRangeSigmas*sd + boxes
	a, b := math.Max(mu-reach, dom.Lo), math.Min(mu+reach, dom.Hi)
	if !(a < b) {
		return 0
	}
	// Pieces split at the crossings of m(δ) with lo and hi, graded about
	// each crossing, and at the edges of the uniform parts' boxes, graded
	// when the normal part rounds them over less than the box.
	var cuts [2*procMaxCross*(1+2*len(procGrade)) + 4*(1+2*len(procGrade)) + procMaxPieces + 1]float64
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
			xc := crossing(x0, x1, pair[0], pair[1], (x1-x0)*procCrossTol, func(x float64) float64 {
				gl, gh := g(x)
				if lim == 1 {
					return gh
				}
				return gl
			})
			add(xc)
			// The window steps over a width √(v + 2q²)/|m'| about xc
			// (the conditional standard deviation; the step's centre
			// is within |q|/|m'| of xc).
			_, v, q := e.at(xc, pr)
			v += 2 * q * q
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
	if pr.boxes > 0 && e.Proc.mayBeWide(a, b) {
		e.boxCuts(a, b, pr, lo, hi, add)
	}
	// Pieces of at most procPiece standard deviations of the offset's
	// normal part, about the mean and about each box edge.
	var kinks [4]float64
	ks := op.Kinks(kinks[:0])
	if sd > 0 {
		// At most procMaxPieces of them over the range: where boxes make
		// it wide the density is flat in their middle.
		step := math.Max(procPiece*sd, (b-a)/procMaxPieces)
		for x := mu - step*math.Floor((mu-a)/step); x < b; x += step {
			add(x)
		}
	}
	for _, k := range ks {
		add(k)
		if sd > 0 && sd < op.Uniform {
			for _, f := range procGrade {
				add(k - f*sd)
				add(k + f*sd)
			}
		}
	}
	slices.Sort(cuts[:nc])
	xs, ws := legendre()
	norm := 1 / (sd * math.Sqrt(2*math.Pi)) // used without boxes, where sd > 0
	var p float64
	left := a
	wl := e.windowAt(left, pr, lo, hi)
	for i := 0; i <= nc; i++ {
		right := b
		if i < nc {
			right = cuts[i]
		}
		if !(right > left) {
			continue
		}
		wr := e.windowAt(right, pr, lo, hi)
		h, c := (right-left)/2, (right+left)/2
		wm := e.windowAt(c, pr, lo, hi)
		switch {
		case wl >= 1-procSure && wr >= 1-procSure && wm >= 1-procSure:
			// In spec throughout: the piece's probability.
			p += op.CDF(right) - op.CDF(left)
		case wl <= procSure && wr <= procSure && wm <= procSure:
			// Out of spec throughout.
		case len(ks) == 0:
			for k := range xs {
				x := c + h*xs[k]
				z := (x - mu) / sd
				p += h * ws[k] * norm * math.Exp(-0.5*z*z) * e.windowAt(x, pr, lo, hi)
			}
		default:
			for k := range xs {
				x := c + h*xs[k]
				p += h * ws[k] * op.PDF(x) * e.windowAt(x, pr, lo, hi)
			}
		}
		left, wl = right, wr
	}
	return math.Min(1, math.Max(0, p))
}

// boxCuts adds the cuts about the kinks that wide uniform parts put in
// the window over [a, b]: where an edge of the coupling's box,
// m(δ) ± √v·A + q·A² at X = ±A, A = Σ aⱼ over boxNormal's wide boxes,
// meets a limit, found as the
// crossings of m(δ) as in pInSpecProc, and graded by the normal part's
// width in δ when it rounds the kink over less than the box.
func (e *Evaluator) boxCuts(a, b float64, pr *procRow, lo, hi float64, add func(float64)) {
	// edge returns the four edges' distances to the limits at x and the
	// normal part's width in coupling.
	edge := func(x float64) (f [4]float64, r, sdc float64) {
		var d boxNormal
		m, v, q := e.atBoxesOf(x, pr, &d, false)
		var ax float64
		for _, w := range d.a[:d.n] {
			ax += w
		}
		r = math.Sqrt(v) * ax
		m += q * ax * ax // the coupling at X = ±Σ aⱼ is m ± r + q·(Σ aⱼ)²
		return [4]float64{m + r - lo, m - r - lo, m + r - hi, m - r - hi}, r, math.Sqrt(v) * d.sd
	}
	x0 := a
	f0, _, _ := edge(x0)
	cross := 0
	for k := 1; k <= procScan; k++ {
		x1 := a + (b-a)*float64(k)/procScan
		f1, r1, _ := edge(x1)
		for j := range f1 {
			if f0[j]*f1[j] >= 0 || r1 == 0 || cross == procMaxCross {
				continue
			}
			cross++
			xc := crossing(x0, x1, f0[j], f1[j], (x1-x0)*procCrossTol, func(x float64) float64 {
				f, _, _ := edge(x)
				return f[j]
			})
			add(xc)
			_, r, sdc := edge(xc)
			slope := math.Abs(f1[j]-f0[j]) / (x1 - x0)
			if sdc < r && slope > 0 {
				for _, g := range procGrade {
					add(xc - g*sdc/slope)
					add(xc + g*sdc/slope)
				}
			}
		}
		x0, f0 = x1, f1
	}
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
	pr.tabulate(c)
	pr.tabulateWide()
	if boxTabPays(len(positions), pr.tabRows) {
		pr.tabulateBoxes()
	}
	sp := c.Section.Spec
	nom := c.Section.NominalOffset()
	lo, hi := c.Curve.Range()
	iv, lim, err := registration.SpecInterval(c.Coupling, lo, hi, nom, sp.Coupling, sp.Tolerance+pr.reach(c, positions))
	if err != nil {
		iv = registration.EmptyInterval()
	}
	pr.Domain, pr.Clipped = iv, lim.Clipped
	return pr
}

// reach returns the largest process reach W of the sites at positions on
// curve c (tabulated in pr): the farthest the coupling at the design offset
// moves from the curve's, |Σ sᵢμᵢ + e₀ + q·t² + √v·t| over |t| ≤ procSigmas
// (quadExtremes), a uniform part reaching its box edge (boxNormal.reach). The offset domain is the allowed interval of the spec
// window widened by it, and SolveCurves solves far enough to hold that
// domain: one rule for both.
func (pr *Proc) reach(c *Curve, positions []panel.Vec) float64 {
	e := Evaluator{Curve: c, Proc: pr}
	nom := c.Section.NominalOffset()
	cn := c.Coupling(nom)
	var w float64
	var row procRow
	for _, p := range positions {
		pr.row(&row, p)
		m, v, q := e.at(nom, &row)
		z := float64(procSigmas)
		if row.boxes > 0 {
			// A uniform part reaches its box edge, not 6σ.
			var d boxNormal
			m, v, q = e.atBoxes(nom, &row, &d)
			z = d.reach(procSigmas)
		}
		xl, xh := quadExtremes(m-cn, math.Sqrt(v), q, z)
		w = math.Max(w, math.Max(math.Abs(xl), math.Abs(xh)))
	}
	return w
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

// valueProc is Evaluator.Value with process terms, for the quantities that
// depend on them; st and off are row's offset statistics and mean offset.
func (e *Evaluator) valueProc(q Quantity, row *registration.Row, st registration.Stats, off float64, p panel.Vec) float64 {
	c := e.Curve
	var pr procRow
	e.Proc.row(&pr, p)
	if q >= termDriftBase {
		for b, bd := range e.Proc.Bind {
			if bd.Term == int(q-termDriftBase) {
				return e.termSens(b, off) * pr.means()[b]
			}
		}
		return 0
	}
	switch q {
	case WorstDrift:
		return e.worstDriftProc(off, st.SDAcross, &pr)
	case PInSpec:
		return e.pInSpecProc(e.Rel.Prob(row, c.Section.NominalOffset()), &pr)
	case ProcessDrift:
		return e.meanCoupling(off, &pr) - c.Coupling(off)
	case Margin:
		sp := c.Section.Spec
		m := sp.Tolerance - math.Abs(e.meanCoupling(off, &pr)-sp.Coupling)
		if !e.Proc.Domain.Contains(off) || m < 0 {
			return -math.Abs(m)
		}
		return m
	}
	return e.meanCoupling(off, &pr) - c.Nominal
}

// bindProcess binds the input's process terms to every used section's
// curve (Analysis.proc).
func (a *Analysis) bindProcess() {
	a.proc = nil
	a.Yield.Check = nil
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
	if pc := newProcCheck(a); pc != nil {
		a.Yield.Check = pc
	}
}

// procOf returns the process side of section i's evaluator, or nil.
func (a *Analysis) procOf(i int) *Proc {
	if i < len(a.proc) {
		return a.proc[i]
	}
	return nil
}

// DriftSources is a site's drift split by source, in the map summary.
type DriftSources struct {
	RegistrationDB float64 `json:"registration_db"`
	VariationDB    float64 `json:"variation_db"`
	// VariationSDDB is the standard deviation of the coupling the process
	// terms cause at the mean offset.
	VariationSDDB float64 `json:"variation_sd_db"`
	// Terms is each process term's part of VariationDB, by name, in the
	// order of the job.
	Terms []TermDriftDB `json:"terms"`
	// SecondOrderDB is the rest of VariationDB: the second-order term's
	// (variation_quad.go).
	SecondOrderDB float64 `json:"second_order_db"`
}

// TermDriftDB is one process term's drift at a site.
type TermDriftDB struct {
	Name    string  `json:"name"`
	DriftDB float64 `json:"drift_db"`
}

// splitWorst fills w.DriftSources from the evaluated site r when the input
// has process terms.
func (a *Analysis) splitWorst(w *WorstSite, r *Site) {
	if a.In.Process.Empty() {
		return
	}
	ds := &DriftSources{RegistrationDB: r.DriftRegistration, VariationDB: r.DriftProcess, VariationSDDB: r.ProcessSD, SecondOrderDB: r.DriftSecondOrder}
	for i, t := range a.In.Process.Terms {
		ds.Terms = append(ds.Terms, TermDriftDB{Name: t.Name, DriftDB: r.Value(TermDrift(i))})
	}
	w.DriftSources = ds
}

// processHeader returns the columns sites.csv adds with process terms: the
// drift from registration, from the variation terms and the latter's
// standard deviation, the second-order term's part of the variation drift,
// and one drift column per term (with the second-order part they sum to
// the variation drift).
func (a *Analysis) processHeader() []string {
	if a.In.Process.Empty() {
		return nil
	}
	h := []string{"drift_registration [dB]", "drift_variation [dB]", "sd_variation [dB]", "drift_second_order [dB]"}
	for _, t := range a.In.Process.Terms {
		h = append(h, "drift "+t.Name+" [dB]")
	}
	return h
}

// processColumns appends site i's process columns (processHeader) to rec.
func (a *Analysis) processColumns(rec []string, i int) []string {
	if a.In.Process.Empty() {
		return rec
	}
	r := &a.Sites[i]
	rec = append(rec, fixed(r.DriftRegistration, 4), fixed(r.DriftProcess, 4), fixed(r.ProcessSD, 4), fixed(r.DriftSecondOrder, 4))
	terms := r.TermDrifts
	if terms == nil { // a section no term moves
		terms = make([]float64, len(a.In.Process.Terms))
	}
	for _, d := range terms {
		rec = append(rec, fixed(d, 4))
	}
	return rec
}

// boundTerms reports, per process term of the input, whether it moves
// something of a section the analysis uses; nil without process terms.
func (a *Analysis) boundTerms() []bool {
	if a.proc == nil {
		return nil
	}
	bound := make([]bool, len(a.In.Process.Terms))
	for _, pr := range a.proc {
		if pr != nil {
			for _, bd := range pr.Bind {
				bound[bd.Term] = true
			}
		}
	}
	return bound
}

// activeTerms returns how many process terms move something of a section
// the analysis uses.
func (a *Analysis) activeTerms() int {
	n := 0
	for _, ok := range a.boundTerms() {
		if ok {
			n++
		}
	}
	return n
}

// processWarnings names the variation terms of the job file that move no
// parameter of any section used, counts those of each included file in one
// line (a fab's shared process file describes layers and quantities that
// most jobs lack), and says, per section with process terms, when the end of
// the solved offsets cuts its offset domain within procRangeSigmas of some
// site: offsets beyond count as out of spec, though a process excursion
// could keep the coupling in spec there.
func (a *Analysis) processWarnings() []string {
	var out []string
	if bound := a.boundTerms(); bound != nil {
		var idle []string
		var files []string           // the included files with idle terms, in the job's order
		count := map[string][2]int{} // per included file: idle terms, terms
		for t, ok := range bound {
			term := &a.In.Process.Terms[t]
			if term.File == "" {
				if !ok {
					idle = append(idle, fmt.Sprintf("%q on %s", term.Name, term.On))
				}
				continue
			}
			n := count[term.File]
			if !ok {
				if n[0] == 0 {
					files = append(files, term.File)
				}
				n[0]++
			}
			n[1]++
			count[term.File] = n
		}
		switch len(idle) {
		case 0:
		case 1:
			out = append(out, fmt.Sprintf("variation term %s moves nothing of any section used (its layer is outside every section's field, or it is a quantity the sections lack)", idle[0]))
		default:
			out = append(out, fmt.Sprintf("%d variation terms move nothing of any section used (their layers are outside every section's field, or they are quantities the sections lack): %s", len(idle), strings.Join(idle, ", ")))
		}
		for _, f := range files {
			n := count[f]
			out = append(out, fmt.Sprintf("%d of the %d variation terms of the included file %s move nothing of any section used", n[0], n[1], f))
		}
	}
	for i, pr := range a.proc {
		// Cut only where SolveCurves's doubling stopped short (MaxDoublings)
		// or a caller solved the curve otherwise.
		if pr != nil && a.domainCut(i, pr) {
			out = append(out, fmt.Sprintf("section %q: with the variation terms the coupling can still be in spec at the end of the solved offsets (%.3f to %.3f mil), within %d sigma of some sites; offsets beyond count as out of spec",
				a.In.Sections[i].Name, pr.Domain.Lo/unit.Mil, pr.Domain.Hi/unit.Mil, procRangeSigmas))
		}
	}
	return out
}

// crossing returns the root of f in [a, b], f(a) = fa and f(b) = fb of
// opposite signs, to within tol: the Illinois variant of regula falsi
// (Dowell & Jarratt 1971, BIT 11, 168–174), which halves the retained end's
// value when the same end is kept twice; every third step (and any
// false-position point outside the bracket) bisects, so the bracket
// shrinks at least as 2^(−k/3) whatever f does.
func crossing(a, b, fa, fb, tol float64, f func(float64) float64) float64 {
	side := 0
	for it := 0; it < procCrossIter && math.Abs(b-a) > tol; it++ {
		c := b - fb*(b-a)/(fb-fa)
		if it%3 == 2 || !(c > math.Min(a, b) && c < math.Max(a, b)) {
			c = 0.5 * (a + b) // keep the bracket shrinking
		}
		fc := f(c)
		switch {
		case fc == 0:
			return c
		case fc*fb < 0:
			a, fa = b, fb
			side = 0
		default:
			if side == 1 {
				fa /= 2
			}
			side = 1
		}
		b, fb = c, fc
	}
	return 0.5 * (a + b)
}
