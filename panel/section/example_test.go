package section_test

import (
	"context"
	"fmt"
	"log"
	"math"
	"math/cmplx"

	"github.com/regdrift/regdrift/panel/section"
)

const mil = 25.4e-6

// A broadside-coupled stripline: two 14 mil strips, 1.2 mil thick, on the two
// faces of a 5 mil core, 20 mil prepreg to each ground, centred.
func example() *section.Section {
	return &section.Section{
		Name: "hybrid",
		Stackup: section.Stackup{Layers: []section.Layer{
			{Name: "L2", Kind: section.Copper, Thickness: 1.4 * mil},
			{Kind: section.Dielectric, Thickness: 20 * mil, Er: 3.55},
			{Name: "L3", Kind: section.Copper, Thickness: 1.2 * mil},
			{Kind: section.Dielectric, Thickness: 5 * mil, Er: 3.00, Core: true},
			{Name: "L4", Kind: section.Copper, Thickness: 1.2 * mil},
			{Kind: section.Dielectric, Thickness: 20 * mil, Er: 3.55},
			{Name: "L5", Kind: section.Copper, Thickness: 1.4 * mil},
		}},
		Traces: [2]section.Trace{
			{Layer: "L3", Width: 14 * mil, Etch: 0.6 * mil},
			{Layer: "L4", Width: 14 * mil, Etch: 0.6 * mil},
		},
		Grounds:   []string{"L2", "L5"},
		Frequency: 2.45e9,
		ZRef:      50,
		Spec:      section.Spec{Coupling: -3, Tolerance: 0.25},
	}
}

func ExampleSolve() {
	sol, err := section.Solve(example(), 0, nil)
	if err != nil {
		log.Fatal(err)
	}
	l := section.NewLines(sol.C, sol.C0)
	fmt.Printf("C11 = %.1f pF/m, C12 = %.1f pF/m\n", sol.C[0][0]*1e12, sol.C[0][1]*1e12)
	fmt.Printf("Z0e = %.1f ohm, Z0o = %.1f ohm, kC = %.3f, kL = %.3f\n", l.ZEven, l.ZOdd, l.KC, l.KL)
	fmt.Printf("eps_eff = %.3f, %.3f\n", l.EpsEff[0], l.EpsEff[1])
	sp := l.SParams(2.45e9, l.QuarterWave(2.45e9), 50)
	fmt.Printf("|S31| = %.3f (%.2f dB)\n", cmplx.Abs(sp.S31), 20*math.Log10(cmplx.Abs(sp.S31)))
	// Output:
	// C11 = 153.0 pF/m, C12 = -93.7 pF/m
	// Z0e = 105.1 ohm, Z0o = 23.9 ohm, kC = 0.612, kL = 0.645
	// eps_eff = 3.133, 3.494
	// |S31| = 0.628 (-4.04 dB)
}

func ExampleSweep() {
	s := example()
	offs := []float64{-2 * mil, -1 * mil, 0, 1 * mil, 2 * mil}
	c, err := section.Sweep(context.Background(), s, offs, nil)
	if err != nil {
		log.Fatal(err)
	}
	for _, o := range []float64{0, 1.5 * mil} {
		fmt.Printf("offset %.1f mil: coupling %.2f dB\n", o/mil, c.Coupling(o))
	}
	// Output:
	// offset 0.0 mil: coupling -4.04 dB
	// offset 1.5 mil: coupling -4.08 dB
}
