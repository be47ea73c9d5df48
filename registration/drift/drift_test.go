package drift

import (
	"bytes"
	"encoding/csv"
	"github.com/regdrift/regdrift/panel/unit"
	"math"
	"strconv"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
)

// turnedInput is a panel of offset couplers (design offset 10 mil on a
// centred pair, on the flank of its coupling curve) in two arrays, the
// second turned 180°, under a mean upper-layer shift of +1 mil in y.
// Lines along x (0°) have n = ẑ×x̂ = ŷ and see +1 mil; the turned parts'
// lines run along −x, n = −ŷ, and see −1 mil (the README's frame).
func turnedInput(t *testing.T) *Input {
	l, inst, sites := layout(t, "dc", 0,
		panel.Array{Part: "p", Count: [2]int{2, 2}, Pitch: panel.Vec{X: 2 * inch, Y: 2 * inch}, Center: panel.Vec{X: -3 * inch}},
		panel.Array{Part: "p", Count: [2]int{2, 2}, Pitch: panel.Vec{X: 2 * inch, Y: 2 * inch}, Center: panel.Vec{X: 3 * inch}, Rotate: 180})
	m := &registration.Model{Contributors: []registration.Contributor{
		{Name: "L3 imaging", Layers: []string{"L3"}, Terms: [registration.NumTerms]registration.Term{
			registration.OffsetY: term(1*mil, 0.5*mil)}, SiteSigma: 0.2 * mil},
	}}
	return &Input{Title: "turned", Source: "turned", Layout: l, Instances: inst, Sites: sites,
		Sections: []*section.Section{pair("dc", 10*mil, section.Spec{Coupling: -6, Tolerance: 1.5})}, Model: m}
}

