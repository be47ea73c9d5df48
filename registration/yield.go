package registration

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/bits"
	"math/rand/v2"
	"runtime"
	"sort"
	"sync"
	"sync/atomic"

	"github.com/regdrift/regdrift/panel"
)

// NormalCDF returns Φ(x), the standard normal cumulative distribution,
// through Φ(x) = ½·erfc(−x/√2) (Abramowitz & Stegun 26.2.29), which keeps full
// relative precision in the lower tail.
func NormalCDF(x float64) float64 { return 0.5 * math.Erfc(-x/math.Sqrt2) }

// NormalQuantile returns Φ⁻¹(p), the standard normal quantile; it is −Inf at
// 0 and +Inf at 1. The start Φ⁻¹(p) = −√2·erfcinv(2p) loses digits in the
// tails (math.Erfcinv works from 1 − 2p), so two Halley steps on Φ(x) − p,
// with the tail-accurate NormalCDF, restore full precision: for f = Φ − p,
// f' = φ, f” = −xφ, the step is e/(1 + x·e/2) with e = (Φ(x) − p)/φ(x).
func NormalQuantile(p float64) float64 {
	if p > 0.5 {
		return -NormalQuantile(1 - p) // 1 − p is exact for p in [0.5, 1] (Sterbenz)
	}
	x := -math.Sqrt2 * math.Erfcinv(2*p)
	if math.IsInf(x, 0) || math.IsNaN(x) {
		return x
	}
	for range 2 {
		e := (NormalCDF(x) - p) / normalPDF(x)
		x -= e / (1 + x*e/2)
	}
	return x
}

// normalPDF returns φ(x) = exp(−x²/2)/√(2π).
func normalPDF(x float64) float64 { return math.Exp(-0.5*x*x) / math.Sqrt(2*math.Pi) }

// Interval is the closed interval [Lo, Hi] of offsets, in metres. It is empty
// when Lo > Hi; the zero value is the single point 0.
type Interval struct{ Lo, Hi float64 }

// EmptyInterval returns an empty interval.
func EmptyInterval() Interval { return Interval{Lo: math.Inf(1), Hi: math.Inf(-1)} }

// Empty reports whether iv contains no point.
func (iv Interval) Empty() bool { return !(iv.Lo <= iv.Hi) }

// Contains reports whether Lo ≤ x ≤ Hi.
func (iv Interval) Contains(x float64) bool { return iv.Lo <= x && x <= iv.Hi }

// Shift returns iv moved by d.
func (iv Interval) Shift(d float64) Interval { return Interval{iv.Lo + d, iv.Hi + d} }

// SpecLimits is what SpecInterval found about one end of the allowed interval.
type SpecLimits struct {
	// Clipped is set for an end at which the curve was still inside spec when
	// the search range ended: the interval is then cut at the range.
	Clipped [2]bool
	// Limit is, for each end, the spec limit the coupling meets there:
	// −1 for target − tol, +1 for target + tol, 0 for a clipped end.
	Limit [2]int
}

// ErrNominalOutOfSpec is returned by SpecInterval when the curve at the
// nominal offset is already outside target ± tol.
var ErrNominalOutOfSpec = errors.New("the nominal design is outside its coupling spec")

// specScanSteps is the number of steps the search range is scanned in before
// each crossing is refined by bisection; a crossing pair closer than
// (hi−lo)/specScanSteps can be missed, far below any sweep's point spacing.
const specScanSteps = 4000

