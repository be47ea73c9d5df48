package section

import (
	"math"
	"testing"
)

const testMil = 25.4e-6 // 1 mil = 25.4 µm exactly

// stripline returns a stripline section with grounds b apart, homogeneous εr,
// and the given copper slabs between them (each dielectric thickness
// measured between copper slabs).
func striplineSec(name string, er float64, layers []Layer, traces [2]Trace) *Section {
	ls := []Layer{{Name: "GT", Kind: Copper, Thickness: 1.4 * testMil}}
	ls = append(ls, layers...)
	ls = append(ls, Layer{Name: "GB", Kind: Copper, Thickness: 1.4 * testMil})
	return &Section{Name: name, Stackup: Stackup{Layers: ls}, Traces: traces,
		Grounds: []string{"GT", "GB"}, Frequency: 1e9, ZRef: 50, Spec: Spec{Coupling: -3, Tolerance: 0.5}}
}

// edgeCoupled returns two zero-thickness strips of width w and gap s centred
// between grounds b apart in a homogeneous dielectric.
func edgeCoupled(b, w, s, er float64) *Section {
	return striplineSec("edge", er, []Layer{
		{Kind: Dielectric, Thickness: b / 2, Er: er, Core: true},
		{Name: "S", Kind: Copper},
		{Kind: Dielectric, Thickness: b / 2, Er: er},
	}, [2]Trace{{Layer: "S", Width: w, X: w + s}, {Layer: "S", Width: w}})
}

// broadside returns two zero-thickness strips of width w, separation s,
// centred between grounds b apart in a homogeneous dielectric.
func broadsideSec(b, w, s, er float64) *Section {
	return striplineSec("broadside", er, []Layer{
		{Kind: Dielectric, Thickness: (b - s) / 2, Er: er},
		{Name: "S1", Kind: Copper},
		{Kind: Dielectric, Thickness: s, Er: er, Core: true},
		{Name: "S2", Kind: Copper},
		{Kind: Dielectric, Thickness: (b - s) / 2, Er: er},
	}, [2]Trace{{Layer: "S1", Width: w}, {Layer: "S2", Width: w}})
}

// demoSection is the benchmark section: L2 ground / prepreg
// 20 mil εr 3.55 / L3 1.2 mil / core 5 mil εr 3.00 / L4 1.2 mil / prepreg
// 20 mil εr 3.55 / L5 ground; traces 14 mil with 0.6 mil etch; f0 2.45 GHz.
// (An invented demo section, not a reference.)
func demoSection() *Section {
	return &Section{Name: "hybrid", Stackup: Stackup{Layers: []Layer{
		{Name: "L2", Kind: Copper, Thickness: 1.4 * testMil},
		{Kind: Dielectric, Thickness: 20 * testMil, Er: 3.55},
		{Name: "L3", Kind: Copper, Thickness: 1.2 * testMil},
		{Kind: Dielectric, Thickness: 5 * testMil, Er: 3.00, Core: true},
		{Name: "L4", Kind: Copper, Thickness: 1.2 * testMil},
		{Kind: Dielectric, Thickness: 20 * testMil, Er: 3.55},
		{Name: "L5", Kind: Copper, Thickness: 1.4 * testMil},
	}}, Traces: [2]Trace{{Layer: "L3", Width: 14 * testMil, Etch: 0.6 * testMil}, {Layer: "L4", Width: 14 * testMil, Etch: 0.6 * testMil}},
		Grounds: []string{"L2", "L5"}, Frequency: 2.45e9, ZRef: 50, Spec: Spec{Coupling: -3, Tolerance: 0.25}}
}

// relErr returns got/want − 1.
func relErr(got, want float64) float64 { return got/want - 1 }

// z0 returns the impedance √(L11/C11) of line i from a solution, which for a
// line far from the other is its characteristic impedance: with L = μ0ε0·C0⁻¹
// and negligible coupling, Z = 1/(c·√(C·C0)).
func lineZ(sol *Solution, i int) float64 {
	return 1 / (SpeedOfLight * math.Sqrt(sol.C[i][i]*sol.C0[i][i]))
}

// syntheticCurve is a curve built from a parabola (no field solve), for
// interpolant tests and benchmarks.
func syntheticCurve(tb testing.TB) *Curve {
	c := &Curve{Section: "synthetic", Frequency: 1e9, Length: 0.01, ZRef: 50}
	for i := -10; i <= 10; i++ {
		o := float64(i) * 0.5 * testMil
		d := o / testMil
		c.Points = append(c.Points, Point{Offset: o, CouplingDB: -3 - 0.0144*d*d, DirectivityDB: 30 - d*d/10,
			Lines: Lines{ZLine: [2]float64{50 + 0.01*d*d, 50 + 0.02*d*d}}})
	}
	if err := c.fit(); err != nil {
		tb.Fatal(err)
	}
	return c
}
