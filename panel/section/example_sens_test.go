package section_test

import (
	"context"
	"fmt"
	"log"

	"github.com/regdrift/regdrift/panel/section"
)

// An edge-coupled microstrip pair under solder mask, its outer copper built
// from half-ounce foil and two plating steps, and the sensitivity of its
// coupling to every dimension at the design offset.
func ExampleCurve_CouplingSensitivity() {
	foil := section.CopperWeightThickness(0.5)
	plating := []float64{0.8 * mil, 0.3 * mil}
	s := &section.Section{
		Name: "edge",
		Stackup: section.Stackup{
			Layers: []section.Layer{
				{Name: "L1", Kind: section.Copper, Foil: foil, Plating: plating, Thickness: section.FinishedThickness(foil, plating)},
				{Name: "K1", Kind: section.Dielectric, Thickness: 10 * mil, Er: 3.48, Core: true},
				{Name: "L2", Kind: section.Copper, Thickness: 1.4 * mil},
			},
			Mask: &section.Mask{OverLaminate: 1.0 * mil, OverCopper: 0.6 * mil, Er: 3.8},
		},
		Traces: [2]section.Trace{
			{Layer: "L1", Width: 18 * mil, Etch: 0.5 * mil, X: 24 * mil},
			{Layer: "L1", Width: 18 * mil, Etch: 0.5 * mil},
		},
		Grounds:   []string{"L2"},
		Frequency: 5e9,
		ZRef:      50,
		Spec:      section.Spec{Coupling: -10, Tolerance: 0.5},
	}
	nom := s.NominalOffset()
	c, err := section.Sweep(context.Background(), s, []float64{nom - mil, nom, nom + mil}, &section.Settings{Sensitivities: true})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("L1 finished %.3f mil (foil %.3f mil)\n", s.Stackup.Layers[0].Thickness/mil, foil/mil)
	for k, p := range c.Params() {
		unit := "dB/mil"
		per := mil
		if !p.Kind.IsLength() {
			unit, per = "dB per unit εr", 1
		}
		fmt.Printf("%-16s %+.2f %s\n", p.Key, c.CouplingSensitivity(k, nom)*per, unit)
	}
	// Output:
	// L1 finished 1.770 mil (foil 0.670 mil)
	// L1.copper        +0.66 dB/mil
	// L1.width         +0.75 dB/mil
	// L1.etch          -0.55 dB/mil
	// K1.thickness     +0.70 dB/mil
	// K1.er            -0.43 dB per unit εr
	// mask.thickness   +0.41 dB/mil
	// mask.over_copper +0.27 dB/mil
	// mask.er          +0.19 dB per unit εr
}
