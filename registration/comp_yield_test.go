package registration

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
)

// mixedPanel is an invented panel that mixes wide-window and narrow-window
// couplers on one layer pair, the case where minimising the offset in mil
// alike for every site lowers the yield: 3 dB hybrids (allowed ±3.4 mil
// about a zero design offset) over the whole panel and 20 dB offset couplers
// (design offset 8 mil, allowed ±1.2 mil about it) on the right-hand side
// only, all with lines along y so that only the X scale difference moves
// them. L3 carries a mean shift of +0.9 mil that no scale can remove: the
// couplers want the X difference to pull their side back, the hybrids on the
// far left pay for it.
func mixedPanel() (*Model, []CompSite) {
	m := &Model{Contributors: []Contributor{
		{Name: "core A", Layers: []string{"L3"}, Terms: [NumTerms]Term{
			ScaleX: {Mean: -150e-6, Spread: 20e-6, Dist: Normal}, ScaleY: {Mean: -100e-6, Spread: 20e-6, Dist: Normal},
			OffsetX: {Mean: 0.9 * mil, Spread: 0.3 * mil, Dist: Normal}}, SiteSigma: 0.15 * mil},
		{Name: "core B", Layers: []string{"L4"}, Terms: [NumTerms]Term{
			ScaleX: {Mean: -120e-6, Spread: 20e-6, Dist: Normal}, ScaleY: {Mean: -250e-6, Spread: 20e-6, Dist: Normal}}},
	}}
	hybrid := Interval{Lo: -3.4 * mil, Hi: 3.4 * mil}
	coupler := Interval{Lo: 6.8 * mil, Hi: 9.2 * mil}
	var sites []CompSite
	for j := 0; j < 12; j++ {
		y := -10*in + 20*in*float64(j)/11
		for i := 0; i < 14; i++ {
			x := -7.5*in + 15*in*float64(i)/13
			sites = append(sites, CompSite{Pos: panel.Vec{X: x, Y: y}, U: panel.Vec{Y: 1}, Upper: "L3", Lower: "L4", Allowed: hybrid})
		}
		for i := 0; i < 5; i++ {
			x := 2.5*in + 4.5*in*float64(i)/4
			sites = append(sites, CompSite{Pos: panel.Vec{X: x, Y: y + 0.4*in}, U: panel.Vec{Y: 1}, Upper: "L3", Lower: "L4",
				Nominal: 8 * mil, Allowed: coupler})
		}
	}
	return m, sites
}

// diffYield returns the mean site yield of sites under m with the X and Y
// scale differences dx, dy (L3 − L4) added, by the closed form
// (Relative.Prob, SiteProb.Prob) — the brute-force reference's own
// evaluation, independent of the optimiser's variables.
func diffYield(m *Model, sites []CompSite, dx, dy float64) float64 {
	rel := m.Relative("L3", "L4")
	var s float64
	for _, st := range sites {
		row := rel.Row(st.Pos, st.U)
		q := rel.Prob(&row, st.Nominal)
		q.Mean += row.Across[ScaleX]*dx + row.Across[ScaleY]*dy
		s += q.Prob(st.Allowed)
	}
	return s / float64(len(sites))
}

