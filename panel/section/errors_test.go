package section

import (
	"context"
	"errors"
	"strings"
	"testing"
)

func TestValidateErrors(t *testing.T) {
	cases := []struct {
		name, key, msg string
		mod            func(s *Section)
	}{
		{"etch leaves no top width", "traces[1].etch", "leaves no top width", func(s *Section) { s.Traces[1].Etch = 7 * testMil; s.Stackup.Layers[4].Thickness = 5 * testMil }},
		{"negative etch", "traces[0].etch", "must not be negative", func(s *Section) { s.Traces[0].Etch = -1e-6 }},
		{"etch deeper than copper", "traces[0].etch", "etch factor below 0.5", func(s *Section) { s.Traces[0].Etch = 3 * testMil }},
		{"etch on a zero-thickness strip", "traces[1].etch", "times the copper thickness", func(s *Section) { s.Stackup.Layers[4].Thickness = 0 }},
		{"zero width", "traces[1].width", "must be positive", func(s *Section) { s.Traces[1].Width = 0 }},
		{"unknown trace layer", "traces[0].layer", "not in the stackup", func(s *Section) { s.Traces[0].Layer = "L9" }},
		{"trace on a ground", "traces[0].layer", "is a ground plane", func(s *Section) { s.Traces[0].Layer = "L2" }},
		{"trace on a dielectric", "traces[1].layer", "is not copper", func(s *Section) { s.Stackup.Layers[3].Name = "C2"; s.Traces[1].Layer = "C2" }},
		{"ground not copper", "grounds[1]", "is not copper", func(s *Section) { s.Stackup.Layers[5].Name = "PP"; s.Grounds[1] = "PP" }},
		{"ground missing", "grounds[0]", "not in the stackup", func(s *Section) { s.Grounds[0] = "L1" }},
		{"three grounds", "grounds", "need 1 ground", func(s *Section) { s.Grounds = append(s.Grounds, "L3") }},
		{"er below 1", "stackup.layers[3].er", "at least 1", func(s *Section) { s.Stackup.Layers[3].Er = 0.5 }},
		{"zero dielectric", "stackup.layers[1].thickness", "must be positive", func(s *Section) { s.Stackup.Layers[1].Thickness = 0 }},
		{"negative copper", "stackup.layers[2].thickness", "must be positive", func(s *Section) { s.Stackup.Layers[2].Thickness = -1e-6 }},
		{"copper touches copper", "stackup.layers[1]", "touches copper", func(s *Section) {
			s.Stackup.Layers = append(s.Stackup.Layers[:1:1], append([]Layer{{Name: "LX", Kind: Copper, Thickness: 1e-5}}, s.Stackup.Layers[1:]...)...)
		}},
		{"upper trace listed second", "traces[0].layer", "list the upper trace first", func(s *Section) { s.Traces[0], s.Traces[1] = s.Traces[1], s.Traces[0] }},
		{"trace outside the grounds", "traces[0].layer", "not between the grounds", func(s *Section) {
			s.Stackup.Layers = append([]Layer{{Name: "L1", Kind: Copper, Thickness: 1e-5}, {Kind: Dielectric, Thickness: 1e-4, Er: 3}}, s.Stackup.Layers...)
			s.Traces[0].Layer = "L1"
		}},
		{"overlapping edge-coupled traces", "traces[1].x", "overlap", func(s *Section) { s.Traces[0].Layer = "L4"; s.Traces[0].X = 10 * testMil }},
		{"zero frequency", "frequency", "must be positive", func(s *Section) { s.Frequency = 0 }},
		{"negative length", "length", "must be positive", func(s *Section) { s.Length = -1 }},
		{"zero z_ref", "z_ref", "must be positive", func(s *Section) { s.ZRef = 0 }},
		{"zero tolerance", "spec.tolerance", "must be positive", func(s *Section) { s.Spec.Tolerance = 0 }},
		{"positive coupling", "spec.coupling", "must be negative", func(s *Section) { s.Spec.Coupling = 3 }},
		{"huge design offset", "design_offset", "not a lateral offset", func(s *Section) { s.DesignOffset = 2 }},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := demoSection()
			c.mod(s)
			err := s.Validate()
			var fe *FieldError
			if !errors.As(err, &fe) {
				t.Fatalf("Validate() = %v, want a *FieldError", err)
			}
			if fe.Section != "hybrid" || fe.Key != c.key {
				t.Errorf("error names section %q key %q, want %q %q (%v)", fe.Section, fe.Key, "hybrid", c.key, err)
			}
			if !strings.Contains(err.Error(), c.msg) || !strings.HasPrefix(err.Error(), `section "hybrid": `+c.key+": ") {
				t.Errorf("message %q lacks %q", err, c.msg)
			}
			if !errors.Is(err, ErrRange) {
				t.Errorf("error does not wrap ErrRange: %v", err)
			}
		})
	}
	if err := demoSection().Validate(); err != nil {
		t.Errorf("demo section: %v", err)
	}
}

func TestOffsetErrors(t *testing.T) {
	s := demoSection()
	_, err := Sweep(context.Background(), s, []float64{-2000 * testMil, 0}, nil)
	var fe *FieldError
	if !errors.As(err, &fe) || fe.Key != "offsets" || !strings.Contains(err.Error(), "wider than the section's domain") {
		t.Errorf("wide offsets: %v", err)
	}
	e := edgeCoupled(40*testMil, 10*testMil, 5*testMil, 1)
	_, err = Sweep(context.Background(), e, []float64{0, 15 * testMil}, nil)
	if !errors.As(err, &fe) || fe.Key != "offsets" || !strings.Contains(err.Error(), "overlap") {
		t.Errorf("overlapping offsets: %v", err)
	}
	_, err = Sweep(context.Background(), s, []float64{0}, nil)
	if !errors.As(err, &fe) || fe.Key != "offsets" {
		t.Errorf("one offset: %v", err)
	}
}

// TestConvergenceError: an accuracy the mesh limit cannot reach is a typed
// error naming the steps and the error reached, never a silent number.
func TestConvergenceError(t *testing.T) {
	_, err := Solve(demoSection(), 0, &Settings{Accuracy: 1e-12})
	var ce *ConvergenceError
	if !errors.As(err, &ce) {
		t.Fatalf("Solve at 1e-12: %v, want a *ConvergenceError", err)
	}
	if ce.Iterations < 1 || ce.Unknowns <= maxMeshNodes/2 || !strings.Contains(err.Error(), "did not converge") {
		t.Errorf("convergence error lacks detail: %+v (%v)", ce, err)
	}
}
