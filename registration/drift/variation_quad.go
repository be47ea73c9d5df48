package drift

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration/process"
)

// The second-order term of the process model.
//
// The first-order model c(δ) + Σ sᵢ(δ)·Δpᵢ is the tangent plane at the
// nominal section. Measured on the topology samples (CheckLinearity at the
// combined ±3σ corners) it errs by up to 0.18 dB on the edge-coupled
// microstrip under mask, always in the same direction: the coupling is
// curved in the process terms, and the sensitivities at the nominal
// section are not the slopes at the sites' mean parameters. The issue
// allowed direct solves per site or a second-order term; direct solves
// per site (10,000 sites, each at many offsets) are out of reach of the
// map's 1 s, so the evaluator carries a second-order term, fitted by
// direct solves once per section.
//
// In standardised coordinates zᵢ = (Δpᵢ − μᵢ)/σᵢ the first-order process
// part is L = Σ sᵢσᵢzᵢ = aᵀz: all of its variance lies along u = a/|a|,
// the direction of steepest change, and L = |a|·t with t = uᵀz standard
// normal. A full second-order model needs the Hessian (n² direct solves
// per offset); the rank-one model keeps its part along u only, which is
// where the coupling moves. Along u the coupling is fitted by the parabola
// through three direct solves, at t = −3, 0 and +3 (secondT) about the
// mean parameters μ̄ of the section's sites, Δpᵢ = μ̄ᵢ + t·σᵢ·uᵢ, the
// coupled length held fixed as the sensitivities hold it:
//
//	C(δ, t) = C₀(δ) + b(δ)·t + q(δ)·t²,
//
// C₀ the direct solve at μ̄, b = (C₊ − C₋)/6, q = (C₊ + C₋ − 2C₀)/18. The
// parabola goes through the solves exactly; a term of third order that
// remains errs by r·(t³ − 9t), largest at |t| = √3 (10.4·r, a third of its
// size at ±3). Per site, with L = Σ sᵢ(δ)·(Δpᵢ − μᵢ(site)) the
// first-order deviation from the site's own means,
//
//	C = c(δ) + Σ sᵢμᵢ + e₀(δ) + κ(δ)·L + ρ(δ)·L²,
//
// e₀ = C₀ − (c + Σ sᵢμ̄ᵢ) the shift of the mean parameters' coupling that
// the tangent misses, κ = b/|a| the slope along u against the tangent's,
// ρ = q/|a|². The three are fitted at secondNodes offsets across the
// offsets the sites reach and interpolated in δ (secondInterp). Written
// this way they do not depend on the σ: a model with every σ scaled by k
// (tol's allocation) moves along the same direction with k·t, and the
// parabola gives it b·k and q·k² exactly. A model with other σ ratios
// takes κ and ρ of the fitted direction; no command makes one.
//
// Conditional on δ, with the process terms normal (t standard normal),
// P(lo ≤ m + s·t + q·t² ≤ hi), m = c + Σ sᵢμᵢ + e₀, s = κ·|a|, q = ρ·|a|²,
// is a difference of normal probabilities at the roots of the two
// quadratics (windowQuad); it replaces the normal window of the first-order
// model, and the offset integral is as before. The coupling's conditional
// mean gains q (E t² = 1) and its variance is s² + 2q² (E t³ = 0,
// Var t² = 2); the map's drift is that mean, and the budget's law of total
// variance takes both.
//
// Each site adds to e₀, κ and ρ the parts that follow its own means
// (MeanTerm, below): the parabola is fitted at μ̄, and a shaped term puts
// the sites of a dome's centre or a panel edge far from it.
//
// The rank-one term takes the curvature across u by its mean only
// (SecondOrder.Across, half the Hessian's trace across u: −0.0035 dB at the
// two-core sample's worst site). The rest shows at CheckLinearity's
// corners, where every term sits at 3σ at once (3·√n standard deviations
// from the mean, 4.7 of them across u on the two-core sample): there that
// site errs by 0.057 dB, 0.003 dB along u and 0.059 dB across it, the mixed
// curvature between the press dome, the core thicknesses and the two
// traces' etch. Over the process's own distribution it is small: over
// random draws of every term the model errs by 0.007 dB rms there and by
// 0.018 dB rms on the microstrip sample, where first order errs by 0.037
// (TestSecondOrderDraws), 3 and 5 % of the 0.26 and 0.37 dB (1σ) the
// process spreads the coupling by at those sites. The check reports the
// two parts (LinearCheck.AlongDB).
//
// The term is used whenever process terms are present, for every site of
// every command: map, yield, tol, comp and report read one evaluator, and
// Monte Carlo draws L and adds the same curvature, so no two of them can
// disagree about a site. It costs 3·secondNodes direct solves per section
// (3 where the offset does not vary), cached like every curve. Without
// process terms nothing changes: registration alone is untouched.

