package history

import (
	"fmt"
	"math"
)

// Control-chart constants.
const (
	// D2 is the mean of the range of two independent standard normal
	// values, 2/√π = 1.128 (Montgomery, Introduction to Statistical Quality
	// Control, appendix table of factors for control charts, d₂ for n = 2),
	// so that σ̂ = MR̄/d₂ estimates the standard deviation of individuals
	// from their average moving range.
	D2 = 1.128
	// ChartLambda and ChartL set the EWMA chart: λ = 0.2 with L = 3 limits.
	// Montgomery (EWMA section) recommends 0.05 ≤ λ ≤ 0.25 and L = 3 for the
	// usual choices of λ; λ = 0.2 detects a shift of one σ within about ten
	// lots while an in-control process raises a false alarm about once in
	// 500 lots (the average run length tables of Lucas and Saccucci,
	// Technometrics 32, 1990, as reproduced there).
	ChartLambda = 0.2
	ChartL      = 3.0
)

// Individuals is a Shewhart chart for individual values with limits from the
// average moving range (Montgomery, individuals and moving-range charts):
// centre x̄, σ̂ = MR̄/d₂ with MRᵢ = |xᵢ − xᵢ₋₁|, limits x̄ ± 3σ̂.
type Individuals struct {
	Centre, Sigma float64
	MRBar         float64
	UCL, LCL      float64
}

// NewIndividuals returns the individuals chart of x. With fewer than two
// values there is no moving range: Sigma is NaN.
func NewIndividuals(x []float64) Individuals {
	var c Individuals
	if len(x) == 0 {
		c.Centre, c.Sigma = math.NaN(), math.NaN()
	} else {
		var s float64
		for _, v := range x {
			s += v
		}
		c.Centre = s / float64(len(x))
		c.Sigma = math.NaN()
		if len(x) > 1 {
			var mr float64
			for i := 1; i < len(x); i++ {
				mr += math.Abs(x[i] - x[i-1])
			}
			c.MRBar = mr / float64(len(x)-1)
			c.Sigma = c.MRBar / D2
		}
	}
	c.UCL, c.LCL = c.Centre+3*c.Sigma, c.Centre-3*c.Sigma
	return c
}

// EWMA is an exponentially weighted moving average chart (Montgomery, EWMA
// control chart): zᵢ = λ·xᵢ + (1−λ)·zᵢ₋₁ from z₀ = μ₀, with the
// time-varying limits
//
//	μ₀ ± L·σ·√(λ/(2−λ)·[1 − (1−λ)^{2i}])
//
// that widen to the asymptotic μ₀ ± L·σ·√(λ/(2−λ)).
type EWMA struct {
	Lambda, L float64
	Z         []float64
	UCL, LCL  []float64
}

// NewEWMA returns the EWMA chart of x about centre mu0 for individuals of
// standard deviation sigma.
func NewEWMA(x []float64, mu0, sigma, lambda, L float64) EWMA {
	e := EWMA{Lambda: lambda, L: L, Z: make([]float64, len(x)), UCL: make([]float64, len(x)), LCL: make([]float64, len(x))}
	z := mu0
	q := (1 - lambda) * (1 - lambda)
	pow := 1.0 // (1−λ)^{2i}
	for i, v := range x {
		z = lambda*v + (1-lambda)*z
		pow *= q
		w := L * sigma * math.Sqrt(lambda/(2-lambda)*(1-pow))
		e.Z[i], e.UCL[i], e.LCL[i] = z, mu0+w, mu0-w
	}
	return e
}

// Out reports whether point i of the EWMA lies outside its limits.
func (e *EWMA) Out(i int) bool { return e.Z[i] > e.UCL[i] || e.Z[i] < e.LCL[i] }

// Rule is one of the Western Electric run rules (Western Electric,
// Statistical Quality Control Handbook, 1956, the zone tests for unnatural
// patterns), as Montgomery states them.
type Rule int

const (
	// Beyond3 is one point beyond 3σ.
	Beyond3 Rule = 1 + iota
	// TwoOf3 is two of three consecutive points beyond 2σ on one side.
	TwoOf3
	// FourOf5 is four of five consecutive points beyond 1σ on one side.
	FourOf5
	// EightInRow is eight consecutive points on one side of the centre line.
	EightInRow
	// EWMAOut is the EWMA beyond its limits (not a Western Electric rule;
	// it rides along so that a chart flags both kinds of signal alike).
	EWMAOut
)

var ruleText = [...]string{
	Beyond3:    "WE1: 1 point beyond 3σ",
	TwoOf3:     "WE2: 2 of 3 beyond 2σ on one side",
	FourOf5:    "WE3: 4 of 5 beyond 1σ on one side",
	EightInRow: "WE4: 8 in a row on one side",
	EWMAOut:    "EWMA beyond its limits",
}

// String describes the rule, e.g. "WE2: 2 of 3 beyond 2σ on one side".
func (r Rule) String() string {
	if r >= Beyond3 && r <= EWMAOut {
		return ruleText[r]
	}
	return fmt.Sprintf("Rule(%d)", int(r))
}

// Short is the rule's tag, "WE1" to "WE4" or "EWMA".
func (r Rule) Short() string {
	if r == EWMAOut {
		return "EWMA"
	}
	return fmt.Sprintf("WE%d", int(r))
}

// Signal is a point that breaks a rule: the point that completes the pattern.
type Signal struct {
	Index int
	Rule  Rule
}

// WesternElectric returns the points of x that break a Western Electric rule
// against the centre line and σ, in order of index and then rule. A point is
// flagged when it completes the pattern and is itself part of it (beyond the
// zone, on the side of the run), so that a run that goes on keeps being
// flagged point by point; a point exactly on a zone limit is not beyond it.
func WesternElectric(x []float64, centre, sigma float64) []Signal {
	var out []Signal
	if !(sigma > 0) {
		return out
	}
	// beyond counts, in the window ending at i, the points beyond k·σ on
	// side s (+1 above, −1 below).
	beyond := func(i, window int, k, s float64) int {
		n := 0
		for j := max(0, i-window+1); j <= i; j++ {
			if s*(x[j]-centre) > k*sigma {
				n++
			}
		}
		return n
	}
	for i, v := range x {
		d := v - centre
		if math.Abs(d) > 3*sigma {
			out = append(out, Signal{i, Beyond3})
		}
		s := 1.0
		if d < 0 {
			s = -1
		}
		if i >= 2 && s*d > 2*sigma && beyond(i, 3, 2, s) >= 2 {
			out = append(out, Signal{i, TwoOf3})
		}
		if i >= 4 && s*d > sigma && beyond(i, 5, 1, s) >= 4 {
			out = append(out, Signal{i, FourOf5})
		}
		if i >= 7 && d != 0 && beyond(i, 8, 0, s) == 8 {
			out = append(out, Signal{i, EightInRow})
		}
	}
	return out
}
