package registration_test

import (
	"context"
	"fmt"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration"
)

// An invented case: the upper trace layer's artwork scale varies by 50 ppm
// (one sigma) from panel to panel, and a coupler at (8 in, 10 in) with its
// lines along y may be offset by ±1 mil before it leaves its coupling spec.
func ExampleYield() {
	const mil, inch = 25.4e-6, 0.0254
	m := &registration.Model{Contributors: []registration.Contributor{{
		Name: "L3 imaging", Layers: []string{"L3"},
		Terms: [registration.NumTerms]registration.Term{
			registration.ScaleX: {Spread: 50e-6, Dist: registration.Normal},
		},
	}}}
	// The allowed interval would come from SpecInterval on the section's
	// coupling curve; here it is given.
	sites := []registration.YieldSite{{
		Pos: panel.Vec{X: 8 * inch, Y: 10 * inch}, U: panel.Vec{Y: 1},
		Upper: "L3", Lower: "L4", Allowed: registration.Interval{Lo: -1 * mil, Hi: 1 * mil}, Part: 0,
	}}
	y := registration.NewYield(m, sites, 1)
	fmt.Printf("offset sigma %.2f mil\n", y.Stats(0).SDAcross/mil)
	fmt.Printf("closed form %.4f\n", y.ClosedForm(0))
	r, err := y.MonteCarlo(context.Background(), registration.MCSettings{Trials: 100000, Seed: 1})
	if err != nil {
		panic(err)
	}
	fmt.Printf("Monte Carlo within 3 SE: %v\n", abs(r.SiteYield(0)-y.ClosedForm(0)) < 3*r.SiteSE(0))
	// Output:
	// offset sigma 0.40 mil
	// closed form 0.9876
	// Monte Carlo within 3 SE: true
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

// SpecInterval inverts a coupling curve: here an invented intentionally
// offset pair whose coupling changes by 0.5 dB per mil about −10 dB, with a
// spec of −10 ± 0.5 dB.
func ExampleSpecInterval() {
	const mil = 25.4e-6
	curve := func(x float64) float64 { return -10 + 0.5*x/mil - 0.05*(x/mil)*(x/mil) }
	iv, lim, err := registration.SpecInterval(curve, -10*mil, 10*mil, 0, -10, 0.5)
	if err != nil {
		panic(err)
	}
	fmt.Printf("allowed offsets %.3f to %.3f mil, limits %v\n", iv.Lo/mil, iv.Hi/mil, lim.Limit)
	// Output:
	// allowed offsets -0.916 to 1.127 mil, limits [-1 1]
}

// An invented core that moves 150 ppm (one sigma) more in x than in y: a
// coupler with its lines along y sees that movement across its lines, and
// turning the part a quarter turn puts the lines along x: 2Φ(0.5/0.75) − 1
// becomes 2Φ(0.5/0.16) − 1.
func ExampleYield_Orient() {
	const mil, inch = 25.4e-6, 0.0254
	m := &registration.Model{Contributors: []registration.Contributor{{
		Name: "core movement", Layers: []string{"L3"},
		Terms: [registration.NumTerms]registration.Term{
			registration.ScaleX: {Spread: 150e-6, Dist: registration.Normal},
			registration.ScaleY: {Spread: 20e-6, Dist: registration.Normal},
		},
	}}}
	var sites []registration.YieldSite
	for _, x := range []float64{-5, 5} {
		sites = append(sites, registration.YieldSite{
			Pos: panel.Vec{X: x * inch, Y: 8 * inch}, U: panel.Vec{Y: 1},
			Upper: "L3", Lower: "L4", Allowed: registration.Interval{Lo: -0.5 * mil, Hi: 0.5 * mil}, Part: -1,
		})
	}
	o := registration.NewYield(m, sites, 0).Orient([]int{0, 1})
	fmt.Printf("as placed %.4f, turned %.4f, turn: %v\n", o.AsPlaced.Mean, o.Turned.Mean, o.Better())
	// Output:
	// as placed 0.4950, turned 0.9982, turn: true
}
