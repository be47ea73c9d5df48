package registration

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/regdrift/regdrift/panel"
)

// compGrid returns nx × ny sites over a w × h area with lines along u,
// traces on upper and lower.
func compGrid(nx, ny int, w, h float64, u panel.Vec, upper, lower string) []CompSite {
	var s []CompSite
	for j := 0; j < ny; j++ {
		for i := 0; i < nx; i++ {
			p := panel.Vec{X: -w/2 + w*float64(i)/float64(nx-1), Y: -h/2 + h*float64(j)/float64(ny-1)}
			s = append(s, CompSite{Pos: p, U: u, Upper: upper, Lower: lower, Allowed: wideWindow})
		}
	}
	return s
}

// wideWindow is an allowed interval of ±10 mil about a zero design offset,
// the same for every site: with no spread the window used is |offset|/10 mil,
// so the normalised objectives reduce to the plain worst and rms offsets.
var wideWindow = Interval{Lo: -10 * 25.4 * um, Hi: 10 * 25.4 * um}

// twoCores is an analytic case worked by hand [calculated here]: the core
// under L3 grows by +250 ppm in y, the core under L4 shrinks by 50 ppm, and
// the lines run along x, so the offset at height y is (250 − (−50)) ppm · y.
// Compensation must make the Y difference −300 ppm; X moves no offset.
func twoCores() *Model {
	return &Model{Contributors: []Contributor{
		{Name: "core A", Layers: []string{"L3", "L2"}, Terms: [NumTerms]Term{ScaleY: {Mean: 250e-6}}},
		{Name: "core B", Layers: []string{"L4", "L5"}, Terms: [NumTerms]Term{ScaleY: {Mean: -50e-6}}},
	}}
}

