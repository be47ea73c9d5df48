package drift

import (
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// TestCompensateWithProcess: artwork scale compensation of a job that also
// carries variation terms. The scale difference of L3 against L4 is the
// only registration term with a mean, so compensation can remove the
// drift it causes and the predicted yield after is at least that of
// keeping the artwork; the variation terms move the cross-section, which
// no artwork scale reaches, so each site's process terms (their means and
// variances, and the coupling mean and variance they give at any offset)
// are the same before and after, and both yields are below the yields of
// the same panel without them.
func TestCompensateWithProcess(t *testing.T) {
	s := namedPair("cmp", section.Spec{Coupling: -3, Tolerance: 0.1})
	arr := panel.Array{Part: "p", Count: [2]int{3, 5}, Pitch: panel.Vec{X: 3 * inch, Y: 3.5 * inch}}
	l, inst, sites := layout(t, "cmp", 0, arr)
	m := &registration.Model{Contributors: []registration.Contributor{
		{Name: "core L3 movement", Layers: []string{"L3"},
			Terms:     [registration.NumTerms]registration.Term{registration.ScaleY: term(400e-6, 20e-6), registration.OffsetY: term(0, 0.3*mil)},
			SiteSigma: 0.1 * mil}}}
	pm := &process.Model{Size: l.Panel.Size, Terms: []process.Term{
		{Name: "c2", Layer: "C2", Quantity: process.Thickness, Panel: term(0, 0.05*mil), SiteSigma: 0.02 * mil,
			Shape: process.Shape{Kind: process.Dome, Amplitude: 0.1 * mil}},
		{Name: "w3", Layer: "L3", Quantity: process.Width, Panel: term(0, 0.3*mil), Shape: process.Shape{Kind: process.Tilt, Amplitude: 0.4 * mil}}}}
	with := &Input{Layout: l, Instances: inst, Sites: sites, Sections: []*section.Section{s}, Model: m, Process: pm}
	without := *with
	without.Process = nil
	cs := &registration.CompSettings{}
	cw, err := Compensate(t.Context(), with, nil, cs, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	co, err := Compensate(t.Context(), &without, nil, cs, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	yb, ya := cw.Before.MeanPInSpec(), cw.After.MeanPInSpec()
	t.Logf("site yield with process terms %.4f -> %.4f; registration alone %.4f -> %.4f", yb, ya, co.Before.MeanPInSpec(), co.After.MeanPInSpec())
	if ya < yb {
		t.Errorf("predicted yield after compensation %.5f below keeping the artwork %.5f", ya, yb)
	}
	if !(ya > yb+0.05) {
		t.Errorf("compensating a 400 ppm scale difference raised the yield only from %.4f to %.4f", yb, ya)
	}
	if !(yb < co.Before.MeanPInSpec() && ya < co.After.MeanPInSpec()) {
		t.Errorf("the yields with process terms (%.4f, %.4f) must be below those without (%.4f, %.4f)",
			yb, ya, co.Before.MeanPInSpec(), co.After.MeanPInSpec())
	}
	// The process side is untouched: one curve, the same bindings, and at
	// every site the same terms; the coupling's mean and variance from
	// them agree at the offsets both before and after.
	eb, ea := cw.Before.Evaluator(0), cw.After.Evaluator(0)
	if eb.Curve != ea.Curve {
		t.Fatal("before and after read different curves")
	}
	if len(eb.Proc.Bind) != len(pm.Terms) || len(ea.Proc.Bind) != len(eb.Proc.Bind) {
		t.Fatalf("bindings: before %d, after %d, terms %d", len(eb.Proc.Bind), len(ea.Proc.Bind), len(pm.Terms))
	}
	for k := range cw.Before.Sites {
		p := cw.Before.Sites[k].Site.Pos
		var rb, ra procRow
		eb.Proc.row(&rb, p)
		ea.Proc.row(&ra, p)
		for _, off := range []float64{cw.Before.Sites[k].Offset, cw.After.Sites[k].Offset} {
			mb, vb, qb := eb.at(off, &rb)
			ma, va, qa := ea.at(off, &ra)
			if mb != ma || vb != va || qb != qa {
				t.Errorf("site %d at offset %.3f mil: process coupling %.6f ± %.6f before, %.6f ± %.6f after", k, off/mil, mb, vb, ma, va)
			}
		}
		if cw.Before.Sites[k].ProcessSD == 0 {
			t.Errorf("site %d: no process spread before compensation", k)
		}
	}
	note := false
	for _, n := range cw.Notes {
		note = note || strings.Contains(n, "artwork scale does not compensate")
	}
	if !note {
		t.Errorf("no note that the variation terms are not compensable in %q", cw.Notes)
	}
	for _, n := range co.Notes {
		if strings.Contains(n, "variation") {
			t.Errorf("a job without variation terms notes %q", n)
		}
	}
}
