package section

import (
	"context"
	"math"
	"testing"
)

// TestOpenBoundary: the microstrip's Dirichlet box is far enough that moving
// it twice as far changes C by less than 0.1 % (the default accuracy). The
// box at distance R truncates a dipole field, an error ∝ (h/R)².
func TestOpenBoundary(t *testing.T) {
	s := microstripSec(10*testMil, 20*testMil, 4.5)
	var c [2][2][2]float64
	for i, f := range []float64{1, 2} {
		sv, err := newSolver(s, nil, s.NominalOffset(), s.NominalOffset())
		if err != nil {
			t.Fatal(err)
		}
		sv.g.openSpans *= f
		sol, err := sv.solve(context.Background(), s.NominalOffset(), &femWork{})
		if err != nil {
			t.Fatal(err)
		}
		c[i] = [2][2]float64{{sol.C[1][1], sol.C0[1][1]}}
	}
	for k, name := range []string{"C", "C0"} {
		if d := math.Abs(c[1][0][k]/c[0][0][k] - 1); d > 1e-3 {
			t.Errorf("%s changes by %.2e when the open boundary moves twice as far", name, d)
		} else {
			t.Logf("%s changes by %.1e when the open boundary moves twice as far", name, d)
		}
	}
}

// TestGeometries solves sections unlike the demo and checks what physics
// fixes without a formula: positive definite Maxwell matrices, kC and kL in
// (0, 1), εeff between the smallest and largest εr, mirror symmetry where the
// section has it.
func TestGeometries(t *testing.T) {
	flip := func(s *Section) *Section { // the same microstrip upside down
		c := *s
		ls := c.Stackup.Layers
		c.Stackup.Layers = make([]Layer, len(ls))
		for i, l := range ls {
			c.Stackup.Layers[len(ls)-1-i] = l
		}
		c.Traces[0], c.Traces[1] = c.Traces[1], c.Traces[0]
		c.Traces[0].X, c.Traces[1].X = c.Traces[1].X, c.Traces[0].X
		return &c
	}
	edgeMicro := func() *Section {
		return &Section{Name: "edge-micro", Stackup: Stackup{Layers: []Layer{
			{Name: "L1", Kind: Copper, Thickness: 1.9 * testMil},
			{Kind: Dielectric, Thickness: 10 * testMil, Er: 3.48, Core: true},
			{Name: "L2", Kind: Copper, Thickness: 1.4 * testMil},
		}}, Traces: [2]Trace{{Layer: "L1", Width: 18 * testMil, Etch: 0.6 * testMil, X: 26 * testMil}, {Layer: "L1", Width: 18 * testMil, Etch: 0.6 * testMil}},
			Grounds: []string{"L2"}, Frequency: 5e9, ZRef: 50, Spec: Spec{Coupling: -15, Tolerance: 1}}
	}
	twoCores := func() *Section { // traces on different cores, prepreg between
		return &Section{Name: "two-cores", Stackup: Stackup{Layers: []Layer{
			{Name: "L2", Kind: Copper, Thickness: 1.4 * testMil},
			{Kind: Dielectric, Thickness: 10 * testMil, Er: 3.48, Core: true},
			{Name: "L3", Kind: Copper, Thickness: 1.4 * testMil},
			{Kind: Dielectric, Thickness: 4 * testMil, Er: 3.55},
			{Kind: Dielectric, Thickness: 4 * testMil, Er: 3.7},
			{Name: "L4", Kind: Copper, Thickness: 1.4 * testMil},
			{Kind: Dielectric, Thickness: 10 * testMil, Er: 3.48, Core: true},
			{Name: "L5", Kind: Copper, Thickness: 1.4 * testMil},
		}}, Traces: [2]Trace{{Layer: "L3", Width: 10 * testMil, Etch: 0.5 * testMil}, {Layer: "L4", Width: 10 * testMil, Etch: 0.5 * testMil}},
			Grounds: []string{"L2", "L5"}, Frequency: 3e9, ZRef: 50, Spec: Spec{Coupling: -6, Tolerance: 0.5}}
	}
	broadMicro := func() *Section { // traces on L1 (outer) and L2 over ground L3
		return &Section{Name: "broadside-micro", Stackup: Stackup{Layers: []Layer{
			{Name: "L1", Kind: Copper, Thickness: 1.9 * testMil},
			{Kind: Dielectric, Thickness: 4 * testMil, Er: 3.0, Core: true},
			{Name: "L2", Kind: Copper, Thickness: 1.4 * testMil},
			{Kind: Dielectric, Thickness: 10 * testMil, Er: 3.5},
			{Name: "L3", Kind: Copper, Thickness: 1.4 * testMil},
		}}, Traces: [2]Trace{{Layer: "L1", Width: 10 * testMil, Etch: 0.6 * testMil}, {Layer: "L2", Width: 12 * testMil, Etch: 0.4 * testMil}},
			Grounds: []string{"L3"}, Frequency: 2e9, ZRef: 50, Spec: Spec{Coupling: -6, Tolerance: 1}}
	}
	unusedLayer := func() *Section { // a signal layer between the grounds that carries no trace here
		s := twoCores()
		s.Name = "unused-layer"
		s.Stackup.Layers = append(s.Stackup.Layers[:4:4], append([]Layer{{Name: "LX", Kind: Copper, Thickness: 0.7 * testMil}}, s.Stackup.Layers[4:]...)...)
		return s
	}
	for _, c := range []struct {
		s           *Section
		erLo, erHi  float64
		mirrorAtNom bool
	}{
		{edgeMicro(), 1, 3.48, true},
		{flip(edgeMicro()), 1, 3.48, true},
		{offsetDesign(), 3, 3.55, false},
		{twoCores(), 3.48, 3.7, false},
		{broadMicro(), 1, 3.5, false},
		{unusedLayer(), 3.48, 3.7, false},
	} {
		t.Run(c.s.Name, func(t *testing.T) {
			s := c.s
			nom := s.NominalOffset()
			offs := []float64{nom - 2*testMil, nom - 1*testMil, nom, nom + 1*testMil, nom + 2*testMil}
			cv, err := Sweep(context.Background(), s, offs, nil)
			if err != nil {
				t.Fatal(err)
			}
			for _, p := range cv.Points {
				det := p.C[0][0]*p.C[1][1] - p.C[0][1]*p.C[1][0]
				if !(p.C[0][1] < 0 && det > 0 && p.KC > 0 && p.KC < 1 && p.KL > 0 && p.KL < 1) {
					t.Errorf("offset %s: C %v, kC %g, kL %g", mils(p.Offset), p.C, p.KC, p.KL)
				}
				for m := range 2 {
					if e := p.EpsEff[m]; e < c.erLo-1e-9 || e > c.erHi+1e-9 {
						t.Errorf("offset %s: εeff %g outside [%g, %g]", mils(p.Offset), e, c.erLo, c.erHi)
					}
				}
				if !(p.CouplingDB < 0 && p.DirectivityDB > 0 && p.PeakFrequency > 0) {
					t.Errorf("offset %s: coupling %g dB directivity %g dB peak %g Hz", mils(p.Offset), p.CouplingDB, p.DirectivityDB, p.PeakFrequency)
				}
			}
			mid := cv.Points[2]
			t.Logf("%s: nominal coupling %.3f dB, directivity %.1f dB, εeff %.3f/%.3f, Z %.2f/%.2f Ω, slope %.4f dB/mil", s.Name, mid.CouplingDB, mid.DirectivityDB, mid.EpsEff[0], mid.EpsEff[1], mid.ZLine[0], mid.ZLine[1], (cv.Points[3].CouplingDB-cv.Points[1].CouplingDB)/2)
			if c.mirrorAtNom && !mid.Symmetric {
				t.Errorf("equal traces at the nominal offset not symmetric: C11 %g C22 %g", mid.C[0][0], mid.C[1][1])
			}
		})
	}
	// the flipped microstrip is the same structure
	a, err := Solve(edgeMicro(), edgeMicro().NominalOffset(), nil)
	if err != nil {
		t.Fatal(err)
	}
	f := flip(edgeMicro())
	b, err := Solve(f, f.NominalOffset(), nil)
	if err != nil {
		t.Fatal(err)
	}
	if d := relDiff(a.C, [2][2]float64{{b.C[1][1], b.C[1][0]}, {b.C[0][1], b.C[0][0]}}); d > 1e-9 {
		t.Errorf("flipped microstrip differs by %.1e", d)
	}
}
