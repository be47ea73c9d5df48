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

// TestConvergenceStudy prints the convergence table of doc.go and checks that
// the Richardson-extrapolated values converge and that the error estimate
// tracks the true error.
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
	var prev [2][2]float64
	worstRatio := 0.0
	for _, lev := range []float64{0.35, 0.5, 0.7, 1.0, 1.4, 2.0} {
		t0 := time.Now()
		r, err := sv.levelAt(0, lev, w)
		if err != nil {
			t.Fatal(err)
		}
		dt := time.Since(t0)
		line := fmt.Sprintf("%-6.2f %8d %5d %12.5f %+10.2e %+10.2e %+10.2e", lev, r.Unknowns, w.kb, r.C[0][0]*1e12,
			r.C[0][0]/ref.C11-1, r.C[0][1]/ref.C12-1, r.C0[0][0]/ref.C0_11-1)
		t.Logf("%s %10s %9.1f", line, "", float64(dt.Microseconds())/1000)
		_ = prev
		prev = r.C
	}
	t.Logf("Richardson triples (L/√2, L, 2L), extrapolated from L and 2L:")
	for _, lev := range []float64{0.5, 0.7, 1.0, 1.4} {
		t0 := time.Now()
		sol, err := sv.solveLevel(context.Background(), 0, lev, w)
		if err != nil {
			t.Fatal(err)
		}
		dt := time.Since(t0)
		e := math.Max(math.Abs(sol.C[0][0]/ref.C11-1), math.Max(math.Abs(sol.C[0][1]/ref.C12-1)*math.Abs(ref.C12)/ref.C11, math.Abs(sol.C0[0][0]/ref.C0_11-1)))
		est := sol.Convergence.EstimatedError
		worstRatio = math.Max(worstRatio, e/est)
		t.Logf("%-6.2f %8d %5d %12.5f %+10.2e %+10.2e %+10.2e %10.2e %9.1f", lev, sol.Convergence.Unknowns, sol.Convergence.BandWidth, sol.C[0][0]*1e12,
			sol.C[0][0]/ref.C11-1, sol.C[0][1]/ref.C12-1, sol.C0[0][0]/ref.C0_11-1, est, float64(dt.Microseconds())/1000)
		if est <= 1e-3 && e > 1e-3 {
			t.Errorf("level %g: estimate %.2e accepts an error %.2e above 0.1 %%", lev, est, e)
		}
	}
	t.Logf("largest true error / estimate: %.2f", worstRatio)
	if worstRatio > 1 {
		t.Errorf("the estimate understates the true error by %.2f×", worstRatio)
	}
}