func TestCompensateAnalytic(t *testing.T) {
	sites := compGrid(9, 11, 16*in, 22*in, panel.Vec{X: 1}, "L3", "L4")
	// The offset before is 300 ppm × 11 in = 3.3 mil at the top row.
	wantBefore := 300e-6 * 11 * in
	tests := []struct {
		name   string
		set    CompSettings
		net3y  float64 // expected net Y change of L3
		net4y  float64
		common string
	}{
		// Smallest change (least squares of the scale changes): split the
		// −300 ppm difference evenly.
		{"worst, smallest", CompSettings{Objective: Worst}, -150e-6, 150e-6, "smallest"},
		{"rms, smallest", CompSettings{Objective: RMS}, -150e-6, 150e-6, "smallest"},
		// A 5 mil drill budget does not bind (each layer ends 100 ppm × 11 in
		// = 1.1 mil from the holes), so it changes nothing.
		{"worst, slack drill budget", CompSettings{Objective: Worst, DrillBudget: 5 * 25.4 * um}, -150e-6, 150e-6, "smallest"},
		{"rms, slack drill budget", CompSettings{Objective: RMS, DrillBudget: 5 * 25.4 * um}, -150e-6, 150e-6, "smallest"},
		// A 0.5 mil budget binds: each layer must end within 0.5 mil/11 in =
		// 45.45 ppm of the drilled holes, |250 + c3| ≤ 45.45 and
		// |−50 + c4| ≤ 45.45 ppm with c3 − c4 = −300 ppm; the smallest
		// change, least c3² + c4², is then c4 = 95.45, c3 = −204.55 ppm,
		// both layers on the budget [calculated here].
		{"worst, binding drill budget", CompSettings{Objective: Worst, DrillBudget: 0.5 * 25.4 * um}, -300e-6 + (50e-6 + 0.5/11*1e-3), 50e-6 + 0.5/11*1e-3, "drill"},
		{"rms, binding drill budget", CompSettings{Objective: RMS, DrillBudget: 0.5 * 25.4 * um}, -300e-6 + (50e-6 + 0.5/11*1e-3), 50e-6 + 0.5/11*1e-3, "drill"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r, err := Compensate(twoCores(), sites, &tt.set)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(r.WorstBefore-wantBefore) > 1e-12 {
				t.Errorf("worst before %g, want %g", r.WorstBefore, wantBefore)
			}
			if r.WorstAfter > 1e-12 {
				t.Errorf("worst after %g m, want 0", r.WorstAfter)
			}
			if len(r.Layers) != 2 || r.Layers[0].Layer != "L3" || r.Layers[1].Layer != "L4" {
				t.Fatalf("layers %+v", r.Layers)
			}
			l3, l4 := r.Layers[0], r.Layers[1]
			if math.Abs(l3.Y.Net-tt.net3y) > 1e-9 || math.Abs(l4.Y.Net-tt.net4y) > 1e-9 {
				t.Errorf("net Y L3 %g, L4 %g; want %g, %g", l3.Y.Net, l4.Y.Net, tt.net3y, tt.net4y)
			}
			if d := r.Pairs[0].Net[1]; math.Abs(d+300e-6) > 1e-9 {
				t.Errorf("Y difference %g, want -300 ppm", d)
			}
			if !l3.X.Free || !l4.X.Free || l3.Y.Free || l4.Y.Free {
				t.Errorf("free flags X %v %v, Y %v %v; want X free only", l3.X.Free, l4.X.Free, l3.Y.Free, l4.Y.Free)
			}
			if math.Abs(l3.X.Net) > 1e-9 || math.Abs(l4.X.Net) > 1e-9 {
				t.Errorf("free X set to %g, %g; want 0 (smallest, and nothing to correct)", l3.X.Net, l4.X.Net)
			}
			if r.Free != 3 || !strings.Contains(r.Common, tt.common) {
				t.Errorf("free %d, common %q", r.Free, r.Common)
			}
			notes := strings.Join(r.Notes, "; ")
			if !strings.Contains(notes, "X compensation moves no offset") || !strings.Contains(notes, "difference") {
				t.Errorf("notes %q do not say that X is free and only differences matter", notes)
			}
			// Artwork factor: the layer's scale is (1+s)·f − 1, so a net change
			// c takes f = 1 + c/(1+s) [calculated here: (1+s)·f − 1 = s + c].
			if f := l3.Y.Factor; math.Abs(f-(1+tt.net3y/(1+250e-6))) > 1e-9 {
				t.Errorf("L3 Y factor %.12f, want 1 + c/(1+250 ppm) = %.12f", f, 1+tt.net3y/(1+250e-6))
			}
			if b := tt.set.DrillBudget; tt.common == "drill" && (r.DrillAfter > b*(1+capSlack) || r.DrillAfter < b*(1-1e-6)) {
				t.Errorf("drill registration after %g, want the budget %g (the smallest change sits on it)", r.DrillAfter, b)
			}
		})
	}
}