// secondT is the excursion of the fit along u, in standard deviations: the
// window edges that decide a yield lie within it, and CheckLinearity's
// combined extremes start there.
const secondT = LinearSigmas

// secondNodes is the number of offsets the second-order term is fitted at
// across the offsets the sites reach (mean ± procRangeSigmas of every
// site). Measured on a broadside pair whose offset spreads over ±6 mil
// (TestSecondOrderNodes): e₀, κ and ρ interpolated from 5 nodes, 3 mil
// apart, agree with a fit at the midpoints between them to 0.0011 dB of
// coupling at 3σ, below the 0.002 dB the solver's meshes of two geometries
// differ by at 0.1 %; on the topology samples the nodes are 1.6 mil
// (one core) and 4 mil (two cores) apart. Each node costs three solves.
const secondNodes = 5

// secondFlat is the width of the reached offsets below which one node
// suffices: an edge-coupled pair, whose offset does not vary.
const secondFlat = 1e-3 * SpanStep

// SecondOrder is the second-order term of one section's process model: at
// each fit offset, e₀ (dB), κ and ρ (1/dB) of the package notes, fitted at
// the mean parameters μ̄ of the section's sites, and the parts of them
// that follow a site's own means (MeanTerm).
type SecondOrder struct {
	Offsets []float64 `json:"offsets_m"`
	Shift   []float64 `json:"shift_db"`
	Slope   []float64 `json:"slope"`
	Curv    []float64 `json:"curvature_per_db"`
	// Means holds a MeanTerm for each binding whose mean moves the
	// coupling by meanTermMin or more across the sites.
	Means []MeanTerm `json:"means,omitempty"`
	// Across is the mean of the coupling's curvature across u, dB, added
	// to e₀ at every offset (fitAcross).
	Across float64 `json:"across_db"`
}

// The parts of the term that follow a site's means.
//
// A shaped term (dome, edge, tilt, grid) puts each site at its own mean
// parameters μ(site), and the tangent at μ̄ is not the slope there: the
// site's e₀, κ and ρ are those of the parabola along u through its own
// means. Measured on the topology sample's microstrip with its etch term
// made uniform (TestSecondOrderSiteMeans), the worst site's corner check
// erred by 0.056 dB with the term fitted at μ̄ alone and by 0.005 dB
// with it fitted at the site's own means. Fitting every site is out of
// reach (three solves per site and node), so the term takes the site's
// means one binding at a time: for each binding b whose mean moves the
// coupling across the sites, the parabola along u is fitted with μ̄ᵦ
// replaced by the lowest, middle and highest of the sites' μᵦ, at the
// middle fit offset, and e₀, κ and ρ follow μᵦ by the quadratic through
// the three, less its value at μ̄ᵦ (so that the term at μ̄ is
// unchanged). A site's e₀, κ and ρ add the parts of every such binding:
// separable, the mixed second derivatives between two shaped terms left
// out; on the same site they err by 0.013 dB at the corners. The parts do
// not depend on the offset. They cost 9 solves per such binding, cached.

// MeanTerm is the part of the second-order term that follows binding
// Bind's mean μ across the sites: at the lowest, middle and highest of
// the sites' means, the corrections to e₀ (dB), κ and ρ (1/dB), zero at
// the section's mean μ̄ᵦ by construction; between them the quadratic
// through the three, clamped to the ends.
type MeanTerm struct {
	Bind  int        `json:"binding"`
	Means [3]float64 `json:"means"`
	Shift [3]float64 `json:"shift_db"`
	Slope [3]float64 `json:"slope"`
	Curv  [3]float64 `json:"curvature_per_db"`
}

