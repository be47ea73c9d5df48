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
	// Which way each parameter moves the coupling (dB, negative): the
	// derivatives are per metre or per unit εr.
	for k, p := range c.Params() {
		way := "tightens"
		if c.CouplingSensitivity(k, nom) < 0 {
			way = "loosens"
		}
		fmt.Printf("a larger %-16s %s the coupling\n", p.Key, way)
	}
	// Output:
	// L1 finished 1.770 mil (foil 0.670 mil)
	// a larger L1.copper        tightens the coupling
	// a larger L1.width         tightens the coupling
	// a larger L1.etch          loosens the coupling
	// a larger K1.thickness     tightens the coupling
	// a larger K1.er            loosens the coupling
	// a larger mask.thickness   tightens the coupling
	// a larger mask.over_copper tightens the coupling
	// a larger mask.er          tightens the coupling
}