// SpecInterval returns the connected interval of offsets around nominal, within
// the search range [lo, hi], over which f(x) stays within target ± tol: the
// allowed offsets of a coupler whose coupling curve is f (dB) and whose spec is
// target ± tol dB. The interval may be asymmetric about nominal. Each end is
// found by scanning outward from nominal and bisecting the first step at which
// |f − target| exceeds tol, to a width of 1e-12 of the range. If f(nominal) is
// out of spec, it returns an empty interval and ErrNominalOutOfSpec.
func SpecInterval(f func(float64) float64, lo, hi, nominal, target, tol float64) (Interval, SpecLimits, error) {
	var lim SpecLimits
	if !(tol > 0) {
		return EmptyInterval(), lim, fmt.Errorf("spec tolerance %g dB must be positive", tol)
	}
	if !(lo < hi) || !(lo <= nominal && nominal <= hi) {
		return EmptyInterval(), lim, fmt.Errorf("nominal offset %g m is outside the search range [%g, %g] m", nominal, lo, hi)
	}
	g := func(x float64) float64 { return math.Abs(f(x)-target) - tol }
	if g(nominal) > 0 {
		return EmptyInterval(), lim, ErrNominalOutOfSpec
	}
	h := (hi - lo) / specScanSteps
	end := func(dir float64, stop float64) (float64, bool, int) {
		in := nominal
		for {
			x := in + dir*h
			if dir*(x-stop) >= 0 {
				x = stop
			}
			if g(x) > 0 {
				// Bisect between in (g ≤ 0) and x (g > 0).
				a, b := in, x
				for range 200 {
					if math.Abs(b-a) <= 1e-12*(hi-lo) {
						break
					}
					m := 0.5 * (a + b)
					if g(m) > 0 {
						b = m
					} else {
						a = m
					}
				}
				side := -1
				if f(b) > target {
					side = 1
				}
				return a, false, side
			}
			if x == stop {
				return stop, true, 0
			}
			in = x
		}
	}
	var iv Interval
	iv.Lo, lim.Clipped[0], lim.Limit[0] = end(-1, lo)
	iv.Hi, lim.Clipped[1], lim.Limit[1] = end(+1, hi)
	return iv, lim, nil
}

// SiteProb is the closed-form distribution of one site's across offset, as used
// for its yield: a normal part plus at most two uniform parts treated exactly.
type SiteProb struct {
	Mean float64 // mean across offset, design offset included, m
	// SD is the standard deviation of the normal part: every normal term, the
	// per-site sigma, and the uniform terms other than the two widest.
	SD float64
	// Uniform and Uniform2 are the half-widths of the widest and second widest
	// uniform terms' contributions (|sensitivity| × half_width), m; 0 when
	// fewer uniform terms reach the site. Uniform ≥ Uniform2.
	Uniform, Uniform2 float64
}

// Fold ratios: a uniform part narrower than this fraction of the rest of the
// spread is folded into the normal part by its variance w²/3. The density then
// differs from the exact convolution by O((w/σ)⁴) in its fourth cumulant, far
// below Monte Carlo resolution, while the exact forms would lose digits to
// cancellation in their finite differences (relative error about
// ε·(x/w) for one box and ε·x²/(w1·w2) for two).
const (
	uniformFoldRatio  = 1e-6
	uniform2FoldRatio = 1e-4
)

// CDF returns P(offset ≤ t). A uniform part of half-width w averages the CDF
// over ±w, which is a finite difference of its antiderivative; with two
// boxes, a double difference of the second antiderivative:
//
//	F(t) = [G1(x+w) − G1(x−w)]/(2w),                 x = t − μ,
//	F(t) = Σ± ±G2(x ± w1 ± w2)/(4·w1·w2),
//	G1(x) = σ·(uΦ(u) + φ(u)),  G2(x) = σ²·((u²+1)Φ(u) + uφ(u))/2,  u = x/σ,
//
// the repeated integrals of Φ (∫Φ = uΦ + φ, Owen 1980, "A table of normal
// integrals", Commun. Statist. B9, 389–419, integral 10,010.1; differentiating
// G2 gives G1 back). With σ = 0, G1(x) = max(x, 0) and G2(x) = max(x, 0)²/2.
func (p SiteProb) CDF(t float64) float64 {
	x := t - p.Mean
	sd, w1, w2 := p.folded()
	switch {
	case w1 == 0:
		if sd == 0 {
			if x >= 0 {
				return 1
			}
			return 0
		}
		return NormalCDF(x / sd)
	case w2 == 0:
		G1 := func(x float64) float64 {
			if sd == 0 {
				return math.Max(x, 0)
			}
			u := x / sd
			return sd * (u*NormalCDF(u) + normalPDF(u))
		}
		return math.Min(1, math.Max(0, (G1(x+w1)-G1(x-w1))/(2*w1)))
	}
	G2 := func(x float64) float64 {
		if sd == 0 {
			m := math.Max(x, 0)
			return m * m / 2
		}
		u := x / sd
		return sd * sd * ((u*u+1)*NormalCDF(u) + u*normalPDF(u)) / 2
	}
	f := (G2(x+w1+w2) - G2(x+w1-w2) - G2(x-w1+w2) + G2(x-w1-w2)) / (4 * w1 * w2)
	return math.Min(1, math.Max(0, f))
}