// TestCompensateMixedPanelYield: the yield objective's recommendation is at
// least as good as keeping the applied artwork, and as good as a brute-force
// grid search over the scale differences (the only variables that move an
// offset); the normalised minimax does not lose yield either, and each
// reported yield is the closed form at its compensation.
func TestCompensateMixedPanelYield(t *testing.T) {
	m, sites := mixedPanel()
	keep := diffYield(m, sites, 0, 0)
	// Grid over ±400 ppm in steps of 10 ppm, then two finer levels.
	bx, by, best := 0.0, 0.0, keep
	span, step := 400e-6, 10e-6
	for level := 0; level < 3; level++ {
		cx, cy := bx, by
		for dx := cx - span; dx <= cx+span+1e-12; dx += step {
			for dy := cy - span; dy <= cy+span+1e-12; dy += step {
				if y := diffYield(m, sites, dx, dy); y > best {
					bx, by, best = dx, dy, y
				}
			}
		}
		span, step = 2*step, step/10
	}
	if best < keep+0.01 {
		t.Fatalf("fixture: the grid gains only %.4f over keeping the artwork (%.4f); the panel does not test the trade-off", best-keep, keep)
	}
	for _, o := range []Objective{SiteYield, Worst, RMS} {
		t.Run(o.String(), func(t *testing.T) {
			r, err := Compensate(m, sites, &CompSettings{Objective: o})
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(r.YieldBefore-keep) > 1e-12 {
				t.Errorf("yield before %.12f, closed form keeping the artwork %.12f", r.YieldBefore, keep)
			}
			d := r.Pairs[0].Net
			if got := diffYield(m, sites, d[0], d[1]); math.Abs(got-r.YieldAfter) > 1e-12 {
				t.Errorf("yield after %.12f, closed form at the differences %.12f", r.YieldAfter, got)
			}
			if r.YieldAfter < r.YieldBefore || r.BelowApplied {
				t.Errorf("yield %.5f → %.5f (below applied %v)", r.YieldBefore, r.YieldAfter, r.BelowApplied)
			}
			if o == SiteYield && r.YieldAfter < best-yieldTie {
				t.Errorf("yield optimum %.9f below the grid search's %.9f at (%.2f, %.2f) ppm", r.YieldAfter, best, bx*1e6, by*1e6)
			}
			if o == Worst && r.UsedAfter > r.UsedBefore {
				t.Errorf("window used %.4f → %.4f", r.UsedBefore, r.UsedAfter)
			}
			t.Logf("%s: yield %.4f %% → %.4f %% (grid best %.4f %%), window used %.3f → %.3f, differences X %+.2f Y %+.2f ppm",
				o, 100*r.YieldBefore, 100*r.YieldAfter, 100*best, r.UsedBefore, r.UsedAfter, d[0]*1e6, d[1]*1e6)
		})
	}
}

// TestCompensateBudgetThatDoesNotBind: a drill budget that the answer
// without one already keeps (but that the artwork bound could break, so it
// is not dropped as slack) gives exactly the same recommendation; a tighter
// one is kept and costs yield.
func TestCompensateBudgetThatDoesNotBind(t *testing.T) {
	m, sites := mixedPanel()
	for _, o := range []Objective{SiteYield, Worst, RMS} {
		t.Run(o.String(), func(t *testing.T) {
			free, err := Compensate(m, sites, &CompSettings{Objective: o})
			if err != nil {
				t.Fatal(err)
			}
			budget := 1.5 * free.DrillAfter
			with, err := Compensate(m, sites, &CompSettings{Objective: o, DrillBudget: budget})
			if err != nil {
				t.Fatal(err)
			}
			if strings.Contains(strings.Join(with.Notes, " "), "cannot bind") {
				t.Fatalf("budget %.3g m dropped as slack; the test needs one the bound could break", budget)
			}
			for i := range free.Layers {
				a, b := free.Layers[i], with.Layers[i]
				if a.X.Scale != b.X.Scale || a.Y.Scale != b.Y.Scale {
					t.Errorf("%s: X %.6f Y %.6f ppm without the budget, %.6f %.6f with it", a.Layer, a.X.Scale*1e6, a.Y.Scale*1e6, b.X.Scale*1e6, b.Y.Scale*1e6)
				}
			}
			tight := 0.6 * free.DrillAfter
			bound, err := Compensate(m, sites, &CompSettings{Objective: o, DrillBudget: tight})
			if err != nil {
				t.Fatal(err)
			}
			if bound.DrillAfter > tight*(1+capSlack)+capSlack/toUM {
				t.Errorf("drill registration %.4g m beyond the budget %.4g m", bound.DrillAfter, tight)
			}
			if o == SiteYield && bound.YieldAfter > free.YieldAfter+yieldTie {
				t.Errorf("the budget raised the yield optimum: %.6f → %.6f", free.YieldAfter, bound.YieldAfter)
			}
		})
	}
}

// TestCompensateStandardError: with standard errors σ3 and σ4 on the two
// layers' mean X scales, the difference that moves the offsets has standard
// error √(σ3² + σ4²) (it moves one for one with the measured difference
// [calculated here]); a step finer than it is flagged.
func TestCompensateStandardError(t *testing.T) {
	m, sites := mixedPanel()
	se := map[string]MovementSE{"L3": {X: 3e-6, Y: 3e-6, Panels: 5}, "L4": {X: 4e-6, Y: 4e-6, Panels: 5}}
	r, err := Compensate(m, sites, &CompSettings{SE: se, Step: 1e-6})
	if err != nil {
		t.Fatal(err)
	}
	if got := r.Pairs[0].SE[0]; math.Abs(got-5e-6) > 1e-12 {
		t.Errorf("X difference standard error %.6g, want √(3² + 4²) = 5 ppm", got)
	}
	if !r.StepFinerThanSE || !strings.Contains(strings.Join(r.Notes, " "), "finer than that standard error") {
		t.Errorf("a 1 ppm step under a 2.5 ppm standard error is not flagged: %q", r.Notes)
	}
	r, err = Compensate(m, sites, &CompSettings{SE: se, Step: 5e-6})
	if err != nil {
		t.Fatal(err)
	}
	if r.StepFinerThanSE {
		t.Errorf("a 5 ppm step flagged under a %.2g standard error", r.Layers[0].X.SE)
	}
}

