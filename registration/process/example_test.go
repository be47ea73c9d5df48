package process_test

import (
	"fmt"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// A pressed-dielectric dome on an 18 x 24 in panel: the mean of the term
// at the centre, half way to the side and at the middle of an edge, and
// its variance at every site (invented values).
func ExampleTerm_Mean() {
	size := panel.Vec{X: 18 * unit.Inch, Y: 24 * unit.Inch}
	t := process.Term{Name: "press K1", Layer: "K1", Quantity: process.Thickness,
		Panel:     registration.Term{Mean: 0.1 * unit.Mil, Spread: 0.2 * unit.Mil, Dist: registration.Normal},
		Shape:     process.Shape{Kind: process.Dome, Amplitude: 0.4 * unit.Mil},
		SiteSigma: 0.05 * unit.Mil}
	for _, p := range []panel.Vec{{}, {X: 4.5 * unit.Inch}, {X: 9 * unit.Inch}} {
		fmt.Printf("x = %4.1f in: %+.3f mil\n", p.X/unit.Inch, t.Mean(p, size)/unit.Mil)
	}
	fmt.Printf("variance %.4f mil²\n", t.Variance()/unit.Mil/unit.Mil)
	// Output:
	// x =  0.0 in: +0.500 mil
	// x =  4.5 in: +0.400 mil
	// x =  9.0 in: +0.100 mil
	// variance 0.0425 mil²
}
