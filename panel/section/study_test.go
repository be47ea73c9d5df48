package section

import (
	"context"
	"fmt"
	"math"
	"testing"
	"time"
)

// demoReference holds the demo section's capacitances at zero offset from a
// solve at accuracy 2e−5 (levels 4.1/8.2/16.4, 282,392 unknowns on the fine
// mesh, estimated error 2e−7) [calc: this solver, a regression value; the
// published checks are in published_test.go].
var demoReference = struct{ C11, C12, C0_11 float64 }{1.530148e-10, -9.370690e-11, 4.785617e-11}

// Measured on the demo section (go test -v -run ConvergenceStudy): the
// single meshes' observed order between successive levels from 0.5 to 2.8 is
// 1.86 to 2.12 (0.35 to 0.5 is pre-asymptotic, 1.56); Richardson
// extrapolation gains 9.5 to 40 times over the finer mesh of its pair; the
// extrapolated error is 7.6e-4 at level 0.5 and at most 7.6e-5 at levels 1.0
// and 1.4 (29 times below level 0.5 at 1.4).
const (
	// orderSlack is the allowed distance of the observed order from 2 (the
	// h² of the energy-form capacitance): twice the largest measured, 0.14,
	// rounded up; an order of 1.6, as before the element floor scaled with
	// the level, fails.
	orderSlack = 0.3
	// minGain is the least gain of an extrapolation over the finer mesh of
	// its pair: about half the smallest measured, 9.5 (at level 0.5, the
	// coarsest pair); a broken extrapolation gains nothing.
	minGain = 5
	// fineErr bounds the extrapolated error at levels 1.0 and 1.4: twice the
	// largest measured, 7.6e-5.
	fineErr = 2 * 7.6e-5
)

// studyErr is the error measure of the study: the largest of the relative
// errors of C11 and C0_11 and of C12 relative to C11 (as the solver's
// estimate takes it).
func studyErr(c, c0 [2][2]float64) float64 {
	ref := demoReference
	return math.Max(math.Abs(c[0][0]/ref.C11-1), math.Max(math.Abs(c[0][1]-ref.C12)/ref.C11, math.Abs(c0[0][0]/ref.C0_11-1)))
}

// TestConvergenceStudy prints the convergence table of doc.go and checks
// that the single meshes converge at second order, that the Richardson-
// extrapolated values gain on them and converge to the reference, and that
// the error estimate tracks the true error.
func TestConvergenceStudy(t *testing.T) {
	if testing.Short() {
		t.Skip("convergence study")
	}
	sv, err := newSolver(demoSection(), nil, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	ref := demoReference
	w := &femWork{}
	t.Logf("%-6s %8s %5s %12s %10s %10s %10s %10s %9s", "level", "unknowns", "band", "C11 pF/m", "err C11", "err C12", "err C0_11", "est", "ms/level")
	single := map[float64]float64{} // error of each single mesh
	levels := []float64{0.35, 0.5, 0.7, 1.0, 1.4, 2.0, 2.8}
	for i, lev := range levels {
		t0 := time.Now()
		r, err := sv.levelAt(0, lev, w)
		if err != nil {
			t.Fatal(err)
		}
		dt := time.Since(t0)
		single[lev] = studyErr(r.C, r.C0)
		line := fmt.Sprintf("%-6.2f %8d %5d %12.5f %+10.2e %+10.2e %+10.2e", lev, r.Unknowns, w.kb, r.C[0][0]*1e12,
			r.C[0][0]/ref.C11-1, r.C[0][1]/ref.C12-1, r.C0[0][0]/ref.C0_11-1)
		t.Logf("%s %10s %9.1f", line, "", float64(dt.Microseconds())/1000)
		if i >= 2 {
			prev := levels[i-1]
			p := math.Log(single[prev]/single[lev]) / math.Log(lev/prev)
			t.Logf("%-6.2f observed order from level %g: %.2f", lev, prev, p)
			if math.Abs(p-2) > orderSlack {
				t.Errorf("levels %g to %g: observed order %.2f, want 2 ± %g", prev, lev, p, orderSlack)
			}
		}
	}
	t.Logf("Richardson triples (L/√2, L, 2L), extrapolated from L and 2L:")
	worstRatio := 0.0
	ext := map[float64]float64{}
	for _, lev := range []float64{0.5, 0.7, 1.0, 1.4} {
		t0 := time.Now()
		sol, err := sv.solveLevel(context.Background(), 0, lev, w)
		if err != nil {
			t.Fatal(err)
		}
		dt := time.Since(t0)
		e := studyErr(sol.C, sol.C0)
		ext[lev] = e
		est := sol.Convergence.EstimatedError
		worstRatio = math.Max(worstRatio, e/est)
		t.Logf("%-6.2f %8d %5d %12.5f %+10.2e %+10.2e %+10.2e %10.2e %9.1f", lev, sol.Convergence.Unknowns, sol.Convergence.BandWidth, sol.C[0][0]*1e12,
			sol.C[0][0]/ref.C11-1, sol.C[0][1]/ref.C12-1, sol.C0[0][0]/ref.C0_11-1, est, float64(dt.Microseconds())/1000)
		if est <= 1e-3 && e > 1e-3 {
			t.Errorf("level %g: estimate %.2e accepts an error %.2e above 0.1 %%", lev, est, e)
		}
		t.Logf("%-6.2f error %.2e, %.1f times below the level-%g mesh", lev, e, single[2*lev]/e, 2*lev)
		if g := single[2*lev] / e; g < minGain {
			t.Errorf("level %g: extrapolated error %.2e gains only %.1f× over the level-%g mesh (%.2e)", lev, e, g, 2*lev, single[2*lev])
		}
	}
	if e := math.Max(ext[1.0], ext[1.4]); e > fineErr {
		t.Errorf("extrapolated error at levels 1.0 and 1.4 up to %.2e, want ≤ %.2e", e, fineErr)
	}
	if ext[1.4] > ext[0.5]/10 {
		t.Errorf("extrapolated error %.2e at level 1.4 not ten times below %.2e at level 0.5", ext[1.4], ext[0.5])
	}
	t.Logf("largest true error / estimate: %.2f", worstRatio)
	if worstRatio > 1 {
		t.Errorf("the estimate understates the true error by %.2f×", worstRatio)
	}
}
