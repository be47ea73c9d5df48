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

// TestMaskGeometries solves the other shapes a mask can take: over
// zero-thickness strips, over an outer copper layer without traces (traces
// embedded below), over a dielectric outer face, and a coat over the
// laminate thicker than the copper. Each must solve, and a coat of εr 1
// must leave C as it is.
func TestMaskGeometries(t *testing.T) {
	embedded := &Section{Name: "embedded", Stackup: Stackup{Layers: []Layer{
		{Name: "L1", Kind: Copper, Thickness: 1.4 * testMil},
		{Name: "P1", Kind: Dielectric, Thickness: 4 * testMil, Er: 3.6},
		{Name: "L2", Kind: Copper, Thickness: 1.2 * testMil},
		{Name: "K1", Kind: Dielectric, Thickness: 10 * testMil, Er: 3.48, Core: true},
		{Name: "G", Kind: Copper, Thickness: 1.4 * testMil},
	}}, Traces: [2]Trace{{Layer: "L2", Width: 12 * testMil, Etch: 0.4 * testMil, X: 20 * testMil}, {Layer: "L2", Width: 12 * testMil, Etch: 0.4 * testMil}},
		Grounds: []string{"G"}, Frequency: 5e9, ZRef: 50, Spec: Spec{Coupling: -10, Tolerance: 1}}
	dielTop := &Section{Name: "diel-top", Stackup: Stackup{Layers: embedded.Stackup.Layers[1:]},
		Traces: embedded.Traces, Grounds: embedded.Grounds, Frequency: 5e9, ZRef: 50, Spec: embedded.Spec}
	for _, c := range []struct {
		name   string
		s      *Section
		tl, tc float64
	}{
		{"thin strips", edgeMicro(10*testMil, 18*testMil, 6*testMil, 0, 3.48), 1.0 * testMil, 0.6 * testMil},
		{"thick coat", edgeMicro(10*testMil, 18*testMil, 6*testMil, 1.4*testMil, 3.48), 2.0 * testMil, 0.6 * testMil},
		{"embedded", embedded, 1.0 * testMil, 0.6 * testMil},
		{"dielectric outer face", dielTop, 1.0 * testMil, 0.6 * testMil},
	} {
		bare, err := Solve(c.s, c.s.NominalOffset(), nil)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		air, err := Solve(withMask(c.s, c.tl, c.tc, 1), c.s.NominalOffset(), nil)
		if err != nil {
			t.Fatalf("%s, mask εr 1: %v", c.name, err)
		}
		real, err := Solve(withMask(c.s, c.tl, c.tc, 4), c.s.NominalOffset(), nil)
		if err != nil {
			t.Fatalf("%s, mask εr 4: %v", c.name, err)
		}
		// Two solves at the default accuracy: within twice 1e−3.
		if d := relDiff(air.C, bare.C); d > 2e-3 {
			t.Errorf("%s: a mask of εr 1 moves C by %.2e", c.name, d)
		}
		if !(real.C[1][1] > bare.C[1][1]) {
			t.Errorf("%s: a mask of εr 4 must raise C11 (%.6g, bare %.6g)", c.name, real.C[1][1], bare.C[1][1])
		}
		t.Logf("%s: C11 bare %.4f, εr-1 coat %.4f, εr-4 coat %.4f pF/m", c.name, bare.C[1][1]*1e12, air.C[1][1]*1e12, real.C[1][1]*1e12)
		// The derivatives keep the band structure also where the coat's
		// top meets the top of its coat over the copper ("thick coat":
		// 2.0 = 1.4 + 0.6 mil).
		solveSens(t, withMask(c.s, c.tl, c.tc, 4), c.s.NominalOffset(), 1e-3, nil)
	}
}