// folded returns the normal part's standard deviation and the two
// half-widths after the fold rule above (uniformFoldRatio,
// uniform2FoldRatio), the widest half-width first.
func (p SiteProb) folded() (sd, w1, w2 float64) {
	sd, w1, w2 = p.SD, p.Uniform, p.Uniform2
	if w2 > 0 && w2 < uniform2FoldRatio*(sd+w1) {
		sd, w2 = math.Sqrt(sd*sd+w2*w2/3), 0
	}
	if w1 > 0 && w1 < uniformFoldRatio*sd {
		sd, w1 = math.Sqrt(sd*sd+w1*w1/3), 0
	}
	if w1 == 0 && w2 > 0 {
		w1, w2 = w2, 0
	}
	return sd, w1, w2
}

// PDF returns the density of the offset at t, the derivative of CDF by
// the same fold rule: a normal density, one box's
// [Φ(u+) − Φ(u−)]/(2w) (u± = (x ± w)/σ), or two boxes' double difference
// of G1 (CDF's notation) over 4·w1·w2. With σ = 0 the boxes' density is a
// box or a trapezoid; with σ = 0 and no box the offset is fixed and the
// density is 0 everywhere but at the mean, where it is +Inf.
func (p SiteProb) PDF(t float64) float64 {
	x := t - p.Mean
	sd, w1, w2 := p.folded()
	switch {
	case w1 == 0:
		if sd == 0 {
			if x == 0 {
				return math.Inf(1)
			}
			return 0
		}
		return normalPDF(x/sd) / sd
	case w2 == 0:
		if sd == 0 {
			if math.Abs(x) <= w1 {
				return 1 / (2 * w1)
			}
			return 0
		}
		return math.Max(0, NormalCDF((x+w1)/sd)-NormalCDF((x-w1)/sd)) / (2 * w1)
	}
	G1 := func(x float64) float64 {
		if sd == 0 {
			return math.Max(x, 0)
		}
		u := x / sd
		return sd * (u*NormalCDF(u) + normalPDF(u))
	}
	return math.Max(0, (G1(x+w1+w2)-G1(x+w1-w2)-G1(x-w1+w2)+G1(x-w1-w2))/(4*w1*w2))
}

// Kinks returns the offsets where the density changes form: the mean ±
// w1 ± w2 after the fold rule (the edges of the boxes), none without a
// box. An integral of the density against another function converges
// fastest on pieces between them.
func (p SiteProb) Kinks(dst []float64) []float64 {
	_, w1, w2 := p.folded()
	dst = dst[:0]
	if w1 == 0 {
		return dst
	}
	return append(dst, p.Mean-w1-w2, p.Mean-w1+w2, p.Mean+w1-w2, p.Mean+w1+w2)
}

// Prob returns P(offset ∈ iv), the closed-form yield of the site.
func (p SiteProb) Prob(iv Interval) float64 {
	if iv.Empty() {
		return 0
	}
	return math.Max(0, p.CDF(iv.Hi)-p.CDF(iv.Lo))
}

// YieldSite is one coupler site of a yield study.
type YieldSite struct {
	Pos, U       panel.Vec // position and direction of the coupled lines
	Upper, Lower string    // trace layers of its section, upper first
	Nominal      float64   // design offset of its section, m
	// Allowed is the interval of across offsets (design offset included) for
	// which the coupler meets its spec; an empty interval means never.
	Allowed Interval
	Part    int // index of its part instance, or −1 if it belongs to none
}