// meanTermMin is the smallest first-order change of the coupling across
// the sites' means, |sᵦ|·(max μᵦ − min μᵦ), for which a binding gets a
// MeanTerm, dB: a curvature effect of a change that small is a small part
// of it, below the solver's jitter.
const meanTermMin = 0.01

// at returns the corrections at mean mu.
func (mt *MeanTerm) at(mu float64) (e0, kappa, rho float64) {
	h := (mt.Means[2] - mt.Means[0]) / 2
	if !(h > 0) {
		return 0, 0, 0
	}
	x := math.Max(-1, math.Min(1, (mu-mt.Means[1])/h))
	quad := func(y [3]float64) float64 {
		return y[1] + x*(y[2]-y[0])/2 + x*x*(y[2]+y[0]-2*y[1])/2
	}
	return quad(mt.Shift), quad(mt.Slope), quad(mt.Curv)
}

// siteSecond is the sum of a site's MeanTerm corrections to e₀, κ and ρ.
type siteSecond struct{ e0, kappa, rho float64 }

// Scaled returns the term of the same section when every deviation from
// nominal (the means as well as the σ) is scaled by k, as tol's
// allocation scales them. Taking the coupling as quadratic in Δp about the
// nominal section, C = sᵀΔp + ½·ΔpᵀHΔp, with Δp = k·(μ + σz) the shift at
// the mean parameters ½k²·μᵀHμ scales by k², the slope's correction along
// u, k²·μᵀHσu against the first-order deviation k·|a|·t, by k, and the
// curvature along u, ½k²·uσHσu over (k·|a|)², not at all:
// e₀ → k²·e₀, κ − 1 → k·(κ − 1), ρ → ρ. With σ alone scaled (the means
// kept) the term would be unchanged (package notes). Nil for nil.
func (so *SecondOrder) Scaled(k float64) *SecondOrder {
	if so == nil {
		return nil
	}
	// The mean curvature across u, ½·tr(σHσ) less its part along u,
	// scales by k² with the σ.
	out := &SecondOrder{Offsets: so.Offsets, Shift: make([]float64, len(so.Shift)),
		Slope: make([]float64, len(so.Slope)), Curv: so.Curv, Across: k * k * so.Across}
	for i := range so.Shift {
		out.Shift[i] = k * k * so.Shift[i]
		out.Slope[i] = 1 + k*(so.Slope[i]-1)
	}
	// A site's mean deviation μ − μ̄ scales by k: its shift ½k²·ΔμᵀHΔμ
	// (and k²·ΔμᵀHμ̄) by k², its slope's correction k²·ΔμᵀHσu over k·|a|
	// by k, and its curvature's, of third order (k³·Δμ·σ² over k²·|a|²),
	// by k.
	for _, mt := range so.Means {
		for j := range mt.Means {
			mt.Means[j] *= k
			mt.Shift[j] *= k * k
			mt.Slope[j] *= k
			mt.Curv[j] *= k
		}
		out.Means = append(out.Means, mt)
	}
	return out
}

// at returns e₀, κ and ρ at offset off: piecewise linear between the
// nodes, constant beyond the outer ones.
func (so *SecondOrder) at(off float64) (e0, kappa, rho float64) {
	n := len(so.Offsets)
	if n == 0 {
		return 0, 1, 0
	}
	if n == 1 || off <= so.Offsets[0] {
		return so.Shift[0] + so.Across, so.Slope[0], so.Curv[0]
	}
	if off >= so.Offsets[n-1] {
		return so.Shift[n-1] + so.Across, so.Slope[n-1], so.Curv[n-1]
	}
	i := 0
	for i < n-2 && off > so.Offsets[i+1] {
		i++
	}
	f := (off - so.Offsets[i]) / (so.Offsets[i+1] - so.Offsets[i])
	lerp := func(v []float64) float64 { return v[i] + f*(v[i+1]-v[i]) }
	return lerp(so.Shift) + so.Across, lerp(so.Slope), lerp(so.Curv)
}