// TestCompensateAgainstGridSearch checks the linear programme's optimum
// against a brute-force grid search over the two scale differences that
// move the offsets, on a small case with lines in several directions and
// every kind of term.
func TestCompensateAgainstGridSearch(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	m := &Model{Datum: panel.Vec{X: 1 * in}, Contributors: []Contributor{
		{Layers: []string{"A"}, Terms: [NumTerms]Term{ScaleX: {Mean: -310e-6}, ScaleY: {Mean: -140e-6}, Rotation: {Mean: 30e-6}, OffsetX: {Mean: 8 * um}}},
		{Layers: []string{"B"}, Terms: [NumTerms]Term{ScaleX: {Mean: -120e-6}, ScaleY: {Mean: -260e-6}, Skew: {Mean: 20e-6}, OffsetY: {Mean: -5 * um}}},
	}}
	var sites []CompSite
	for i := 0; i < 24; i++ {
		a := rng.Float64() * 2 * math.Pi
		sites = append(sites, CompSite{Pos: panel.Vec{X: (rng.Float64() - 0.5) * 16 * in, Y: (rng.Float64() - 0.5) * 22 * in},
			U: panel.Dir(a), Upper: "A", Lower: "B", Allowed: wideWindow})
	}
	r, err := Compensate(m, sites, &CompSettings{Objective: Worst})
	if err != nil {
		t.Fatal(err)
	}
	rel := m.Relative("A", "B")
	worst := func(dx, dy float64) float64 {
		var w float64
		for _, s := range sites {
			row := rel.Row(s.Pos, s.U)
			e := rel.Stats(row).MeanAcross + row.Across[ScaleX]*dx + row.Across[ScaleY]*dy
			w = math.Max(w, math.Abs(e))
		}
		return w
	}
	// Coarse grid over ±1000 ppm, then finer grids around the best point.
	bx, by, bw := 0.0, 0.0, math.Inf(1)
	span, step := 1000e-6, 20e-6
	for level := 0; level < 4; level++ {
		cx, cy := bx, by
		for dx := cx - span; dx <= cx+span+1e-12; dx += step {
			for dy := cy - span; dy <= cy+span+1e-12; dy += step {
				if w := worst(dx, dy); w < bw {
					bx, by, bw = dx, dy, w
				}
			}
		}
		span, step = 2*step, step/10
	}
	if r.WorstAfter > bw*(1+1e-9) {
		t.Errorf("linear programme worst %.6g m, grid search found %.6g m", r.WorstAfter, bw)
	}
	// The last grid step is 0.02 ppm; over a 14 in lever arm that is 7 nm.
	if bw-r.WorstAfter > 0.01*um {
		t.Errorf("grid search %.6g m is far above the linear programme's %.6g m", bw, r.WorstAfter)
	}
	if math.Abs(r.Pairs[0].Net[0]-bx) > 0.5e-6 || math.Abs(r.Pairs[0].Net[1]-by) > 0.5e-6 {
		t.Logf("optimum differences (%.3g, %.3g) ppm, grid (%.3g, %.3g) ppm (the optimum need not be unique)", r.Pairs[0].Net[0]*1e6, r.Pairs[0].Net[1]*1e6, bx*1e6, by*1e6)
	}
	if w := worst(r.Pairs[0].Net[0], r.Pairs[0].Net[1]); math.Abs(w-r.WorstAfter) > 1e-12 {
		t.Errorf("reported worst %g, recomputed %g", r.WorstAfter, w)
	}
}

// TestCompensateRMSAgainstQR checks the rms objective against gonum's QR
// least-squares solve in the two differences.
func TestCompensateRMSAgainstQR(t *testing.T) {
	m := &Model{Contributors: []Contributor{
		{Layers: []string{"A"}, Terms: [NumTerms]Term{ScaleX: {Mean: -310e-6}, ScaleY: {Mean: -140e-6}, Rotation: {Mean: 30e-6}}},
		{Layers: []string{"B"}, Terms: [NumTerms]Term{ScaleX: {Mean: -120e-6}, ScaleY: {Mean: -260e-6}}},
	}}
	sites := append(compGrid(5, 5, 16*in, 22*in, panel.Vec{X: 1}, "A", "B"), compGrid(4, 6, 14*in, 20*in, panel.Dir(math.Pi/3), "A", "B")...)
	r, err := Compensate(m, sites, &CompSettings{Objective: RMS})
	if err != nil {
		t.Fatal(err)
	}
	rel := m.Relative("A", "B")
	a := mat.NewDense(len(sites), 2, nil)
	b := mat.NewDense(len(sites), 1, nil)
	for i, s := range sites {
		row := rel.Row(s.Pos, s.U)
		a.Set(i, 0, row.Across[ScaleX])
		a.Set(i, 1, row.Across[ScaleY])
		b.Set(i, 0, -rel.Stats(row).MeanAcross)
	}
	var x mat.Dense
	if err := x.Solve(a, b); err != nil {
		t.Fatal(err)
	}
	for k := 0; k < 2; k++ {
		if math.Abs(r.Pairs[0].Net[k]-x.At(k, 0)) > 1e-12 {
			t.Errorf("difference %d: %g, QR %g", k, r.Pairs[0].Net[k], x.At(k, 0))
		}
	}
	if r.RMSAfter >= r.RMSBefore {
		t.Errorf("rms %g → %g", r.RMSBefore, r.RMSAfter)
	}
}