// Yield is a yield study of a panel: the sites, their sensitivity rows and the
// relative terms of every layer pair they use.
type Yield struct {
	Model *Model
	Sites []YieldSite
	Rows  []Row
	// Pairs holds one Relative per distinct (upper, lower) layer pair; Pair[i]
	// indexes it for site i.
	Pairs []*Relative
	Pair  []int
	Parts int // number of part instances
	// Coupons lists the part instances that are not products (test coupon
	// strips), in increasing order: their sites and part yields are tallied
	// like any other, but they are left out of MCResult.GoodParts. Nil means
	// every part is a product.
	Coupons []int
	// Check, if not nil, decides in Monte Carlo whether the sites it
	// claims meet their spec, for a coupling that depends on more than the
	// across offset (process variation terms); the others are decided by
	// their allowed interval alone.
	Check SiteChecker
}

// SiteChecker decides whether a site meets its spec in a Monte Carlo trial,
// given its drawn across offset, for the sites it claims.
type SiteChecker interface {
	// Claims reports whether the checker decides site i.
	Claims(i int) bool
	// NewWorker returns the state of one Monte Carlo goroutine.
	NewWorker() SiteCheckWorker
}

// SiteCheckWorker is one goroutine's side of a SiteChecker. Its calls draw
// from the trial's stream, so that a run is the same whatever the number
// of workers. The Monte Carlo draws its panels in groups of at most
// MCGroup (slots 0, 1, …) and decides each site on every panel of the
// group before it moves to the next site, so that a site's constants are
// read once per group.
type SiteCheckWorker interface {
	// Panel draws what one panel shares (panel-to-panel terms) into slot
	// p of the next group, once per trial after the registration terms.
	Panel(p int, r *Stream)
	// InSpec reports on which panels of the group claimed site i meets
	// its spec, as a mask with bit p for slot p, given its across offset
	// off[p] on each (design offset included; len(off) panels, slots
	// 0 to len(off)−1) and nrm[p], a standard normal independent of
	// everything else for the site's own per-site parts on that panel
	// (unused if it has none). The Monte Carlo draws nrm with the site's
	// registration normals in one Norms call.
	InSpec(i int, off, nrm []float64) uint32
}

// Products returns the number of part instances that are products.
func (y *Yield) Products() int { return y.Parts - len(y.Coupons) }

// NewYield prepares a yield study of sites under model m, with parts part
// instances (site Part indices must lie in [0, parts) or be −1).
func NewYield(m *Model, sites []YieldSite, parts int) *Yield {
	y := &Yield{Model: m, Sites: sites, Rows: make([]Row, len(sites)), Pair: make([]int, len(sites)), Parts: parts}
	idx := map[[2]string]int{}
	for i, s := range sites {
		if s.Part >= parts {
			panic(fmt.Sprintf("registration: site %d names part %d of %d", i, s.Part, parts))
		}
		k := [2]string{s.Upper, s.Lower}
		p, ok := idx[k]
		if !ok {
			p = len(y.Pairs)
			idx[k] = p
			y.Pairs = append(y.Pairs, m.Relative(s.Upper, s.Lower))
		}
		y.Pair[i] = p
		y.Rows[i] = y.Pairs[p].Row(s.Pos, s.U)
	}
	return y
}

// Stats returns the closed-form offset statistics of site i (design offset excluded).
func (y *Yield) Stats(i int) Stats { return y.Pairs[y.Pair[i]].Stats(y.Rows[i]) }

// Prob returns the closed-form distribution of site i's across offset.
func (y *Yield) Prob(i int) SiteProb {
	return y.Pairs[y.Pair[i]].Prob(&y.Rows[i], y.Sites[i].Nominal)
}

// Prob returns the closed-form distribution of the across offset of row, with
// the design offset nominal added to its mean: the normal terms, the per-site
// sigma and all uniform terms but the two widest make up the normal part, the
// two widest uniform terms are kept exact.
func (r *Relative) Prob(row *Row, nominal float64) SiteProb {
	st := r.Stats(*row)
	v := st.SDAcross * st.SDAcross
	var w1, w2 float64 // the two widest uniform contributions, w1 ≥ w2
	for i, c := range r.model.Contributors {
		if r.Sign[i] == 0 {
			continue
		}
		for k, t := range c.Terms {
			if t.Dist != Uniform {
				continue
			}
			w := math.Abs(r.Sign[i]*row.Across[k]) * t.Spread
			switch {
			case w > w1:
				w1, w2 = w, w1
			case w > w2:
				w2 = w
			}
		}
	}
	v -= (w1*w1 + w2*w2) / 3 // their variance is in Stats; take it out of the normal part
	return SiteProb{Mean: st.MeanAcross + nominal, SD: math.Sqrt(math.Max(v, 0)), Uniform: w1, Uniform2: w2}
}