// FitSecondOrder fits the second-order term (SecondOrder) of every curve
// that a section with process terms uses in any of the analyses, which
// share one Input, by direct solves through the cache; curves already
// fitted are kept. SolveCurves calls it; a caller that solves curves
// otherwise (tol) must call it before Evaluate.
func FitSecondOrder(ctx context.Context, set *Settings, curves []*Curve, as ...*Analysis) error {
	in := as[0].In
	if in.Process.Empty() {
		return nil
	}
	for i, c := range curves {
		if c == nil || c.Second != nil {
			continue
		}
		var pos []panel.Vec
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, a := range as {
			for k := range a.Sites {
				if a.Sites[k].Section != i {
					continue
				}
				pos = append(pos, a.Sites[k].Site.Pos)
				p := a.Yield.Prob(k)
				w := procRangeSigmas*p.SD + p.Uniform + p.Uniform2
				lo, hi = math.Min(lo, p.Mean-w), math.Max(hi, p.Mean+w)
			}
		}
		if len(pos) == 0 {
			continue
		}
		so, err := fitSecond(ctx, set, in.Process, c, pos, lo, hi, secondNodes)
		if err != nil {
			return fmt.Errorf("section %q, second-order process term: %w", c.Section.Name, err)
		}
		c.Second = so
	}
	return nil
}

// fitSecond fits the term of curve c (not yet fitted) under model m for
// sites at positions whose offsets reach [lo, hi], at n nodes; nil when no
// term moves the section.
func fitSecond(ctx context.Context, set *Settings, m *process.Model, c *Curve, positions []panel.Vec, lo, hi float64, n int) (*SecondOrder, error) {
	pr := bindProc(m, c, positions) // first order: c has no term yet
	if pr == nil {
		return nil, nil
	}
	// The nodes: across the reached offsets inside the first-order domain
	// and the solved range.
	rlo, rhi := c.Curve.Range()
	lo, hi = math.Max(lo, math.Max(pr.Domain.Lo, rlo)), math.Min(hi, math.Min(pr.Domain.Hi, rhi))
	if !(lo <= hi) { // no site reaches the domain: fit at the design
		lo, hi = c.Section.NominalOffset(), c.Section.NominalOffset()
	}
	if hi-lo < secondFlat {
		n, lo, hi = 1, (lo+hi)/2, (lo+hi)/2
	}
	nb := len(pr.Bind)
	base := make([]float64, nb)
	sigma := make([]float64, nb)
	var row procRow
	for _, p := range positions {
		pr.row(&row, p)
		for b, mu := range row.means() {
			base[b] += mu / float64(len(positions))
		}
	}
	for b := range sigma {
		sigma[b] = math.Sqrt(row.vars()[b]) // the same at every site
	}
	plain := Settings{}
	if set != nil {
		plain = *set
	}
	plain.Sensitivities = false
	e := Evaluator{Curve: c, Proc: pr}
	// Per node its offset, |a|, Σ sᵢμ̄ᵢ and the parameters of its three
	// solves; the solves (independent, one offset each) run in parallel.
	offs, norms, lins := make([]float64, n), make([]float64, n), make([]float64, n)
	dps := make([][3][]float64, n)
	for k := range n {
		off := lo
		if n > 1 {
			off = lo + (hi-lo)*float64(k)/float64(n-1)
		}
		var na, lin float64
		a := make([]float64, nb)
		for b := range a {
			s := e.termSens(b, off)
			a[b] = s * sigma[b]
			na += a[b] * a[b]
			lin += s * base[b]
		}
		na = math.Sqrt(na)
		offs[k], norms[k], lins[k] = off, na, lin
		for j, t := range [3]float64{-secondT, 0, secondT} {
			if t != 0 && na == 0 {
				continue // no direction: the centre solve only
			}
			dp := make([]float64, nb)
			for b := range dp {
				dp[b] = base[b]
				if na > 0 {
					dp[b] += t * sigma[b] * a[b] / na
				}
			}
			dps[k][j] = dp
		}
	}
	cs, err := solveNodes(ctx, c, pr.Bind, offs, dps, &plain)
	if err != nil {
		return nil, err
	}
	so := &SecondOrder{}
	for k, off := range offs {
		e0, kappa, rho := secondOf(cs[k], c.Coupling(off)+lins[k], norms[k])
		so.Offsets = append(so.Offsets, off)
		so.Shift = append(so.Shift, e0)
		so.Slope = append(so.Slope, kappa)
		so.Curv = append(so.Curv, rho)
	}
	mid := n / 2
	if so.Across, err = fitAcross(ctx, c, pr, base, sigma, offs[mid], cs[mid][1], so.Curv[mid]*norms[mid]*norms[mid], &plain); err != nil {
		return nil, err
	}
	means, err := fitMeans(ctx, c, pr, positions, base, sigma, offs[mid], &plain)
	if err != nil {
		return nil, err
	}
	so.Means = means
	return so, nil
}