// TestCompensateAppliedSetting: the absolute setting follows the product
// convention of Applied. A layer built with +200 ppm that measured −10 ppm
// and whose change cancels its own measured scale, f = 1/(1 − 10 ppm), ends
// at (1 + 200 ppm)/(1 − 10 ppm) − 1 = +210.002 ppm (Setting(MaterialScale(
// −10 ppm, +200 ppm)) [calculated here]). A tight drill budget on a layer
// whose partner does not move forces that cancellation.
func TestCompensateAppliedSetting(t *testing.T) {
	m := &Model{Contributors: []Contributor{
		{Name: "L3 as built", Layers: []string{"L3"}, Terms: [NumTerms]Term{ScaleX: {Mean: -10e-6}, ScaleY: {Mean: -10e-6}}},
	}}
	var sites []CompSite
	for _, p := range []panel.Vec{{X: -8 * in, Y: -10 * in}, {X: 8 * in, Y: 10 * in}, {X: -8 * in, Y: 10 * in}, {X: 8 * in, Y: -10 * in}} {
		for _, u := range []panel.Vec{{X: 1}, {Y: 1}} {
			sites = append(sites, CompSite{Pos: p, U: u, Upper: "L3", Lower: "L4", Allowed: wideWindow})
		}
	}
	applied := AppliedSet{"L3": {Layer: "L3", ScaleX: 200e-6, ScaleY: 180e-6}}
	r, err := Compensate(m, sites, &CompSettings{Objective: Worst, Applied: applied, DrillBudget: 0.001 * mil})
	if err != nil {
		t.Fatal(err)
	}
	l3 := r.Layers[0]
	want := Setting(MaterialScale(-10e-6, 200e-6))
	// The smallest change within the budget sits on it: 0.001 mil over the
	// 8 in lever arm of the sites' x is 0.125 ppm from full cancellation.
	if math.Abs(l3.X.Setting-want) > 0.126e-6 || math.Abs(l3.X.Scale-10e-6) > 0.126e-6 {
		t.Errorf("L3 X setting %+.4f ppm (change %+.4f), want %+.4f ppm (change ≈ +10)", l3.X.Setting*1e6, l3.X.Scale*1e6, want*1e6)
	}
	if math.Abs(l3.X.Movement-MaterialScale(-10e-6, 200e-6)) > 1e-15 || math.Abs(l3.X.Movement+209.958e-6) > 0.001e-6 {
		t.Errorf("L3 X movement %+.4f ppm, want −209.958", l3.X.Movement*1e6)
	}
	if got := (1+l3.X.Applied)*(1+l3.X.Scale) - 1; math.Abs(got-l3.X.Setting) > 1e-15 || l3.X.SettingFactor != 1+l3.X.Setting {
		t.Errorf("setting %g is not (1+applied)(1+change) − 1 = %g", l3.X.Setting, got)
	}
}

// TestCompensateSaysWhenBelowApplied: a panel of well-centred hybrids and
// one coupler whose window (1.9 to 2.1 mil, σ 0.5 mil) no compensation can
// make good. The minimax of the window used chases that coupler and costs the
// hybrids yield, which the result must flag; the yield objective does not
// lose yield.
func TestCompensateSaysWhenBelowApplied(t *testing.T) {
	m := &Model{Contributors: []Contributor{{Name: "imaging", Layers: []string{"L3"},
		Terms: [NumTerms]Term{OffsetX: {Spread: 0.5 * mil, Dist: Normal}}}}}
	var sites []CompSite
	for i := 0; i < 15; i++ {
		x := -7*in + 14*in*float64(i)/14
		sites = append(sites, CompSite{Pos: panel.Vec{X: x}, U: panel.Vec{Y: 1}, Upper: "L3", Lower: "L4", Allowed: Interval{Lo: -1.8 * mil, Hi: 1.8 * mil}})
	}
	sites = append(sites, CompSite{Pos: panel.Vec{X: 7 * in, Y: 1 * in}, U: panel.Vec{Y: 1}, Upper: "L3", Lower: "L4", Allowed: Interval{Lo: 1.9 * mil, Hi: 2.1 * mil}})
	w, err := Compensate(m, sites, &CompSettings{Objective: Worst})
	if err != nil {
		t.Fatal(err)
	}
	if !(w.YieldAfter < w.YieldBefore) || !w.BelowApplied || !strings.Contains(strings.Join(w.Notes, " "), "LOWER site yield") {
		t.Errorf("worst: yield %.5f → %.5f, below applied %v, notes %q", w.YieldBefore, w.YieldAfter, w.BelowApplied, w.Notes)
	}
	y, err := Compensate(m, sites, &CompSettings{})
	if err != nil {
		t.Fatal(err)
	}
	if y.YieldAfter < y.YieldBefore || y.BelowApplied {
		t.Errorf("yield: %.5f → %.5f, below applied %v", y.YieldBefore, y.YieldAfter, y.BelowApplied)
	}
}

