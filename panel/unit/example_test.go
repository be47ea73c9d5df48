package unit_test

import (
	"fmt"

	"github.com/regdrift/regdrift/panel/unit"
)

func ExampleParse() {
	w, _ := unit.Parse("14 mil", unit.Length)
	s, _ := unit.Parse("0.15 mil/in", unit.Strain)
	_, err := unit.Parse("14", unit.Length)
	fmt.Printf("%.4g m, %.4g ppm\n", w, s/unit.PPM)
	fmt.Println(err)
	// Output:
	// 0.0003556 m, 150 ppm
	// "14": a length needs a unit (in, mil, mm, um, m)
}

func ExampleParseHeader() {
	idx, cols, _ := unit.ParseHeader([]string{"name", "x [in]", "dx [um]"}, map[string]unit.Kind{"x": unit.Length, "dx": unit.Length})
	c := cols[idx["dx"]]
	fmt.Printf("%s in %s, %g m per unit\n", c.Name, c.Unit, c.Factor)
	_, _, err := unit.ParseHeader([]string{"x"}, map[string]unit.Kind{"x": unit.Length})
	fmt.Println(err)
	// Output:
	// dx in um, 1e-06 m per unit
	// column 1 "x": the header needs a unit, as in "x [mil]" (in, mil, mm, um, m)
}

func ExampleParseOutput() {
	o, _ := unit.ParseOutput("um")
	fmt.Printf("offsets in %s, panel coordinates in %s: %.1f %s\n", o.Length(), o.Panel(), 0.0254/o.PanelSI(), o.Panel())
	// Output:
	// offsets in um, panel coordinates in mm: 25.4 mm
}