// fitAcross returns the mean of the coupling's curvature across u at
// offset off about the mean parameters base: with z standardised and
// H̃ = σHσ the Hessian there, the part of ½·zᵀH̃z across u has mean
// ½·tr(H̃) − ½·uᵀH̃u for any z of unit covariance (uniform parts too), and
// ½·uᵀH̃u is the parabola's q. The diagonal of H̃ is two solves per binding,
// at ±secondT·σᵦ; c0 is the solve at base, q the parabola's t² coefficient
// there. Measured (TestSecondOrderDraws): over random draws the model
// without it erred by +0.0037 dB on average on the two-core sample and
// +0.0041 dB on the microstrip, against −0.0035 dB of curvature across u
// (two cores).
func fitAcross(ctx context.Context, c *Curve, pr *Proc, base, sigma []float64, off, c0, q float64, set *Settings) (float64, error) {
	var offs []float64
	var dps [][3][]float64
	var which []int
	for b, sd := range sigma {
		if sd == 0 {
			continue
		}
		var node [3][]float64
		for _, j := range [2]int{0, 2} {
			dp := slices.Clone(base)
			dp[b] += float64(j-1) * secondT * sd
			node[j] = dp
		}
		offs, dps, which = append(offs, off), append(dps, node), append(which, b)
	}
	if len(which) == 0 {
		return 0, nil
	}
	cs, err := solveNodes(ctx, c, pr.Bind, offs, dps, set)
	if err != nil {
		return 0, err
	}
	var trace float64 // ½·tr(H̃)
	for k := range which {
		trace += (cs[k][0] + cs[k][2] - 2*c0) / (2 * secondT * secondT)
	}
	return trace - q, nil
}

// secondOf returns e₀, κ and ρ from the three solves cs at t = −secondT,
// 0 and +secondT along u, the first-order coupling lin at their centre
// and |a| (package notes); the centre solve alone when |a| is 0.
func secondOf(cs [3]float64, lin, na float64) (e0, kappa, rho float64) {
	kappa = 1
	if na > 0 {
		kappa = (cs[2] - cs[0]) / (2 * secondT) / na
		rho = (cs[2] + cs[0] - 2*cs[1]) / (2 * secondT * secondT) / (na * na)
	}
	return cs[1] - lin, kappa, rho
}

// fitMeans fits the MeanTerm of every binding of pr whose mean moves the
// coupling by meanTermMin or more across the sites at positions, at
// offset off, about the mean parameters base with per-binding standard
// deviations sigma (SecondOrder notes).
func fitMeans(ctx context.Context, c *Curve, pr *Proc, positions []panel.Vec, base, sigma []float64, off float64, set *Settings) ([]MeanTerm, error) {
	nb := len(pr.Bind)
	lo, hi := make([]float64, nb), make([]float64, nb)
	for b := range lo {
		lo[b], hi[b] = math.Inf(1), math.Inf(-1)
	}
	var row procRow
	for _, p := range positions {
		pr.row(&row, p)
		for b, mu := range row.means() {
			lo[b], hi[b] = math.Min(lo[b], mu), math.Max(hi[b], mu)
		}
	}
	e := Evaluator{Curve: c, Proc: pr}
	a := make([]float64, nb)
	var na float64
	for b := range a {
		a[b] = e.termSens(b, off) * sigma[b]
		na += a[b] * a[b]
	}
	na = math.Sqrt(na)
	// Per binding that varies, three centres (its lowest, middle and
	// highest mean, the others at base) of three solves each.
	var terms []MeanTerm
	var offs []float64
	var dps [][3][]float64
	for b := range nb {
		if math.Abs(e.termSens(b, off))*(hi[b]-lo[b]) < meanTermMin {
			continue
		}
		mt := MeanTerm{Bind: b, Means: [3]float64{lo[b], (lo[b] + hi[b]) / 2, hi[b]}}
		for _, m := range mt.Means {
			var node [3][]float64
			for j, t := range [3]float64{-secondT, 0, secondT} {
				if t != 0 && na == 0 {
					continue
				}
				dp := slices.Clone(base)
				dp[b] = m
				for i := range dp {
					if na > 0 {
						dp[i] += t * sigma[i] * a[i] / na
					}
				}
				node[j] = dp
			}
			offs = append(offs, off)
			dps = append(dps, node)
		}
		terms = append(terms, mt)
	}
	if len(terms) == 0 {
		return nil, nil
	}
	cs, err := solveNodes(ctx, c, pr.Bind, offs, dps, set)
	if err != nil {
		return nil, err
	}
	for i := range terms {
		mt := &terms[i]
		for j, m := range mt.Means {
			lin := c.Coupling(off)
			for b, s := range base {
				if b == mt.Bind {
					s = m
				}
				lin += e.termSens(b, off) * s
			}
			mt.Shift[j], mt.Slope[j], mt.Curv[j] = secondOf(cs[3*i+j], lin, na)
		}
		// Less the quadratic's value at the section's mean μ̄ᵦ, where the
		// term fitted at μ̄ holds.
		e0, kappa, rho := mt.at(base[mt.Bind])
		for j := range mt.Means {
			mt.Shift[j] -= e0
			mt.Slope[j] -= kappa
			mt.Curv[j] -= rho
		}
	}
	return terms, nil
}

