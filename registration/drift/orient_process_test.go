package drift

import (
	"math"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// TestOrientationWithProcess: the orientation study judges each site by the
// one evaluator, so with process variation terms its as-placed mean site
// yield is the mean of the sites' P(in spec) that map and yield report — not
// the registration-only probability, which ignores the process and was
// printed as 100 % beside a site yield of 62 %. Turning the lines of a
// stack whose only process term is a dome thickness leaves the process
// part of every site alone, so the turned yield stays below the
// registration-only turned yield too.
func TestOrientationWithProcess(t *testing.T) {
	s := namedPair("orient", section.Spec{Coupling: -3, Tolerance: 0.1})
	arr := panel.Array{Part: "p", Count: [2]int{3, 5}, Pitch: panel.Vec{X: 3 * inch, Y: 3.5 * inch}}
	l, inst, sites := layout(t, "orient", 0, arr)
	m := &registration.Model{Contributors: []registration.Contributor{
		{Name: "L3 movement", Layers: []string{"L3"},
			Terms:     [registration.NumTerms]registration.Term{registration.ScaleY: term(0, 20e-6), registration.OffsetY: term(0, 0.3*mil)},
			SiteSigma: 0.1 * mil}}}
	pm := &process.Model{Size: l.Panel.Size, Terms: []process.Term{
		{Name: "c2", Layer: "C2", Quantity: process.Thickness, Panel: term(0, 0.05*mil), SiteSigma: 0.02 * mil,
			Shape: process.Shape{Kind: process.Dome, Amplitude: 0.1 * mil}}}}
	with := &Input{Layout: l, Instances: inst, Sites: sites, Sections: []*section.Section{s}, Model: m, Process: pm}
	without := *with
	without.Process = nil
	aw, err := Analyse(t.Context(), with, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	ao, err := Analyse(t.Context(), &without, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	ow, oo := aw.Orientation(), ao.Orientation()
	if len(ow) != 1 || len(oo) != 1 {
		t.Fatalf("%d and %d orientation rows, want one array each", len(ow), len(oo))
	}
	// Summing the same P over the same sites in another order: rounding only.
	const sumTol = 1e-12
	for _, c := range []struct {
		name string
		a    *Analysis
		o    Orient
	}{{"with process terms", aw, ow[0]}, {"registration alone", ao, oo[0]}} {
		if got, want := c.o.MeanYield, c.a.MeanPInSpec(); math.Abs(got-want) > sumTol {
			t.Errorf("%s: as-placed mean %.12f, the sites' mean P(in spec) %.12f", c.name, got, want)
		}
	}
	if !(ow[0].MeanYield < oo[0].MeanYield && ow[0].MeanYieldTurned < oo[0].MeanYieldTurned) {
		t.Errorf("with a process term the study's yields (%.4f, turned %.4f) must be below registration alone (%.4f, %.4f)",
			ow[0].MeanYield, ow[0].MeanYieldTurned, oo[0].MeanYield, oo[0].MeanYieldTurned)
	}
}
