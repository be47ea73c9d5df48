package history

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/regdrift/regdrift/registration"
)

// simulateLoop runs the run-to-run loop on an invented process: lot n's
// material moves by mu(n) plus lot-to-lot noise of sd sigma; it is built
// with the artwork the controller recommended after lot n−1 (CAD size for
// the first), measured, and the movement recovered with the applied artwork
// taken out. It returns, per lot, the error of the setting recommended
// after that lot against the setting that cancels the next lot's mean
// movement.
func simulateLoop(rng *rand.Rand, n int, mu func(int) float64, sigma float64) []float64 {
	var moves []float64
	errs := make([]float64, n)
	applied := 0.0
	for i := range n {
		m := mu(i) + sigma*rng.NormFloat64()
		measured := (1+applied)*(1+m) - 1
		moves = append(moves, registration.MaterialScale(measured, applied))
		est := EWMAEstimate(moves, sigma, ControllerLambda)
		applied = registration.Setting(est.Movement)
		errs[i] = applied - registration.Setting(mu(i+1))
	}
	return errs
}

// TestControllerStep checks the EWMA controller on a step in the movement:
// the mean error of the recommendation k lots after the step is
// (1−λ)^k times the error just after it (Ingolfsson & Sachs 1993, the
// EWMA's geometric weights; for a known gain the deterministic part of the
// error decays by 1−λ per run). The process is invented: −200 ppm, stepping
// to −260 ppm at lot 30, lot-to-lot σ = 8 ppm.
func TestControllerStep(t *testing.T) {
	const ppm = 1e-6
	const reps, step0 = 2000, 30
	mu := func(i int) float64 {
		if i >= step0 {
			return -260 * ppm
		}
		return -200 * ppm
	}
	rng := rand.New(rand.NewPCG(1, 2))
	const n = 45
	var sum, sumsq [n]float64
	for range reps {
		e := simulateLoop(rng, n, mu, 8*ppm)
		for i, v := range e {
			sum[i] += v
			sumsq[i] += v * v
		}
	}
	mean := func(i int) (m, se float64) {
		m = sum[i] / reps
		return m, math.Sqrt((sumsq[i]/reps - m*m) / reps)
	}
	// The recommendation made after lot step0−1 aims at the old movement
	// while lot step0 has the new one: its error is the step in setting
	// terms, e₀ ≈ Setting(−200) − Setting(−260) ≈ −60 ppm.
	e0 := registration.Setting(-200*ppm) - registration.Setting(-260*ppm)
	for k := 0; k <= 12; k++ {
		got, se := mean(step0 - 1 + k)
		want := math.Pow(1-ControllerLambda, float64(k)) * e0
		// Four standard errors of the replicated mean: a seeded run, and a
		// false alarm of a correct controller would need a 4σ excursion.
		// The Setting curve is not quite linear: the decay of the setting
		// error differs from that of the movement error by |Δm| ≈ 6e-5
		// relative, below 0.004 ppm here, added to the tolerance.
		tol := 4*se + 1e-4*math.Abs(want)
		if math.Abs(got-want) > tol {
			t.Errorf("k = %d: mean error %.3f ppm, want (1−λ)^k·e₀ = %.3f ppm (± %.3f)", k, got/ppm, want/ppm, tol/ppm)
		}
	}
}

// TestControllerUnbiased checks that without a shift the recommendation is
// unbiased and scatters by σ·√(λ/(2−λ)), the stationary standard deviation
// of an EWMA (Montgomery, EWMA section; Ingolfsson & Sachs 1993).
func TestControllerUnbiased(t *testing.T) {
	const ppm = 1e-6
	const reps, n, sigma = 4000, 40, 8 * ppm
	mu := func(int) float64 { return -180 * ppm }
	rng := rand.New(rand.NewPCG(3, 4))
	var sum, sumsq float64
	for range reps {
		e := simulateLoop(rng, n, mu, sigma)
		v := e[n-1]
		sum += v
		sumsq += v * v
	}
	m := sum / reps
	sd := math.Sqrt(sumsq/reps - m*m)
	lam := ControllerLambda
	// After 40 lots the start's weight (1−λ)^78 is nil: the stationary value.
	wantSD := sigma * math.Sqrt(lam/(2-lam))
	// Four standard errors, as above; the SD's own standard error is
	// sd/√(2·reps) for normal data.
	if se := sd / math.Sqrt(reps); math.Abs(m) > 4*se {
		t.Errorf("mean error %.3f ppm, want 0 (± %.3f)", m/ppm, 4*se/ppm)
	}
	if se := wantSD / math.Sqrt(2*reps); math.Abs(sd-wantSD) > 4*se {
		t.Errorf("sd %.3f ppm, want %.3f ppm (± %.3f)", sd/ppm, wantSD/ppm, 4*se/ppm)
	}
	// The SE the estimate reports is the same stationary value.
	x := make([]float64, n)
	if est := EWMAEstimate(x, sigma, lam); math.Abs(est.SE-wantSD) > 1e-9*wantSD {
		t.Errorf("reported SE %.4f ppm, want %.4f", est.SE/ppm, wantSD/ppm)
	}
}