// TestOneEvaluator: the map analysis, the yield problem, the compensation's
// before state and the per-pixel evaluator give the same numbers for every
// site, and an offset coupler turned 180° sees the opposite misregistration.
func TestOneEvaluator(t *testing.T) {
	in := turnedInput(t)
	set := testSettings(t)
	a, err := Analyse(t.Context(), in, set)
	if err != nil {
		t.Fatal(err)
	}
	cmp, err := Compensate(t.Context(), in, nil, &registration.CompSettings{Max: 1e-3}, set)
	if err != nil {
		t.Fatal(err)
	}
	if cmp.Before.Curves[0].Curve != nil && !sameKey(a.Curves[0], cmp.Before.Curves[0]) {
		t.Errorf("map and comp solved different offsets: %v and %v", rangeOf(a.Curves[0]), rangeOf(cmp.Before.Curves[0]))
	}
	for k := range a.Sites {
		r, b := &a.Sites[k], &cmp.Before.Sites[k]
		ev := a.Evaluator(r.Section)
		pos, u := r.Site.Pos, r.Site.U
		for _, c := range []struct {
			name      string
			map_, oth float64
		}{
			{"offset: map / comp", r.Offset, b.Offset},
			{"coupling: map / comp", r.Coupling, b.Coupling},
			{"margin: map / comp", r.Margin, b.Margin},
			{"p in spec: map / comp", r.PInSpec, b.PInSpec},
			{"p in spec: map / yield closed form", r.PInSpec, a.Yield.ClosedForm(k)},
			{"drift: map / field", r.Drift, ev.Value(Drift, pos, u)},
			{"worst drift: map / field", r.WorstDrift, ev.Value(WorstDrift, pos, u)},
			{"margin: map / field", r.Margin, ev.Value(Margin, pos, u)},
			{"p in spec: map / field", r.PInSpec, ev.Value(PInSpec, pos, u)},
			{"offset: map / field", r.Offset, ev.Value(Offset, pos, u)},
		} {
			// The same arithmetic on the same inputs: equal to the last bit.
			if c.map_ != c.oth {
				t.Errorf("site %s: %s: %v != %v", r.Site.Name, c.name, c.map_, c.oth)
			}
		}
		if r.InSpec != b.InSpec || r.InSpec != a.Yield.Sites[k].Allowed.Contains(r.Offset) {
			t.Errorf("site %s: in spec %v (map), %v (comp)", r.Site.Name, r.InSpec, b.InSpec)
		}
		// Hand-worked: design 10 mil, +1 mil as placed, −1 mil turned 180°.
		want := 11 * mil
		if r.Site.Array == 1 {
			want = 9 * mil
		}
		if math.Abs(r.Offset-want) > 1e-12 {
			t.Errorf("site %s (array %d): offset %.6f mil, want %.6f", r.Site.Name, r.Site.Array+1, r.Offset/mil, want/mil)
		}
	}
	// On the flank the coupling falls with offset: the turned sites drift
	// the other way.
	d0, d1 := a.Sites[0].Drift, a.Sites[len(a.Sites)-1].Drift
	if !(d0*d1 < 0) {
		t.Errorf("drift as placed %+.4f dB, turned 180° %+.4f dB: want opposite signs", d0, d1)
	}
	ks := a.Kinds(nil)
	if len(ks) != 2 || ks[0].Deg == ks[1].Deg || (ks[0].Deg+180)%360 != ks[1].Deg {
		t.Errorf("kinds %+v: want the two half turns apart", ks)
	}
	zs := a.Zones()
	if len(zs) != 3 || zs[0].Kinds[0].Deg != 0 || zs[1].Kinds[0].Deg != 180 {
		t.Errorf("zones %+v: want one per array with its own direction", zs)
	}
	// The yield summary reports the closed form of the same evaluator.
	res, err := a.Yield.MonteCarlo(t.Context(), registration.MCSettings{Trials: 4000, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	sum := a.YieldSummary(res, 3)
	for _, ws := range sum.WorstSites {
		k := siteNamed(t, a, ws.Name)
		if ws.PClosed != a.Sites[k].PInSpec || ws.OffsetM != a.Sites[k].Offset {
			t.Errorf("yield worst site %s: p %v offset %v, map %v %v", ws.Name, ws.PClosed, ws.OffsetM, a.Sites[k].PInSpec, a.Sites[k].Offset)
		}
		// Monte Carlo of the same model: within 5 standard errors (a
		// false alarm once in 1.7 million per site).
		if se := math.Max(ws.PMCSE, 1/float64(res.Trials)); math.Abs(ws.PMC-ws.PClosed) > 5*se {
			t.Errorf("site %s: Monte Carlo %.4f ± %.4f, closed form %.4f", ws.Name, ws.PMC, ws.PMCSE, ws.PClosed)
		}
	}
	// The CSV files say the same: sites.csv in_spec and comp.csv in_spec_before.
	var sb, cb bytes.Buffer
	if err := a.WriteSitesCSV(&sb, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	if err := cmp.WriteCSV(&cb, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	sr, _ := csv.NewReader(&sb).ReadAll()
	cr, _ := csv.NewReader(&cb).ReadAll()
	for k := 1; k < len(sr); k++ {
		// comp.csv gives the design offset and the misregistration without
		// it; their sum is sites.csv's offset to the 4 decimals printed.
		off, _ := strconv.ParseFloat(sr[k][10], 64)
		design, _ := strconv.ParseFloat(cr[k][5], 64)
		mis, _ := strconv.ParseFloat(cr[k][6], 64)
		if sr[k][17] != cr[k][9] || math.Abs(design+mis-off) > 1.5e-4 {
			t.Errorf("row %d: sites.csv in spec %s offset %s, comp.csv %s %s + %s", k, sr[k][17], sr[k][10], cr[k][9], cr[k][5], cr[k][6])
		}
	}
}

func sameKey(a, b *Curve) bool {
	la, ha := a.Curve.Range()
	lb, hb := b.Curve.Range()
	return la == lb && ha == hb && len(a.Curve.Points) == len(b.Curve.Points)
}

func rangeOf(c *Curve) [2]float64 {
	lo, hi := c.Curve.Range()
	return [2]float64{lo / mil, hi / mil}
}

func siteNamed(t *testing.T, a *Analysis, name string) int {
	for k := range a.Sites {
		if a.Sites[k].Site.Name == name {
			return k
		}
	}
	t.Fatalf("no site %q", name)
	return -1
}
