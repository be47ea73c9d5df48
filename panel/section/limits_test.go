package section

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"
)

// TestMeshLimitError: a target finer than the section can start at fails at
// once with the real cause — the mesh over the node limit, with the numbers —
// not with the cancellation of the sibling workers it caused.
func TestMeshLimitError(t *testing.T) {
	s := sameCoreSection()
	for _, acc := range []float64{2e-5, 1e-5, 1e-12} {
		_, err := Sweep(context.Background(), s, DefaultOffsets(s, 0), &Settings{Accuracy: acc, Workers: 2})
		var ce *ConvergenceError
		if !errors.As(err, &ce) || !errors.Is(err, ErrMeshLimit) || errors.Is(err, context.Canceled) {
			t.Fatalf("accuracy %g: %v, want a *ConvergenceError matching ErrMeshLimit", acc, err)
		}
		if ce.Limit != maxMeshNodes || ce.Unknowns <= ce.Limit || ce.Target != acc || !(ce.Finest > acc) || ce.Level <= 0 {
			t.Errorf("accuracy %g: error lacks the numbers: %+v", acc, ce)
		}
		if msg := err.Error(); !strings.Contains(msg, "over the limit of 400000") || !strings.Contains(msg, "finest accuracy") {
			t.Errorf("accuracy %g: message %q", acc, msg)
		}
	}
}

// TestFinestAccuracy: at FinestAccuracy the first mesh triple of every
// topology of the sweep fits under the node limit; 10 % finer (beyond the
// 2 % resolution of the search), one does not.
func TestFinestAccuracy(t *testing.T) {
	for _, s := range []*Section{sameCoreSection(), microstripSec(10*testMil, 10*testMil, 4.5)} {
		offs := DefaultOffsets(s, 0)
		f, err := FinestAccuracy(s, offs)
		if err != nil {
			t.Fatal(err)
		}
		if f < MinAccuracy || f > 1e-3 {
			t.Fatalf("%s: FinestAccuracy %g outside [MinAccuracy, 1e-3]", s.Name, f)
		}
		fits := func(acc float64) bool {
			sv, err := newSolver(s, &Settings{Accuracy: acc}, offs[0], offs[len(offs)-1])
			if err != nil {
				t.Fatal(err)
			}
			for k := range sv.topos {
				if sv.plan(k, 2*startLevel(acc)).unknownsEstimate() > maxMeshNodes {
					return false
				}
			}
			return true
		}
		if !fits(f) {
			t.Errorf("%s: at FinestAccuracy %g the first meshes exceed the node limit", s.Name, f)
		}
		if f > MinAccuracy && fits(f/1.1) {
			t.Errorf("%s: 10 %% below FinestAccuracy %g the first meshes still fit", s.Name, f)
		}
		t.Logf("%s: FinestAccuracy %.3g", s.Name, f)
	}
}

// TestSweepCallerCancel: the caller's own cancellation is reported as such.
func TestSweepCallerCancel(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Sweep(ctx, demoSection(), DefaultOffsets(demoSection(), 0), nil); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled sweep: %v, want context.Canceled", err)
	}
}

// TestPlausibilityBounds: absurd but finite numbers are a *FieldError naming
// the key (wrapping ErrRange) from every entry point, never a panic or a
// number.
func TestPlausibilityBounds(t *testing.T) {
	cases := []struct {
		name, key string
		edit      func(s *Section)
		set       *Settings
	}{
		{"er 1e300", "stackup.layers[3].er", func(s *Section) { s.Stackup.Layers[3].Er = 1e300 }, nil},
		{"er 101", "stackup.layers[1].er", func(s *Section) { s.Stackup.Layers[1].Er = 101 }, nil},
		{"width 1e308", "traces[0].width", func(s *Section) { s.Traces[0].Width = 1e308 }, nil},
		{"etch 1e300", "traces[1].etch", func(s *Section) { s.Traces[1].Etch = 1e300 }, nil},
		{"thickness 2 m", "stackup.layers[5].thickness", func(s *Section) { s.Stackup.Layers[5].Thickness = 2 }, nil},
		{"copper 1e300", "stackup.layers[2].thickness", func(s *Section) { s.Stackup.Layers[2].Thickness = 1e300 }, nil},
		{"frequency 2 THz", "frequency", func(s *Section) { s.Frequency = 2e12 }, nil},
		{"length 1e300", "length", func(s *Section) { s.Length = 1e300 }, nil},
		{"z_ref 1e6", "z_ref", func(s *Section) { s.ZRef = 1e6 }, nil},
		{"accuracy NaN", "accuracy", func(*Section) {}, &Settings{Accuracy: math.NaN()}},
		{"accuracy Inf", "accuracy", func(*Section) {}, &Settings{Accuracy: math.Inf(1)}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := demoSection()
			c.edit(s)
			offs := DefaultOffsets(s, 0)
			check := func(what string, err error) {
				t.Helper()
				var fe *FieldError
				if !errors.As(err, &fe) || fe.Key != c.key || !errors.Is(err, ErrRange) {
					t.Errorf("%s: %v, want a *FieldError for %s", what, err, c.key)
				}
			}
			if c.set == nil {
				check("Validate", s.Validate())
				_, err := FinestAccuracy(s, nil)
				check("FinestAccuracy", err)
			}
			_, err := Solve(s, 0, c.set)
			check("Solve", err)
			_, err = Sweep(context.Background(), s, offs, c.set)
			check("Sweep", err)
			_, _, err = CachedSweep(context.Background(), s, offs, c.set, t.TempDir(), false)
			check("CachedSweep", err)
		})
	}
}

