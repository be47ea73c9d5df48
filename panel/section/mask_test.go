package section

import (
	"errors"
	"math"
	"testing"
)

// edgeMicro returns an edge-coupled microstrip pair (an invented section):
// traces w wide, t thick, gap s, on a core h thick of εr er over one ground.
func edgeMicro(h, w, s, t, er float64) *Section {
	return &Section{Name: "edge-micro", Stackup: Stackup{Layers: []Layer{
		{Name: "T", Kind: Copper, Thickness: t},
		{Name: "K1", Kind: Dielectric, Thickness: h, Er: er, Core: true},
		{Name: "G", Kind: Copper, Thickness: 1.4 * testMil},
	}}, Traces: [2]Trace{{Layer: "T", Width: w, X: w + s}, {Layer: "T", Width: w}},
		Grounds: []string{"G"}, Frequency: 5e9, ZRef: 50, Spec: Spec{Coupling: -10, Tolerance: 1}}
}

func withMask(s *Section, tl, tc, er float64) *Section {
	c := *s
	c.Stackup.Layers = append([]Layer(nil), s.Stackup.Layers...)
	c.Stackup.Mask = &Mask{OverLaminate: tl, OverCopper: tc, Er: er}
	return &c
}

// TestMaskTrends checks the physics of a solder mask over an edge-coupled
// microstrip pair: a coat of εr = 1 changes nothing (within the solve
// accuracy: the mesh has extra lines), a real coat raises both modes' εeff
// and lowers the odd impedance more than the even (the odd mode's field is
// concentrated in the gap, which the mask fills; common practice, and the
// trend of every published coated-microstrip study).
func TestMaskTrends(t *testing.T) {
	set := &Settings{Accuracy: 2e-4}
	bare := edgeMicro(10*testMil, 18*testMil, 6*testMil, 1.4*testMil, 3.48)
	l0 := solveLines(t, bare, set)
	l1 := solveLines(t, withMask(bare, 1.0*testMil, 0.6*testMil, 1), set)
	l2 := solveLines(t, withMask(bare, 1.0*testMil, 0.6*testMil, 3.8), set)
	// Two solves at accuracy 2e-4 each: C differs by at most about 4e-4.
	const tolSame = 4 * 2e-4
	for i := range 2 {
		for j := range 2 {
			if d := math.Abs(l1.C[i][j]-l0.C[i][j]) / math.Sqrt(l0.C[i][i]*l0.C[j][j]); d > tolSame {
				t.Errorf("mask εr 1: C[%d][%d] %.6g, bare %.6g (difference %.2e)", i, j, l1.C[i][j], l0.C[i][j], d)
			}
		}
	}
	t.Logf("bare: εeff %.4f %.4f, Ze %.3f Zo %.3f; mask εr 3.8: εeff %.4f %.4f, Ze %.3f Zo %.3f",
		l0.EpsEff[0], l0.EpsEff[1], l0.ZEven, l0.ZOdd, l2.EpsEff[0], l2.EpsEff[1], l2.ZEven, l2.ZOdd)
	for m := range 2 {
		if !(l2.EpsEff[m] > l0.EpsEff[m]) {
			t.Errorf("mode %d: εeff %.4f with mask, %.4f bare: the mask must raise it", m, l2.EpsEff[m], l0.EpsEff[m])
		}
	}
	de, do := l2.ZEven/l0.ZEven-1, l2.ZOdd/l0.ZOdd-1
	if !(do < de && do < 0) {
		t.Errorf("mask changes Ze by %+.3f %% and Zo by %+.3f %%: the odd impedance must fall more", 100*de, 100*do)
	}
}

func solveLines(t *testing.T, s *Section, set *Settings) Lines {
	t.Helper()
	sol, err := Solve(s, s.NominalOffset(), set)
	if err != nil {
		t.Fatal(err)
	}
	return NewLines(sol.C, sol.C0)
}

func TestMaskErrors(t *testing.T) {
	bare := edgeMicro(10*testMil, 18*testMil, 6*testMil, 1.4*testMil, 3.48)
	strip := demoSection()
	strip.Stackup.Mask = &Mask{OverLaminate: testMil, OverCopper: testMil, Er: 3.8}
	for _, c := range []struct {
		name string
		s    *Section
		key  string
	}{
		{"stripline", strip, "stackup.mask"},
		{"negative", withMask(bare, -testMil, testMil, 3.8), "stackup.mask.thickness"},
		{"zero over copper", withMask(bare, testMil, 0, 3.8), "stackup.mask.over_copper"},
		{"er below 1", withMask(bare, testMil, testMil, 0.5), "stackup.mask.er"},
		{"fills the gap", withMask(bare, testMil, 3*testMil, 3.8), "traces[1].x"},
	} {
		err := c.s.Validate()
		var fe *FieldError
		if !errors.As(err, &fe) || fe.Key != c.key || !errors.Is(err, ErrRange) {
			t.Errorf("%s: error %v, want a FieldError for %s", c.name, err, c.key)
		}
	}
}