// tolBoundedWorst is the tolerance on the bounded worst offset in
// TestCompensateStepAndBounds. The simplex method sees right-hand sides
// perturbed by up to 1e-9·(1 + |h|) (the Charnes perturbation in solveLP);
// on the two bound rows (h = 100 ppm) that is 1.01e-7 ppm per layer, and over
// the 11 in lever arm 2 × 1.01e-13 × 0.2794 m = 5.6e-14 m. The measured
// error is 4.2e-14 m. The tolerance is 4 times the perturbation bound (about
// 5 times the measured error), so any pattern of the perturbation passes,
// while the earlier expected value 100 ppm·(1 + 1e-4)·11 in, 8.4e-9 m off,
// fails by a factor of 4e4.
const tolBoundedWorst = 2.2e-13 // m

func TestCompensateStepAndBounds(t *testing.T) {
	sites := compGrid(9, 11, 16*in, 22*in, panel.Dir(0.3), "L3", "L4")
	m := twoCores()
	m.Contributors[0].Terms[ScaleX] = Term{Mean: -137e-6}
	cont, err := Compensate(m, sites, &CompSettings{Objective: Worst})
	if err != nil {
		t.Fatal(err)
	}
	r, err := Compensate(m, sites, &CompSettings{Objective: Worst, Step: 5e-6})
	if err != nil {
		t.Fatal(err)
	}
	for _, l := range r.Layers {
		for _, a := range []AxisComp{l.X, l.Y} {
			if q := a.Scale / 5e-6; math.Abs(q-math.Round(q)) > 1e-6 {
				t.Errorf("%s: %.4f ppm is not a multiple of 5 ppm", l.Layer, a.Scale*1e6)
			}
		}
	}
	if r.WorstAfter < cont.WorstAfter-1e-15 {
		t.Errorf("rounded worst %g below the continuous optimum %g", r.WorstAfter, cont.WorstAfter)
	}
	// A lever arm of 14 in and a rounding of 2.5 ppm per layer bound the loss.
	if r.WorstAfter > cont.WorstAfter+2*2.5e-6*14*in {
		t.Errorf("rounded worst %g far above the continuous %g", r.WorstAfter, cont.WorstAfter)
	}
	// Bounds: |f − 1| ≤ 100 ppm per layer cannot close a 300 ppm gap; the
	// best is to use both layers fully. The net change of a layer is
	// Net = (f − 1)(1 + s) (see AxisComp.Net), so L3 (s = +250 ppm) reaches
	// −100 ppm·(1 + 250e-6) and L4 (s = −50 ppm) +100 ppm·(1 − 50e-6); their
	// difference is −100 ppm·(2 + 2e-4), which leaves
	// 300 ppm − 100 ppm·(2 + 2e-4) = 100 ppm·(1 − 2e-4) at the top row,
	// 11 in from the datum [calculated here from the model].
	b, err := Compensate(twoCores(), compGrid(9, 11, 16*in, 22*in, panel.Vec{X: 1}, "L3", "L4"), &CompSettings{Objective: Worst, Max: 100e-6})
	if err != nil {
		t.Fatal(err)
	}
	if want := 100e-6 * (1 - 2e-4) * 11 * in; math.Abs(b.WorstAfter-want) > tolBoundedWorst {
		t.Errorf("bounded worst %.10g m, want 100 ppm·(1 − 2e-4)·11 in = %.10g m (difference %.2g m)", b.WorstAfter, want, b.WorstAfter-want)
	}
	for _, l := range b.Layers {
		if math.Abs(l.Y.Scale) > 100e-6*(1+1e-8) {
			t.Errorf("%s: %g beyond the bound", l.Layer, l.Y.Scale)
		}
	}
	// A drill budget tighter than the material movement allows is infeasible.
	if _, err := Compensate(twoCores(), sites, &CompSettings{Objective: Worst, DrillBudget: 0.1 * 25.4 * um, Max: 100e-6}); err == nil {
		t.Error("impossible drill budget accepted")
	}
}

