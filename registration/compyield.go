package registration

import (
	"math"
	"slices"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/optimize"
)

// shifted returns the distribution of offset row i under the net changes x
// (ppm): the mean moves by a_i·x, the spread does not (an artwork scale is a
// fixed term).
func (p *compProblem) shifted(i int, x []float64) SiteProb {
	q := p.prob[i]
	var d float64
	for j, a := range p.off.a[i] {
		d += a * x[j]
	}
	q.Mean += d / toUM
	return q
}

// yield returns the predicted mean site yield under the net changes x: each
// site's SiteProb.Prob over its own allowed interval, the rule every command
// uses, averaged over all sites (those compensation cannot move included).
func (p *compProblem) yield(x []float64) float64 {
	s := p.fixedYield
	for i := range p.prob {
		s += p.shifted(i, x).Prob(p.allowed[i])
	}
	return s / float64(len(p.sites))
}

// probSlope returns dP/dμ of the probability that q lies in iv, by gonum's
// central difference (fd.Derivative) on the closed form itself, so that the
// gradient the optimiser follows is that of the one in-spec rule. The step,
// 1e-4 of the distribution's width, makes the truncation error of the
// central formula (h²/6·P‴, relative ~1e-9) and its rounding error
// (ε/h ~ 1e-12 relative) both negligible beside the optimiser's tolerance.
func probSlope(q SiteProb, iv Interval) float64 {
	if iv.Empty() {
		return 0
	}
	w := q.SD + q.Uniform + q.Uniform2
	if !(w > 0) {
		return 0 // a step function: no slope anywhere but at the ends
	}
	mu := q.Mean
	return fd.Derivative(func(m float64) float64 {
		q.Mean = m
		return q.Prob(iv)
	}, mu, &fd.Settings{Formula: fd.Central, Step: 1e-4 * w})
}

// yieldGrad adds to g (length nv) the gradient of −yield at x with respect
// to the net changes (ppm).
func (p *compProblem) yieldGrad(g, x []float64) {
	n := float64(len(p.sites))
	for i := range p.prob {
		s := probSlope(p.shifted(i, x), p.allowed[i])
		if s == 0 {
			continue
		}
		c := -s / toUM / n
		for j, a := range p.off.a[i] {
			g[j] += c * a
		}
	}
}

// maxYield maximises the expected site yield over the range directions (the
// common part moves no offset, and leaving it out is the smallest change),
// by BFGS (gonum optimize) from the best of three deterministic starts: no
// change, the normalised minimax and the normalised least-squares optima
// (starts within yieldTie of the best count as equal and the smallest change
// wins among them). The climb only gains, so the answer is never below
// keeping the artwork. When the answer breaks the drill budget or a bound that
// the common part cannot mend, the constraints enter as a quadratic penalty
// (exterior penalty method, Nocedal & Wright, Numerical Optimization, 2nd
// ed., 2006, sec. 17.1) and the end is brought back onto the feasible set
// along the segment from a feasible point (constrain).
func (p *compProblem) maxYield(null, rng [][]float64) ([]float64, string, error) {
	starts := [][]float64{make([]float64, p.nv)}
	if x, _, err := minimax(p.nv, &p.norm, &p.bounds, 0, p.bounds.caps); err == nil {
		starts = append(starts, x)
	}
	if x, _, err := p.rmsWindow(null, rng); err == nil {
		starts = append(starts, x)
	}
	var best []float64
	bestY := math.Inf(-1)
	for _, x0 := range starts {
		x0 = removeNull(x0, null)
		y := p.yield(x0)
		switch {
		case y > bestY+yieldTie:
			best, bestY = x0, y
		case y >= bestY-yieldTie && norm2(x0) < norm2(best):
			best, bestY = x0, math.Max(y, bestY)
		}
	}
	best = p.climb(best, rng)
	if y, common, ok := p.settle(best, null); ok {
		return y, common, nil
	}
	return p.constrain(best)
}

// norm2 returns Σ x_j².
func norm2(x []float64) float64 {
	var s float64
	for _, v := range x {
		s += v * v
	}
	return s
}

// climb maximises the yield from x0 over x = V·w with V the orthonormal
// range vectors, so that |x| = |w| and the common part stays zero. It
// returns the end, or x0's range part when BFGS found nothing better.
func (p *compProblem) climb(x0 []float64, rng [][]float64) []float64 {
	r := len(rng)
	toX := func(w []float64) []float64 {
		x := make([]float64, p.nv)
		for k, v := range rng {
			for j := range x {
				x[j] += v[j] * w[k]
			}
		}
		return x
	}
	w0 := make([]float64, r)
	for k, v := range rng {
		for j := range v {
			w0[k] += v[j] * x0[j]
		}
	}
	if r == 0 {
		return toX(w0)
	}
	prob := optimize.Problem{
		Func: func(w []float64) float64 { return -p.yield(toX(w)) },
		Grad: func(gw, w []float64) {
			gx := make([]float64, p.nv)
			p.yieldGrad(gx, toX(w))
			for k, v := range rng {
				gw[k] = 0
				for j := range v {
					gw[k] += v[j] * gx[j]
				}
			}
		},
	}
	res, err := optimize.Minimize(prob, w0, climbSettings(), &optimize.BFGS{})
	f0 := -p.yield(toX(w0))
	if res == nil || (err != nil && res.F >= f0) || !(res.F <= f0) {
		return toX(w0)
	}
	return toX(res.X)
}