// solveNodes solves, for every node k and excursion j with dps[k][j] set,
// the section of c moved by dps[k][j] at offs[k] (directAt), on up to
// set.Workers (default one per CPU) goroutines; the first error in node
// order is returned.
func solveNodes(ctx context.Context, c *Curve, bind []process.Binding, offs []float64, dps [][3][]float64, set *Settings) ([][3]float64, error) {
	type job struct{ k, j int }
	var jobs []job
	for k := range dps {
		for j, dp := range dps[k] {
			if dp != nil {
				jobs = append(jobs, job{k, j})
			}
		}
	}
	cs := make([][3]float64, len(dps))
	errs := make([]error, len(jobs))
	one := *set
	one.Workers = 1
	if w := set.CacheWarning; w != nil {
		var mu sync.Mutex
		one.CacheWarning = func(err error) { mu.Lock(); defer mu.Unlock(); w(err) }
	}
	workers := set.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	next := make(chan int)
	var wg sync.WaitGroup
	for range min(workers, len(jobs)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				jb := jobs[i]
				v, err := directAt(ctx, c, bind, dps[jb.k][jb.j], offs[jb.k], &one)
				if err != nil {
					errs[i] = fmt.Errorf("offset %.4g mil, %+g sigma along the steepest direction: %w", offs[jb.k]/unit.Mil, float64(jb.j-1)*secondT, err)
					continue
				}
				cs[jb.k][jb.j] = v
			}
		}()
	}
	for i := range jobs {
		next <- i
	}
	close(next)
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	return cs, nil
}

// directAt solves the section of c with binding b's parameters moved by
// dp[b] at offset off, the coupled length held at the curve's (the
// sensitivities hold it fixed), and returns the coupling, dB. The second
// offset of the solve is the mirror image −off, which the solver folds
// onto the same solution (section.Sweep solves |offset|), or one SpanStep
// on at a zero offset.
func directAt(ctx context.Context, c *Curve, bind []process.Binding, dp []float64, off float64, set *Settings) (float64, error) {
	s := perturbedSection(c, bind, dp)
	offs := []float64{-math.Abs(off), math.Abs(off)}
	if math.Abs(off) < SpanStep/2 {
		offs = []float64{off, off + SpanStep}
	}
	sc, _, err := SolveAt(ctx, s, offs, set)
	if err != nil {
		return 0, err
	}
	return sc.Coupling(off), nil
}

// perturbedSection returns a copy of c's section with binding b's
// parameters moved by dp[b] and the coupled length held at the curve's.
func perturbedSection(c *Curve, bind []process.Binding, dp []float64) *section.Section {
	params := c.Curve.Params()
	s := c.Section.Perturbed(params[0], 0) // a copy
	for b, bd := range bind {
		for _, pk := range bd.Params {
			s = s.Perturbed(params[pk], dp[b])
		}
	}
	s.Length = c.Curve.Length
	return s
}