// BenchmarkCompensate10k runs each objective over 10,000 sites of the mixed
// kind (wide and narrow windows, a spread on every term) with and without a
// drill budget that does not bind (the speed target is 1 s).
func BenchmarkCompensate10k(b *testing.B) {
	m, _ := mixedPanel()
	m.Contributors[1].Terms[Rotation] = Term{Mean: 40e-6, Spread: 10e-6, Dist: Normal}
	var sites []CompSite
	for i, s := range compGrid(100, 100, 15*in, 20*in, panel.Vec{Y: 1}, "L3", "L4") {
		s.Allowed = Interval{Lo: -3.4 * mil, Hi: 3.4 * mil}
		if i%3 == 0 {
			s.Nominal, s.Allowed = 8*mil, Interval{Lo: 6.8 * mil, Hi: 9.2 * mil}
		}
		if i%5 == 0 {
			s.U = panel.Vec{X: 1}
		}
		sites = append(sites, s)
	}
	for _, o := range []Objective{SiteYield, Worst, RMS} {
		for _, budget := range []float64{0, 12 * mil} {
			b.Run(fmt.Sprintf("%s/budget=%v", o, budget > 0), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					if _, err := Compensate(m, sites, &CompSettings{Objective: o, DrillBudget: budget, Step: 5e-6}); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}

// ExampleCompensate recommends compensation for two cores that shrink
// differently in y under lines that run along x: only the Y difference
// (+120 ppm) moves the offsets, the yield objective removes it, and the
// smallest change from today's artwork splits it between the layers. With
// the lot built at +150 ppm on L3, the new L3 setting is
// (1 + 150 ppm)(1 − 60 ppm) − 1 = +89.99 ppm.
func ExampleCompensate() {
	m := &Model{Contributors: []Contributor{
		{Name: "core A", Layers: []string{"L3"}, Terms: [NumTerms]Term{ScaleY: {Mean: -180e-6}}, SiteSigma: 5e-6},
		{Name: "core B", Layers: []string{"L4"}, Terms: [NumTerms]Term{ScaleY: {Mean: -300e-6}}},
	}}
	var sites []CompSite
	for _, y := range []float64{-0.25, 0, 0.25} {
		sites = append(sites, CompSite{Pos: panel.Vec{Y: y}, U: panel.Vec{X: 1}, Upper: "L3", Lower: "L4",
			Allowed: Interval{Lo: -20e-6, Hi: 20e-6}})
	}
	applied := AppliedSet{"L3": {Layer: "L3", ScaleY: 150e-6}}
	r, err := Compensate(m, sites, &CompSettings{Step: 1e-6, Applied: applied})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, l := range r.Layers {
		fmt.Printf("%s: Y change %+.0f ppm, new setting %+.2f ppm (factor %.8f), X free: %v\n", l.Layer, l.Y.Scale*1e6, l.Y.Setting*1e6, l.Y.SettingFactor, l.X.Free)
	}
	fmt.Printf("worst offset %.1f µm -> %.1f µm, site yield %.2f %% -> %.2f %%\n", r.WorstBefore*1e6, r.WorstAfter*1e6, 100*r.YieldBefore, 100*r.YieldAfter)
	// Output:
	// L3: Y change -60 ppm, new setting +89.99 ppm (factor 1.00008999), X free: true
	// L4: Y change +60 ppm, new setting +60.00 ppm (factor 1.00006000), X free: true
	// worst offset 30.0 µm -> 0.0 µm, site yield 34.85 % -> 99.99 %
}