// ClosedForm returns the closed-form yield of site i: P(δ ∈ Allowed).
func (y *Yield) ClosedForm(i int) float64 { return y.Prob(i).Prob(y.Sites[i].Allowed) }

// Budget returns the across-offset variance shares of site i (see Relative.Budget).
func (y *Yield) Budget(dst []Share, i int) []Share {
	return y.Pairs[y.Pair[i]].Budget(dst, y.Rows[i])
}

// PanelBudget returns every contributor term's across-offset variance summed
// over the sites, divided by the number of sites (the panel's mean variance
// share), largest first.
func (y *Yield) PanelBudget() []Share {
	type key struct {
		c int
		t TermKind
	}
	sum := map[key]float64{}
	var buf []Share
	for i := range y.Sites {
		buf = y.Budget(buf, i)
		for _, s := range buf {
			sum[key{s.Contributor, s.Term}] += s.Variance
		}
	}
	out := make([]Share, 0, len(sum))
	n := float64(len(y.Sites))
	for k, v := range sum {
		out = append(out, Share{k.c, k.t, v / n})
	}
	SortShares(out)
	return out
}

// SortShares orders shares largest first, ties by contributor and term.
func SortShares(s []Share) {
	sort.Slice(s, func(a, b int) bool {
		if s[a].Variance != s[b].Variance {
			return s[a].Variance > s[b].Variance
		}
		if s[a].Contributor != s[b].Contributor {
			return s[a].Contributor < s[b].Contributor
		}
		return s[a].Term < s[b].Term
	})
}

// MCSettings controls a Monte Carlo yield run. The zero value runs nothing:
// Trials must be positive.
type MCSettings struct {
	Trials int    // number of panels drawn
	Seed   uint64 // seed of the random streams (Stream)
	// Workers is the number of goroutines; 0 means GOMAXPROCS. The result does
	// not depend on it.
	Workers int
	// Progress, if not nil, is called after each block of trials with the
	// number of trials done; calls are serialised.
	Progress func(done, total int)
}

// MCBlock is the number of panels in one block of a Monte Carlo run. Block b
// draws from its own stream (Stream.Seed(seed, b)), so that the result is
// the same whatever the number of workers and their scheduling.
const MCBlock = 256

// MCGroup is the number of panels a worker draws at once: it draws the
// panel terms of MCGroup panels, then runs through the sites once,
// deciding each on all of them, so that the sites' constants (about 170
// bytes a site with process terms: ten thousand sites are more than a
// core's cache) stream from memory once per group instead of once per
// panel, and what a site costs apart from its panels (reading it, its
// Norms and InSpec calls, the tallies) is shared by all of them. It
// divides MCBlock and is at most 32 (a uint32 mask of the panels); it is
// 32 because with 8 that share was a tenth of a site evaluation with
// process terms (callgrind, BenchmarkMonteCarloProcess in
// registration/drift: 221 instructions per site evaluation with 8, 202
// with 16, 194 with 32).
const MCGroup = 32

// MCResult holds the counts of a Monte Carlo yield run. Counts are integers,
// so merging the workers' tallies is exact and order-independent.
type MCResult struct {
	Trials   int
	SiteGood []int64 // per site, panels on which the site met its spec
	PartGood []int64 // per part instance (coupons too), panels on which all its sites did
	// GoodParts[k] is the number of panels with exactly k good products
	// (coupon parts are not counted; see Yield.Coupons).
	GoodParts []int64
}

// SiteYield returns the Monte Carlo yield of site i.
func (r *MCResult) SiteYield(i int) float64 { return float64(r.SiteGood[i]) / float64(r.Trials) }

// SiteSE returns the binomial standard error of SiteYield(i), √(p(1−p)/N).
func (r *MCResult) SiteSE(i int) float64 {
	p := r.SiteYield(i)
	return math.Sqrt(p * (1 - p) / float64(r.Trials))
}