// TestHugeSpan: a span of 1e300 mil or +Inf (a registration sigma of that
// size) gives offsets that CachedSweep rejects as bad offsets before they
// reach the cache key, not a panic.
func TestHugeSpan(t *testing.T) {
	s := demoSection()
	for _, span := range []float64{1e300 * testMil, math.Inf(1), math.NaN(), math.MaxFloat64} {
		offs := DefaultOffsets(s, span)
		_, _, err := CachedSweep(context.Background(), s, offs, nil, t.TempDir(), false)
		var fe *FieldError
		if !errors.As(err, &fe) || fe.Key != "offsets" {
			t.Errorf("span %g: %v, want a *FieldError for offsets", span, err)
		}
	}
	// and CacheKey itself never panics, whatever it is given
	_ = CacheKey(s, []float64{math.Inf(-1), math.NaN()}, &Settings{Accuracy: math.NaN()})
}

// TestBoundsCorners: sections at the corners of the plausibility bounds solve
// or fail with a typed error, and a solution gives line parameters without a
// panic.
func TestBoundsCorners(t *testing.T) {
	if testing.Short() {
		t.Skip("solves large meshes")
	}
	cases := []struct {
		name string
		edit func(s *Section)
	}{
		{"er 100", func(s *Section) { s.Stackup.Layers[3].Er = MaxEr; s.Stackup.Layers[1].Er = 1 }},
		{"1 THz", func(s *Section) { s.Frequency = MaxFrequency }},
		{"prepreg 1 m", func(s *Section) { s.Stackup.Layers[1].Thickness = MaxDimension }},
		{"width 0.5 m", func(s *Section) { s.Traces[0].Width = MaxDimension / 2; s.Traces[1].Width = MaxDimension / 2 }},
		{"length 1 m", func(s *Section) { s.Length = MaxDimension }},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := demoSection()
			c.edit(s)
			sol, err := Solve(s, s.NominalOffset()+testMil, &Settings{Accuracy: 1e-2})
			if err != nil {
				var ce *ConvergenceError
				var fe *FieldError
				if !errors.As(err, &ce) && !errors.As(err, &fe) {
					t.Fatalf("untyped error %v", err)
				}
				t.Logf("%v", err)
				return
			}
			l := NewLines(sol.C, sol.C0)
			length := s.Length
			if length == 0 {
				length = l.QuarterWave(s.Frequency)
			}
			c, d := l.couplingAt(s.Frequency, length, s.ZRef)
			pf := l.peakFrequency(s.Frequency, length, s.ZRef)
			if !finite(c) || !finite(d) || !finite(pf) {
				t.Errorf("coupling %g dB, directivity %g dB, peak %g Hz", c, d, pf)
			}
		})
	}
}

// TestCheckMaxwell: matrices that are not Maxwell matrices stop a solve with
// ErrNotMaxwell before NewLines could panic on them.
func TestCheckMaxwell(t *testing.T) {
	sv := &solver{s: demoSection()}
	good := [2][2]float64{{150e-12, -40e-12}, {-40e-12, 150e-12}}
	good0 := scaled(good, 1/3.0)
	if err := sv.checkMaxwell(0, Convergence{C: good, C0: good0}); err != nil {
		t.Fatalf("good matrices: %v", err)
	}
	for name, c := range map[string][2][2]float64{
		"NaN":               {{math.NaN(), 0}, {0, 1e-10}},
		"not definite":      {{1e-10, -2e-10}, {-2e-10, 1e-10}},
		"negative diagonal": {{-1e-10, 0}, {0, 1e-10}},
		"not symmetric":     {{1e-10, -1e-11}, {-2e-11, 1e-10}},
		"below vacuum":      scaled(good0, 0.9),
	} {
		if err := sv.checkMaxwell(0, Convergence{C: c, C0: good0}); !errors.Is(err, ErrNotMaxwell) {
			t.Errorf("%s: %v, want ErrNotMaxwell", name, err)
		}
	}
}