// climbSettings are the settings of every BFGS run: stop when three major
// iterations gain less than 1e-12 of mean site yield (a thousandth of
// yieldTie, so that a stop never decides between two answers) or the
// gradient is below 1e-10 per ppm (a 1 ppm move would gain under 1e-10).
func climbSettings() *optimize.Settings {
	return &optimize.Settings{GradientThreshold: 1e-10, MajorIterations: 400,
		Converger: &optimize.FunctionConverge{Absolute: 1e-12, Iterations: 3}}
}

// penaltyWeights are the successive weights of the exterior penalty on the
// constraints, each solve starting from the last; the violation is measured
// as a fraction of each cap, so that 1e6 leaves a violation of about
// √(slope/1e6) ~ 1e-4 of a cap, which constrain then removes exactly.
var penaltyWeights = []float64{1e2, 1e4, 1e6}

// constrain maximises the yield with the constraints as a quadratic penalty
// over all the variables from x, then moves the end onto the feasible set
// (backInside) from a feasible point: no change when that is feasible, else
// the normalised minimax optimum within the constraints.
func (p *compProblem) constrain(x []float64) ([]float64, string, error) {
	x = penaltyMin(func(x []float64) float64 { return -p.yield(x) },
		func(g, x []float64) { p.yieldGrad(g, x) }, &p.caps, x)
	from := make([]float64, p.nv)
	if !p.feasible(from) {
		f, _, err := minimax(p.nv, &p.norm, &p.caps, 0, p.bounds.caps)
		if err != nil {
			return nil, "", err
		}
		from = f
	}
	return backInside(from, x, &p.caps), "the constraints bind: the yield optimum within the drill budget and the artwork bound (penalty method, then the nearest feasible point on the way back)", nil
}

// penaltyMin minimises f (gradient grad, which adds into g) plus the
// exterior quadratic penalty μ·Σ (excess_k/cap_k)² of the capped rows, for
// each weight of penaltyWeights in turn, from x0 (Nocedal & Wright,
// Numerical Optimization, 2nd ed., 2006, sec. 17.1), by BFGS. The end may
// lie just outside the caps; backInside brings it in.
func penaltyMin(f func(x []float64) float64, grad func(g, x []float64), caps *linRows, x0 []float64) []float64 {
	x := slices.Clone(x0)
	for _, mu := range penaltyWeights {
		prob := optimize.Problem{
			Func: func(x []float64) float64 {
				v := f(x)
				for k := range caps.b {
					if e := math.Abs(caps.value(k, x)) - caps.caps[k]; e > 0 {
						v += mu * (e / caps.caps[k]) * (e / caps.caps[k])
					}
				}
				return v
			},
			Grad: func(g, x []float64) {
				for j := range g {
					g[j] = 0
				}
				grad(g, x)
				for k := range caps.b {
					c := caps.value(k, x)
					if e := math.Abs(c) - caps.caps[k]; e > 0 {
						s := 2 * mu * e / (caps.caps[k] * caps.caps[k]) * math.Copysign(1, c)
						for j, a := range caps.a[k] {
							g[j] += s * a
						}
					}
				}
			},
		}
		res, err := optimize.Minimize(prob, x, penaltySettings(), &optimize.BFGS{})
		if res != nil && (err == nil || res.F < prob.Func(x)) {
			x = res.X
		}
	}
	return x
}

// penaltySettings stop a penalty solve sooner than climbSettings: its end is
// moved onto the feasible set anyway, so a gain below 1e-10 over three
// iterations (the objectives are of order 1) is convergence enough, and the
// penalty's kink at each cap would otherwise keep BFGS polishing.
func penaltySettings() *optimize.Settings {
	return &optimize.Settings{GradientThreshold: 1e-8, MajorIterations: 200,
		Converger: &optimize.FunctionConverge{Absolute: 1e-10, Iterations: 3}}
}

// backInside returns the point of the segment from the feasible point from
// to x that is nearest x and keeps every capped row (the feasible set is
// convex and each row linear, so the crossing of each row is exact).
func backInside(from, x []float64, caps *linRows) []float64 {
	lam := 1.0
	for k := range caps.b {
		v0, v1 := caps.value(k, from), caps.value(k, x)
		c := caps.caps[k]
		switch {
		case v1 > c && v1 != v0:
			lam = math.Min(lam, (c-v0)/(v1-v0))
		case v1 < -c && v1 != v0:
			lam = math.Min(lam, (-c-v0)/(v1-v0))
		}
	}
	lam = math.Max(0, lam*(1-1e-12))
	y := slices.Clone(from)
	for j := range y {
		y[j] += lam * (x[j] - from[j])
	}
	return y
}