// PartYield returns the Monte Carlo yield of part instance i.
func (r *MCResult) PartYield(i int) float64 { return float64(r.PartGood[i]) / float64(r.Trials) }

// MeanGoodParts returns the mean number of good parts per panel.
func (r *MCResult) MeanGoodParts() float64 {
	var s float64
	for k, n := range r.GoodParts {
		s += float64(k) * float64(n)
	}
	return s / float64(r.Trials)
}

// GoodPartsQuantile returns the q-quantile of the number of good parts per
// panel: the smallest k such that at least a fraction q of panels have k or
// fewer good parts.
func (r *MCResult) GoodPartsQuantile(q float64) int {
	need := q * float64(r.Trials)
	var c float64
	for k, n := range r.GoodParts {
		c += float64(n)
		if c >= need && c > 0 {
			return k
		}
	}
	return len(r.GoodParts) - 1
}

// mcSite is the hot-loop form of a site: the across offset is a·v + noise, and
// the site is good when lo ≤ that ≤ hi (the allowed interval less the design
// offset and residual constant).
type mcSite struct {
	a      [NumTerms]float64
	lo, hi float64
	sd     float64
	pair   int32
	part   int32
	// base is the constant of the across offset (residual and design
	// offset) when Check claims the site; checked marks such a site.
	base    float64
	checked bool
}

// MonteCarlo draws set.Trials panels: every contributor term once per panel
// (Model.Sample, uniform terms honoured), the per-site sigma once per site, and
// counts the sites and parts that meet their spec. Memory does not grow with
// the number of trials. It returns ctx.Err() if ctx is cancelled.
func (y *Yield) MonteCarlo(ctx context.Context, set MCSettings) (*MCResult, error) {
	if set.Trials <= 0 {
		return nil, fmt.Errorf("trials %d must be positive", set.Trials)
	}
	sites := make([]mcSite, len(y.Sites))
	for i, s := range y.Sites {
		row := &y.Rows[i]
		p := y.Pairs[y.Pair[i]]
		base := row.ConstAcross + s.Nominal
		ms := mcSite{a: row.Across, lo: s.Allowed.Lo - base, hi: s.Allowed.Hi - base,
			sd: math.Sqrt(p.SiteVar), pair: int32(y.Pair[i]), part: int32(s.Part)}
		if s.Allowed.Empty() {
			ms.lo, ms.hi = math.Inf(1), math.Inf(-1)
		}
		if y.Check != nil && y.Check.Claims(i) {
			ms.checked, ms.base = true, base
		}
		sites[i] = ms
	}
	workers := set.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	blocks := (set.Trials + MCBlock - 1) / MCBlock
	workers = min(workers, blocks)

	res := &MCResult{Trials: set.Trials, SiteGood: make([]int64, len(sites)),
		PartGood: make([]int64, y.Parts), GoodParts: make([]int64, y.Products()+1)}
	var next atomic.Int64
	var mu sync.Mutex
	done := 0
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w := newMCWorker(y, sites)
			for ctx.Err() == nil {
				b := int(next.Add(1) - 1)
				if b >= blocks {
					break
				}
				n := min(MCBlock, set.Trials-b*MCBlock)
				w.block(set.Seed, uint64(b), n)
				if set.Progress != nil {
					mu.Lock()
					done += n
					set.Progress(done, set.Trials)
					mu.Unlock()
				}
			}
			mu.Lock()
			for i, c := range w.siteGood {
				res.SiteGood[i] += c
			}
			for i, c := range w.partBad {
				res.PartGood[i] += w.trials - c
			}
			for i, c := range w.goodParts {
				res.GoodParts[i] += c
			}
			mu.Unlock()
		}()
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	return res, nil
}

