package registration

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
)

// drillLot simulates panels whose layers L3 and L4 each move by their own
// affine field on top of the panel's drill error, which both share: per
// panel, the drilled holes are off by a scale, offset and rotation common to
// every layer measured against them. It returns the targets measured against
// the holes (layers "L3" and "L4"), the same panels measured L3 against L4
// ("L3-L4"), and the per-panel true L3−L4 terms.
func drillLot(panels int, seed uint64) (drill, rel []Target, truth [][NumTerms]float64) {
	rng := rand.New(rand.NewPCG(seed, 1))
	const mil, ppm = 25.4e-6, 1e-6
	// Spreads: the drill error is large beside each layer's own movement, as
	// on a panel drilled after lamination with a worn spindle.
	drillSD := [NumTerms]float64{OffsetX: 1.5 * mil, OffsetY: 1.5 * mil, Rotation: 40e-6, ScaleX: 80 * ppm, ScaleY: 80 * ppm}
	layerSD := [NumTerms]float64{OffsetX: 0.2 * mil, OffsetY: 0.2 * mil, Rotation: 3e-6, ScaleX: 6 * ppm, ScaleY: 6 * ppm}
	mean3 := [NumTerms]float64{ScaleX: 150 * ppm, ScaleY: 120 * ppm}
	mean4 := [NumTerms]float64{ScaleX: 140 * ppm, ScaleY: 125 * ppm}
	const w, h = 0.40, 0.55
	for p := 0; p < panels; p++ {
		var d, m3, m4, diff [NumTerms]float64
		for k := range d {
			d[k] = drillSD[k] * rng.NormFloat64()
			m3[k] = mean3[k] + layerSD[k]*rng.NormFloat64()
			m4[k] = mean4[k] + layerSD[k]*rng.NormFloat64()
			diff[k] = m3[k] - m4[k]
		}
		var a3, a4 [NumTerms]float64 // measured against the holes: layer − drill
		for k := range d {
			a3[k], a4[k] = m3[k]-d[k], m4[k]-d[k]
		}
		name := fmt.Sprintf("P%02d", p+1)
		drill = append(drill, gridTargets(name, "L3", 5, 5, w, h, a3, panel.Vec{}, 0, rng)...)
		drill = append(drill, gridTargets(name, "L4", 5, 5, w, h, a4, panel.Vec{}, 0, rng)...)
		rel = append(rel, gridTargets(name, "L3-L4", 5, 5, w, h, diff, panel.Vec{}, 0, rng)...)
		truth = append(truth, diff)
	}
	return drill, rel, truth
}

func modelOf(cs *LotModel) *Model {
	m := &Model{}
	for _, c := range cs.Contributors {
		m.Contributors = append(m.Contributors, c.Contributor)
	}
	return m
}

func lotLabel(l *Lot) string { return "measured " + l.Layer }

// TestJointLotRelativeSpread checks that layers measured against the drilled
// holes on the same panels predict the L3−L4 offset spread of the per-panel
// differences — the same as measuring L3 against L4 on those panels — while
// treating the layers as independent counts the shared drill error twice.
func TestJointLotRelativeSpread(t *testing.T) {
	const panels = 30
	drill, rel, truth := drillLot(panels, 7)
	fitsD, err := FitAll(drill, &FitSettings{})
	if err != nil {
		t.Fatal(err)
	}
	fitsR, err := FitAll(rel, &FitSettings{})
	if err != nil {
		t.Fatal(err)
	}
	lotsD, lotsR := LotStats(fitsD), LotStats(fitsR)
	joint := LotContributors(fitsD, lotsD, lotLabel)
	if len(joint.Notes) != 1 || !strings.Contains(joint.Notes[0], "L3, L4 measured on the same 30 panels") {
		t.Errorf("notes = %q, want one naming the joint group", joint.Notes)
	}
	indep := &Model{}
	for i := range lotsD {
		indep.Contributors = append(indep.Contributors, lotsD[i].Contributor(lotLabel(&lotsD[i])))
	}
	relative := modelOf(LotContributors(fitsR, lotsR, lotLabel))

	// A corner site of an 18 x 24 in panel, lines along x.
	corner, u := panel.Vec{X: 0.2286, Y: 0.3048}, panel.Vec{X: 1}
	sd := func(m *Model) float64 {
		r := m.Relative("L3", "L4")
		return r.Stats(r.Row(corner, u)).SDAcross
	}
	sJoint, sRel, sIndep := sd(modelOf(joint)), sd(relative), sd(indep)

	// Noise-free targets at the same positions: the least-squares fit is
	// linear in the displacements, so the per-panel differences of the two
	// layers' fits are the fits of the relative measurement, to rounding.
	if math.Abs(sJoint-sRel) > 1e-9*sRel {
		t.Errorf("relative sigma at the corner: %.6g m jointly from drill-referenced data, %.6g m from L3-L4 data; want equal", sJoint, sRel)
	}
	// The truth: the simulated per-panel differences, term by term (the
	// model takes its terms as independent), projected on the site.
	n := u.Perp()
	var v float64
	for k, b := range Basis(corner, panel.Vec{}) {
		var s, ss float64
		for _, d := range truth {
			s += d[k]
			ss += d[k] * d[k]
		}
		mean := s / panels
		a := n.Dot(b)
		v += a * a * (ss - panels*mean*mean) / (panels - 1)
	}
	if want := math.Sqrt(v); math.Abs(sJoint-want) > 1e-6*want {
		t.Errorf("relative sigma %.6g m, simulated panels' %.6g m", sJoint, want)
	}
	// The independent treatment adds both layers' drill-referenced spreads:
	// here about 2·80 ppm of shared drill scale against 6 ppm per layer.
	if sIndep < 5*sJoint {
		t.Errorf("independent layers give %.3g m, joint %.3g m: the shared drill error should dominate", sIndep, sJoint)
	}
	// Each layer keeps its own spread against the holes.
	for _, l := range []string{"L3", "L4"} {
		jr := modelOf(joint).Relative(l, "drill")
		ir := indep.Relative(l, "drill")
		a, b := jr.Stats(jr.Row(corner, u)).SDAcross, ir.Stats(ir.Row(corner, u)).SDAcross
		if math.Abs(a-b) > 1e-9*b {
			t.Errorf("%s against the holes: sigma %.6g m jointly, %.6g m alone", l, a, b)
		}
	}
}