// windowQuad returns P(lo ≤ m + s·t + q·t² ≤ hi) for t standard normal
// (s ≥ 0): the probabilities of the t between the roots of the two
// quadratics, by the roots' stable form (Press et al., Numerical Recipes,
// 3rd ed., §5.6: Q = −(s + √D)/2, roots Q/q and c/Q), which keeps the root
// near (L − m)/s exact as q → 0, where the function becomes windowOf.
func windowQuad(m, s, q, lo, hi float64) float64 { return windowQuadOf(nil, m, s, q, lo, hi) }

// windowQuadOf is windowQuad for t distributed as d, symmetric about 0
// (nil: standard normal; variation_uniform.go): the roots do not depend
// on t's distribution, only the probabilities between them.
func windowQuadOf(d *boxNormal, m, s, q, lo, hi float64) float64 {
	if q == 0 {
		return windowOf(d, m, s*s, lo, hi)
	}
	// The common case: both far roots (Q/q, beyond far when the
	// curvature is small against the slope) leave the CDF there 0 or 1,
	// and P(coupling ≤ L) = F(near root): windowOf's own form.
	far := d.far()
	dh, dl := s*s-4*q*(m-hi), s*s-4*q*(m-lo)
	if dh >= 0 && dl >= 0 {
		qh, ql := -(s+math.Sqrt(dh))/2, -(s+math.Sqrt(dl))/2
		lim := -far * math.Abs(q) // Q ≤ 0: the far root beyond far when Q ≤ lim
		if qh <= lim && ql <= lim {
			return math.Max(0, d.cdf((m-hi)/qh)-d.cdf((m-lo)/ql))
		}
	}
	return math.Min(1, math.Max(0, quadBelow(d, m, s, q, hi)-quadBelow(d, m, s, q, lo)))
}

// quadBelow returns P(m + s·t + q·t² ≤ l), q ≠ 0, s ≥ 0, t distributed
// as d (nil: standard normal).
func quadBelow(d *boxNormal, m, s, q, l float64) float64 {
	c := m - l
	disc := s*s - 4*q*c
	if disc < 0 {
		// The parabola does not reach l: wholly above it (q > 0) or
		// wholly below it (q < 0).
		if q > 0 {
			return 0
		}
		return 1
	}
	qq := -(s + math.Sqrt(disc)) / 2
	if qq == 0 { // s = 0 and disc = 0: the vertex touches l
		return 0.5 - math.Copysign(0.5, q)
	}
	near := c / qq
	// The far root Q/q beyond far leaves the CDF there 0 or 1: a
	// product decides it without the quotient.
	lim := d.far()
	var far float64
	switch {
	case qq >= lim*math.Abs(q):
		far = math.Copysign(lim, q)
	case qq <= -lim*math.Abs(q):
		far = -math.Copysign(lim, q)
	default:
		far = qq / q
	}
	r1, r2 := near, far
	if r1 > r2 {
		r1, r2 = r2, r1
	}
	if q > 0 {
		return between(d, r1, r2) // below l between the roots
	}
	return d.cdf(r1) + d.cdf(-r2) // below l outside them
}

// between returns P(a ≤ t ≤ b), a ≤ b, for t distributed as d, symmetric
// about 0 (nil: standard normal), from the tail nearer both (no
// cancellation when both lie in one tail).
func between(d *boxNormal, a, b float64) float64 {
	if a > 0 {
		return d.cdf(-a) - d.cdf(-b)
	}
	return d.cdf(b) - d.cdf(a)
}

// quadExtremes returns the smallest and largest of m + s·t + q·t² over
// |t| ≤ z.
func quadExtremes(m, s, q, z float64) (lo, hi float64) {
	c := m + q*z*z
	lo, hi = c-s*z, c+s*z
	if lo > hi {
		lo, hi = hi, lo
	}
	// The vertex at t = −s/(2q) lies inside when s < 2|q|·z.
	if q != 0 && s < 2*math.Abs(q)*z {
		switch v := m - s*s/(4*q); {
		case v < lo:
			lo = v
		case v > hi:
			hi = v
		}
	}
	return lo, hi
}