// mcWorker holds one goroutine's tallies and scratch space.
type mcWorker struct {
	y     *Yield
	sites []mcSite
	str   *Stream
	rng   *rand.Rand // str, for Model.Sample
	draw  Draw
	v     [][MCGroup][NumTerms]float64 // per pair and group slot: v[pair][slot]
	// failed holds per part the mask of the group's panels on which one
	// of its sites failed; dirty lists the parts whose mask is not 0.
	failed    []uint32
	dirty     []int32
	coupon    []bool               // per part, whether it is a coupon (Yield.Coupons)
	off       [MCGroup]float64     // per slot, a site's offsets
	nrm       [2 * MCGroup]float64 // per slot, a site's registration normals, then its checker's (InSpec)
	siteGood  []int64
	partBad   []int64
	goodParts []int64
	trials    int64
	check     SiteCheckWorker // nil without Yield.Check
}

func newMCWorker(y *Yield, sites []mcSite) *mcWorker {
	str := new(Stream)
	w := &mcWorker{y: y, sites: sites, str: str, rng: rand.New(str), draw: y.Model.NewDraw(), v: make([][MCGroup][NumTerms]float64, len(y.Pairs)),
		failed: make([]uint32, y.Parts), dirty: make([]int32, 0, y.Parts), coupon: make([]bool, y.Parts), siteGood: make([]int64, len(sites)),
		partBad: make([]int64, y.Parts), goodParts: make([]int64, y.Products()+1), check: newCheckWorker(y)}
	for _, c := range y.Coupons {
		w.coupon[c] = true
	}
	return w
}

func newCheckWorker(y *Yield) SiteCheckWorker {
	if y.Check == nil {
		return nil
	}
	return y.Check.NewWorker()
}

// block runs n trials from stream (seed, b).
func (w *mcWorker) block(seed, b uint64, n int) {
	w.str.Seed(seed, b)
	for t := 0; t < n; t += MCGroup {
		w.group(min(MCGroup, n-t))
	}
	w.trials += int64(n)
}

// group runs g ≤ MCGroup trials: their panel draws, in order, then every
// site on each of them, then the parts.
func (w *mcWorker) group(g int) {
	str := w.str
	for p := range g {
		w.y.Model.Sample(w.rng, w.draw)
		for q, r := range w.y.Pairs {
			w.v[q][p] = r.Collapse(w.draw)
		}
		if w.check != nil {
			w.check.Panel(p, str)
		}
	}
	sites := w.sites
	good := w.siteGood[:len(sites)]
	all := uint32(1)<<g - 1
	off := w.off[:g]
	for i := range sites {
		s := &sites[i]
		a := &s.a
		vs := w.v[s.pair][:g]
		var in uint32
		if s.checked {
			// One Norms call for the site's registration normals and its
			// checker's.
			nrm := w.nrm[:2*len(vs)]
			str.Norms(nrm)
			for p, n := range nrm[:len(vs)] {
				v := &vs[p]
				d := a[0]*v[0] + a[1]*v[1] + a[2]*v[2] + a[3]*v[3] + a[4]*v[4] + a[5]*v[5]
				off[p] = d + s.sd*n + s.base
			}
			in = w.check.InSpec(i, off, nrm[len(vs):])
		} else {
			nrm := w.nrm[:len(vs)] // without per-site sigma, sd·n = 0 for any earlier n
			if s.sd > 0 {
				str.Norms(nrm)
			}
			for p, n := range nrm {
				v := &vs[p]
				d := a[0]*v[0] + a[1]*v[1] + a[2]*v[2] + a[3]*v[3] + a[4]*v[4] + a[5]*v[5]
				d += s.sd * n
				if d >= s.lo && d <= s.hi {
					in |= 1 << p
				}
			}
		}
		good[i] += int64(bits.OnesCount32(in))
		if in != all && s.part >= 0 {
			if w.failed[s.part] == 0 {
				w.dirty = append(w.dirty, s.part)
			}
			w.failed[s.part] |= all &^ in
		}
	}
	// Each failed part once per panel it failed on; coupons are not
	// products, so they leave the good products per panel alone.
	var bad [MCGroup]int
	for _, k := range w.dirty {
		m := w.failed[k]
		w.failed[k] = 0
		w.partBad[k] += int64(bits.OnesCount32(m))
		if w.coupon[k] {
			continue
		}
		for ; m != 0; m &= m - 1 {
			bad[bits.TrailingZeros32(m)]++
		}
	}
	w.dirty = w.dirty[:0]
	for p := range g {
		w.goodParts[w.y.Products()-bad[p]]++
	}
}