// TestLotContributorsFewPanels checks the warnings for a lot too small to
// know its spread.
func TestLotContributorsFewPanels(t *testing.T) {
	for _, tc := range []struct {
		panels int
		want   string
	}{
		{1, "one panel, so no panel-to-panel sigma"},
		{3, "only 3 panels"},
		{5, ""},
	} {
		drill, _, _ := drillLot(tc.panels, 3)
		var l3 []Target
		for _, t := range drill {
			if t.Layer == "L3" {
				l3 = append(l3, t)
			}
		}
		fits, err := FitAll(l3, &FitSettings{})
		if err != nil {
			t.Fatal(err)
		}
		lm := LotContributors(fits, LotStats(fits), lotLabel)
		got := strings.Join(lm.Notes, "; ")
		if tc.want == "" && got != "" || tc.want != "" && !strings.Contains(got, tc.want) {
			t.Errorf("%d panels: notes %q, want %q", tc.panels, got, tc.want)
		}
		if tc.panels == 1 {
			for k, term := range lm.Contributors[0].Terms {
				if term.Dist != Fixed {
					t.Errorf("one panel: term %v is %v, want fixed", TermKind(k), term.Dist)
				}
			}
		}
	}
}

// TestJointComponentsReproduceCovariance checks that the components' weights
// and sigmas give back each term's sample covariance over three layers.
func TestJointComponentsReproduceCovariance(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 2))
	var ts []Target
	const panels = 12
	for p := 0; p < panels; p++ {
		shared := 50e-6 * rng.NormFloat64()
		for _, l := range []string{"L2", "L3", "L5"} {
			v := [NumTerms]float64{ScaleX: shared + 7e-6*rng.NormFloat64(), OffsetY: 30e-6 * rng.NormFloat64()}
			ts = append(ts, gridTargets(fmt.Sprintf("P%d", p), l, 4, 4, 0.4, 0.5, v, panel.Vec{}, 0, rng)...)
		}
	}
	fits, err := FitAll(ts, &FitSettings{})
	if err != nil {
		t.Fatal(err)
	}
	lots := LotStats(fits)
	m := modelOf(LotContributors(fits, lots, lotLabel))
	for a, la := range []string{"L2", "L3", "L5"} {
		for b, lb := range []string{"L2", "L3", "L5"} {
			for k := TermKind(0); k < NumTerms; k++ {
				var got float64
				for _, c := range m.Contributors {
					got += c.Weight(la) * c.Weight(lb) * c.Terms[k].Variance()
				}
				// Sample covariance from the fits directly.
				var s float64
				for i := range fits {
					if fits[i].Layer != la {
						continue
					}
					for j := range fits {
						if fits[j].Layer == lb && fits[j].Panel == fits[i].Panel {
							s += (fits[i].Terms[k] - lots[a].Mean[k]) * (fits[j].Terms[k] - lots[b].Mean[k])
						}
					}
				}
				want := s / (panels - 1)
				if math.Abs(got-want) > 1e-9*math.Abs(want)+1e-30 {
					t.Errorf("cov(%s, %s) of %v: components give %.6g, sample %.6g", la, lb, k, got, want)
				}
			}
		}
	}
}
