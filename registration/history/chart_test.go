package history

import (
	"math"
	"testing"
)

// closeTo compares with an absolute tolerance.
func closeTo(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// TestIndividualsHand checks the individuals chart against the textbook
// formulas worked by hand on x = 10, 12, 11, 14, 13, 12, 15, 11 (calculated
// here): moving ranges 2, 1, 3, 1, 1, 3, 4, MR̄ = 15/7 = 2.142857,
// σ̂ = MR̄/1.128 = 1.899696 (Montgomery, individuals chart, d₂ = 1.128 for
// n = 2), x̄ = 98/8 = 12.25, limits 12.25 ± 3·1.899696 = 17.949088 and
// 6.550912.
func TestIndividualsHand(t *testing.T) {
	x := []float64{10, 12, 11, 14, 13, 12, 15, 11}
	c := NewIndividuals(x)
	const tol = 1e-6 // the hand values are rounded to six decimals
	for _, tc := range []struct {
		name      string
		got, want float64
	}{
		{"MR̄", c.MRBar, 2.142857}, {"σ̂", c.Sigma, 1.899696}, {"centre", c.Centre, 12.25},
		{"UCL", c.UCL, 17.949088}, {"LCL", c.LCL, 6.550912},
	} {
		if !closeTo(tc.got, tc.want, tol) {
			t.Errorf("%s = %.7f, want %.6f", tc.name, tc.got, tc.want)
		}
	}
}

// TestEWMAHand checks the EWMA and its time-varying limits, λ = 0.2, L = 3,
// about μ₀ = 12.25 with σ = 1.899696 on the same sequence (by hand from
// Montgomery's formulas, calculated here): z₁ = 0.2·10 + 0.8·12.25 = 11.8,
// z₂ = 0.2·12 + 0.8·11.8 = 11.84, z₃ = 0.2·11 + 0.8·11.84 = 11.672; the
// half-width at i = 1 is 3σ·√(0.2/1.8·(1 − 0.8²)) = 3σ·0.2 = 1.139818, at
// i = 2 3σ·√(0.2/1.8·(1 − 0.8⁴)) = 3σ·0.256125 = 1.459680, and the
// asymptote 3σ·√(0.2/1.8) = σ = 1.899696.
func TestEWMAHand(t *testing.T) {
	x := []float64{10, 12, 11, 14, 13, 12, 15, 11}
	c := NewIndividuals(x)
	e := NewEWMA(x, c.Centre, c.Sigma, 0.2, 3)
	const tol = 2e-6 // six-decimal hand values, and σ itself rounded
	for i, want := range []float64{11.8, 11.84, 11.672} {
		if !closeTo(e.Z[i], want, tol) {
			t.Errorf("z%d = %.7f, want %.6f", i+1, e.Z[i], want)
		}
	}
	for i, w := range []float64{1.139818, 1.459680} {
		if !closeTo(e.UCL[i]-c.Centre, w, tol) || !closeTo(c.Centre-e.LCL[i], w, tol) {
			t.Errorf("half-width %d = %.7f, want %.6f", i+1, e.UCL[i]-c.Centre, w)
		}
	}
	long := NewEWMA(make([]float64, 200), c.Centre, c.Sigma, 0.2, 3)
	if got := long.UCL[199] - c.Centre; !closeTo(got, 1.899696, tol) {
		t.Errorf("asymptotic half-width %.7f, want 1.899696", got)
	}
}

// TestEWMAMontgomeryExample checks the limits of Montgomery's EWMA example
// (Introduction to Statistical Quality Control, EWMA section, the example
// with μ₀ = 10, σ = 1, λ = 0.10, L = 2.7; from memory): UCL 10.27 at the
// first sample, 10.36 at the second and 10.62 in the limit, printed to two
// decimals.
func TestEWMAMontgomeryExample(t *testing.T) {
	e := NewEWMA(make([]float64, 300), 10, 1, 0.1, 2.7)
	const tol = 0.005 // the printed two decimals
	for _, c := range []struct {
		i    int
		want float64
	}{{0, 10.27}, {1, 10.36}, {299, 10.62}} {
		if !closeTo(e.UCL[c.i], c.want, tol) || !closeTo(e.LCL[c.i], 20-c.want, tol) {
			t.Errorf("UCL at %d = %.4f, want %.2f", c.i+1, e.UCL[c.i], c.want)
		}
	}
}

// TestWesternElectric trips each rule exactly once on a sequence built for
// it against centre 0 and σ = 1 (the rules as the Western Electric
// Statistical Quality Control Handbook, 1956, states them).
func TestWesternElectric(t *testing.T) {
	tests := []struct {
		name string
		x    []float64
		want Signal
	}{
		{"one beyond 3σ", []float64{0.5, -0.5, 0.5, -0.5, 3.5, -0.5, 0.5, -0.5, 0.5, -0.5}, Signal{4, Beyond3}},
		{"one beyond 3σ below", []float64{0.5, -0.5, -3.2, 0.5, -0.5}, Signal{2, Beyond3}},
		{"two of three beyond 2σ", []float64{0.5, -0.5, 2.5, 0.5, 2.5, -0.5, 0.5, -0.5}, Signal{4, TwoOf3}},
		{"four of five beyond 1σ", []float64{-0.5, 1.5, 1.5, 0.5, 1.5, 1.5, -0.5, 0.5, -0.5}, Signal{5, FourOf5}},
		{"eight in a row", []float64{-0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5, -0.5}, Signal{8, EightInRow}},
		{"eight in a row below", []float64{0.3, -0.2, -0.4, -0.1, -0.9, -0.3, -0.2, -0.6, -0.1, 0.4}, Signal{8, EightInRow}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := WesternElectric(tt.x, 0, 1)
			if len(got) != 1 || got[0] != tt.want {
				t.Errorf("signals %v, want exactly %v", got, tt.want)
			}
		})
	}
	// A point on a zone limit is not beyond it, and an in-control
	// alternation trips nothing.
	if got := WesternElectric([]float64{3, -3, 2, 2, -2, -2, 1, 1, 1, 1}, 0, 1); len(got) != 0 {
		t.Errorf("points on the limits: %v", got)
	}
}
