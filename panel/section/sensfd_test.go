package section

import (
	"fmt"
	"math"
	"testing"
)

// edgeStrip returns an edge-coupled stripline pair of 1.2 mil trapezoids
// (an invented section): grounds 2·h + t apart, traces w wide, gap s.
func edgeStrip(h, w, s, t, er float64) *Section {
	sec := striplineSec("edge-strip", er, []Layer{
		{Name: "P1", Kind: Dielectric, Thickness: h, Er: er},
		{Name: "S", Kind: Copper, Thickness: t},
		{Name: "K1", Kind: Dielectric, Thickness: h, Er: er + 0.3, Core: true},
	}, [2]Trace{{Layer: "S", Width: w, Etch: 0.4 * t, X: w + s}, {Layer: "S", Width: w, Etch: 0.4 * t}})
	sec.Frequency = 3e9
	return sec
}

// fdStep is the step of the central differences of converged solves: 2 %
// of a thickness, 0.1 mil of a width, 0.05 mil of an etch or a mask
// thickness, 0.05 of an εr. Their truncation error (step²·f‴/6) is below
// 1e−3 of the derivative; their noise, the solve error (about 1e−4 of C,
// uncorrelated between the two solves: the element counts change with the
// geometry) over twice the step, is what sets the floors below.
func fdStep(s *Section, p Param) float64 {
	switch p.Kind {
	case ParamThickness:
		return 0.05 * s.Stackup.Layers[p.Layer].Thickness
	case ParamCopper:
		return 0.1 * s.Stackup.Layers[p.Layer].Thickness
	case ParamWidth:
		return 0.3 * testMil
	case ParamEr, ParamMaskEr:
		return 0.1
	}
	return 0.1 * testMil
}

// TestSensitivityVsDifferences checks every sensitivity against central
// differences of converged solves over a table of sections: broadside at
// zero offset (a transition window) and at 2 mil, an offset broadside
// design, edge-coupled stripline, edge-coupled microstrip bare and with a
// mask.
func TestSensitivityVsDifferences(t *testing.T) {
	micro := edgeMicro(10*testMil, 18*testMil, 6*testMil, 1.4*testMil, 3.48)
	micro.Traces[0].Etch, micro.Traces[1].Etch = 0.5*testMil, 0.5*testMil
	// accFD is the accuracy of the differenced solves: their noise (the
	// solve error, which jumps where an element count changes with the
	// geometry) over twice the step must stay well below 1 % of the
	// derivative. At 2e−4 it reached 1.2 % on the mask's coat thickness
	// (the shape derivative itself changed by 3e−4 from 2e−4 to 5e−5) and
	// 3.6 % on a small impedance derivative of the broadside pair; at 1e−4
	// every case passes.
	//
	// The demo section is symmetric top to bottom: its lower half's
	// parameters (stackup index above 3) mirror the upper half's, and are
	// left out of its two cases to halve their time.
	cases := []struct {
		name      string
		s         *Section
		off       float64
		accFD     float64
		upperOnly bool
	}{
		{"broadside 0", demoSection(), 0, 1e-4, true},
		{"broadside 2mil", demoSection(), 2 * testMil, 1e-4, true},
		{"offset broadside", offsetDesign(), offsetDesign().NominalOffset(), 1e-4, false},
		{"edge stripline", edgeStrip(12*testMil, 10*testMil, 6*testMil, 1.2*testMil, 3.3), 16 * testMil, 1e-4, false},
		{"edge microstrip", micro, micro.NominalOffset(), 1e-4, false},
		{"edge microstrip mask", withMask(micro, 1.0*testMil, 0.6*testMil, 3.8), micro.NominalOffset(), 1e-4, false},
	}
	if testing.Short() {
		// The bare microstrip pair, three parameters (about 3 s).
		cases = cases[4:5]
	}
	const acc = 2e-4
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			pt, length := sensOf(t, c.s, c.off, acc, nil)
			for i, sv := range pt.Sens {
				if testing.Short() && i%2 == 1 || c.upperOnly && sv.Param.Layer > 3 {
					continue
				}
				par := sv.Param
				h := fdStep(c.s, par)
				var q [2]pointQuantities
				for k, sg := range []float64{1, -1} {
					sol, err := Solve(c.s.Perturbed(par, sg*h), c.off, &Settings{Accuracy: c.accFD})
					if err != nil {
						t.Fatal(err)
					}
					q[k], _ = quantitiesOf(sol.C, sol.C0, c.s.Frequency, length, c.s.ZRef)
				}
				unit, per := 1.0, ""
				if par.Kind.IsLength() {
					unit, per = testMil, "/mil"
				}
				d := func(a, b float64) float64 { return (a - b) / (2 * h) * unit }
				check := func(name string, got, fd, floor float64) {
					got *= unit
					ok := math.Abs(got-fd) <= tolSensFD*math.Abs(fd)+floor
					msg := fmt.Sprintf("%-20s %-10s %+.5e%s, differences %+.5e (%+.1e)", par.Key, name, got, per, fd, got/fd-1)
					if !ok {
						t.Error(msg)
					} else {
						t.Log(msg)
					}
				}
				check("coupling", sv.CouplingDB, d(q[0].coupling, q[1].coupling), floorDB)
				for k := range 2 {
					check(fmt.Sprintf("zline%d", k), sv.ZLine[k], d(q[0].zline[k], q[1].zline[k]), floorOhm)
					check(fmt.Sprintf("eeff%d", k), sv.EpsEff[k], d(q[0].eeff[k], q[1].eeff[k]), floorEps)
				}
				if pt.Symmetric {
					check("zeven", sv.ZEven, d(q[0].zeven, q[1].zeven), floorOhm)
					check("zodd", sv.ZOdd, d(q[0].zodd, q[1].zodd), floorOhm)
				}
			}
		})
	}
}

// Tolerances against central differences: 1 % plus a floor per mil (or per
// unit εr): 2e−4 dB (the figure), and the same relative size for
// impedances (2e−4 dB is 2.3e−5 of a ratio: 1.2e−3 Ω of 50 Ω) and εeff.
const (
	tolSensFD = 1e-2
	floorDB   = 2e-4
	floorOhm  = 1.2e-3
	floorEps  = 1e-4
)