// TestCompensateRandomPanels checks the invariants on random models and
// panels (fixed seed): the yield objective never ends below keeping the
// artwork, no objective ends below it without saying so, a budget 1.5 times
// what the free answer needs changes nothing, and a binding one is kept.
func TestCompensateRandomPanels(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 13))
	norm := func(sd float64) Term { return Term{Mean: sd * rng.NormFloat64(), Spread: sd / 4, Dist: Normal} }
	for c := 0; c < 12; c++ {
		m := &Model{Datum: panel.Vec{X: 0.5 * in}, Contributors: []Contributor{
			{Name: "A", Layers: []string{"L3"}, Terms: [NumTerms]Term{ScaleX: norm(150e-6), ScaleY: norm(150e-6), OffsetX: norm(0.5 * mil), OffsetY: norm(0.5 * mil), Rotation: norm(20e-6)}, SiteSigma: 0.1 * mil},
			{Name: "B", Layers: []string{"L4"}, Terms: [NumTerms]Term{ScaleX: norm(150e-6), ScaleY: norm(150e-6), Skew: norm(10e-6)}},
			{Name: "C", Layers: []string{"L5"}, Terms: [NumTerms]Term{ScaleX: norm(150e-6), ScaleY: norm(150e-6)}},
		}}
		var sites []CompSite
		for i := 0; i < 60; i++ {
			lower := "L4"
			if i%3 == 0 {
				lower = "L5"
			}
			w := (0.8 + 3*rng.Float64()) * mil
			nom := 0.0
			if i%2 == 1 {
				nom = 8 * mil
			}
			sites = append(sites, CompSite{Pos: panel.Vec{X: (rng.Float64() - 0.5) * 16 * in, Y: (rng.Float64() - 0.5) * 22 * in},
				U: panel.Dir(float64(rng.IntN(4)) * math.Pi / 2), Upper: "L3", Lower: lower, Nominal: nom, Allowed: Interval{Lo: nom - w, Hi: nom + w}})
		}
		for _, o := range []Objective{SiteYield, Worst, RMS} {
			free, err := Compensate(m, sites, &CompSettings{Objective: o})
			if err != nil {
				t.Fatalf("case %d %s: %v", c, o, err)
			}
			if o == SiteYield && free.YieldAfter < free.YieldBefore-1e-12 {
				t.Errorf("case %d: yield %.6f → %.6f", c, free.YieldBefore, free.YieldAfter)
			}
			if free.BelowApplied != (free.YieldAfter < free.YieldBefore-yieldTie) {
				t.Errorf("case %d %s: below applied %v at %.6f → %.6f", c, o, free.BelowApplied, free.YieldBefore, free.YieldAfter)
			}
			with, err := Compensate(m, sites, &CompSettings{Objective: o, DrillBudget: 1.5 * free.DrillAfter})
			if err != nil {
				t.Fatalf("case %d %s, slack budget: %v", c, o, err)
			}
			for i := range free.Layers {
				if free.Layers[i].X.Scale != with.Layers[i].X.Scale || free.Layers[i].Y.Scale != with.Layers[i].Y.Scale {
					t.Errorf("case %d %s: a budget that does not bind changed %s", c, o, free.Layers[i].Layer)
				}
			}
			tight := 0.9 * free.DrillAfter
			if bound, err := Compensate(m, sites, &CompSettings{Objective: o, DrillBudget: tight}); err == nil {
				if bound.DrillAfter > tight*(1+capSlack)+capSlack/toUM {
					t.Errorf("case %d %s: drill %.4g beyond the budget %.4g", c, o, bound.DrillAfter, tight)
				}
			} else if !errors.Is(err, ErrInfeasible) {
				t.Errorf("case %d %s, binding budget: %v", c, o, err)
			}
		}
	}
}
