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
