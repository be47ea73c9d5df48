package section

import (
	"context"
	"errors"
	"math"
	"testing"
)

// FuzzSection varies the demo section's numbers. Validate must never panic;
// a section it accepts must mesh, and a coarse solve must either succeed with
// a physical Maxwell matrix or fail with a typed error.
func FuzzSection(f *testing.F) {
	f.Add(20.0, 1.2, 5.0, 14.0, 0.6, 3.0, 0.0, 0.0)
	f.Add(20.0, 0.0, 5.0, 14.0, 0.0, 1.0, 3.0, 12.0)
	f.Add(1.0, 1.2, 0.2, 0.5, 0.2, 10.0, -1.0, 0.0)
	f.Add(20.0, 1.2, 5.0, 14.0, 7.0, 3.0, 0.0, 0.0)
	f.Fuzz(func(t *testing.T, pp, cu, core, w, etch, er, off, x float64) {
		s := demoSection()
		s.Stackup.Layers[1].Thickness = pp * testMil
		s.Stackup.Layers[5].Thickness = pp * testMil
		s.Stackup.Layers[2].Thickness = cu * testMil
		s.Stackup.Layers[4].Thickness = cu * testMil
		s.Stackup.Layers[3].Thickness = core * testMil
		s.Stackup.Layers[3].Er = er
		s.Traces[0].Width = w * testMil
		s.Traces[0].Etch = etch * testMil
		s.Traces[0].X = x * testMil
		if err := s.Validate(); err != nil {
			var fe *FieldError
			if !errors.As(err, &fe) {
				t.Fatalf("Validate error %v is not a *FieldError", err)
			}
			return
		}
		// keep the fuzzer to cheap, well-proportioned cases
		if pp < 0.5 || pp > 100 || core < 0.2 || core > 100 || w < 0.5 || w > 100 || cu > 5 || math.Abs(off) > 50 || math.Abs(x) > 50 {
			return
		}
		o := off * testMil
		if err := s.checkOffset(o, "offsets"); err != nil {
			return
		}
		sv, err := newSolver(s, &Settings{Accuracy: 1e-2}, o, o)
		if err != nil {
			t.Fatal(err)
		}
		sol, err := sv.solveLevel(context.Background(), o, 0.4, &femWork{})
		if err != nil {
			var ce *ConvergenceError
			if !errors.As(err, &ce) {
				t.Fatalf("solve error %v is not a *ConvergenceError", err)
			}
			return
		}
		c := sol.C
		// C12 < 0, except that for traces many ground spacings apart the
		// coupling (e^(−π·s/b)) is below the discretisation error of this coarse
		// solve (about 1e−3 of the diagonal).
		if !(c[0][0] > 0 && c[1][1] > 0 && c[0][1] < 1e-3*math.Sqrt(c[0][0]*c[1][1]) && c[0][0]*c[1][1] > c[0][1]*c[0][1]) {
			t.Fatalf("unphysical C %v", c)
		}
	})
}
