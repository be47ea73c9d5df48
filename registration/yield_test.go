package registration

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/stat/distuv"

	"github.com/regdrift/regdrift/panel"
)

const (
	mil  = 25.4e-6
	inch = 0.0254
	ppm  = 1e-6
	urad = 1e-6
)

// TestNormalCDFQuantile checks Φ and Φ⁻¹ against gonum's stat/distuv
// (gonum v0.17.0, distuv.UnitNormal), a general-purpose reference library.
func TestNormalCDFQuantile(t *testing.T) {
	for _, x := range []float64{-8, -5, -3, -2.5, -1.96, -1, -0.3, 0, 0.3, 1, 1.645, 2, 3, 5, 8} {
		want := distuv.UnitNormal.CDF(x)
		got := NormalCDF(x)
		if math.Abs(got-want) > 1e-15+1e-12*want {
			t.Errorf("NormalCDF(%g) = %.17g, distuv %.17g", x, got, want)
		}
	}
	for _, p := range []float64{1e-12, 1e-6, 0.001, 0.01, 0.025, 0.05, 0.1, 0.3, 0.5, 0.7, 0.9, 0.95, 0.975, 0.99, 0.999, 1 - 1e-9} {
		want := distuv.UnitNormal.Quantile(p)
		got := NormalQuantile(p)
		if math.Abs(got-want) > 1e-9*math.Max(1, math.Abs(want)) {
			t.Errorf("NormalQuantile(%g) = %.17g, distuv %.17g", p, got, want)
		}
	}
	// Round trip.
	for _, p := range []float64{0.001, 0.2, 0.5, 0.8, 0.999} {
		if got := NormalCDF(NormalQuantile(p)); math.Abs(got-p) > 1e-14 {
			t.Errorf("Φ(Φ⁻¹(%g)) = %g", p, got)
		}
	}
}

// TestSpecInterval inverts analytic coupling curves whose in-spec intervals
// follow from the quadratic formula.
func TestSpecInterval(t *testing.T) {
	tests := []struct {
		name                 string
		c0, c1, c2           float64 // f(x) = c0 + c1·x + c2·x², x in mil
		nominal, target, tol float64
		lo, hi               float64 // search range, mil
		wantLo, wantHi       float64 // mil
		wantLimLo, wantLimHi int
		clippedLo, clippedHi bool
	}{
		// A centred broadside pair: coupling falls quadratically either side.
		{"centred", -3.0, 0, -0.0144, 0, -3.0, 0.25, -10, 10, -math.Sqrt(0.25 / 0.0144), math.Sqrt(0.25 / 0.0144), -1, -1, false, false},
		// Nominal coupling off-target: the interval is asymmetric about 0... not here, but its ends meet the lower limit.
		{"centred-off-target", -3.1, 0, -0.0144, 0, -3.0, 0.25, -10, 10, -math.Sqrt(0.15 / 0.0144), math.Sqrt(0.15 / 0.0144), -1, -1, false, false},
		// An intentionally offset pair: coupling changes linearly, ends meet
		// different limits.
		{"linear", -10, 0.5, 0, 0, -10, 0.5, -10, 10, -1, 1, -1, 1, false, false},
		// Linear plus curvature: asymmetric.
		{"asymmetric", -10, 0.5, -0.05, 0, -10, 0.5, -10, 10,
			(0.5 - math.Sqrt(0.25+4*0.05*0.5)) / (2 * 0.05), // f = target−tol on the left: −0.05x²+0.5x+0.5 = 0
			(0.5 - math.Sqrt(0.25-4*0.05*0.5)) / (2 * 0.05), // f = target+tol on the right: −0.05x²+0.5x−0.5 = 0
			-1, 1, false, false},
		// The range ends inside spec: the interval is clipped at the range.
		{"clipped", -3.0, 0, -0.0144, 0, -3.0, 0.25, -3, 10, -3, math.Sqrt(0.25 / 0.0144), 0, -1, true, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			f := func(x float64) float64 { x /= mil; return tt.c0 + tt.c1*x + tt.c2*x*x }
			iv, lim, err := SpecInterval(f, tt.lo*mil, tt.hi*mil, tt.nominal*mil, tt.target, tt.tol)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(iv.Lo/mil-tt.wantLo) > 1e-9 || math.Abs(iv.Hi/mil-tt.wantHi) > 1e-9 {
				t.Errorf("interval [%.12g, %.12g] mil, want [%.12g, %.12g]", iv.Lo/mil, iv.Hi/mil, tt.wantLo, tt.wantHi)
			}
			if lim.Limit != [2]int{tt.wantLimLo, tt.wantLimHi} || lim.Clipped != [2]bool{tt.clippedLo, tt.clippedHi} {
				t.Errorf("limits %+v, want %v %v", lim, [2]int{tt.wantLimLo, tt.wantLimHi}, [2]bool{tt.clippedLo, tt.clippedHi})
			}
			// At each unclipped end the coupling meets a spec limit.
			for k, x := range []float64{iv.Lo, iv.Hi} {
				if lim.Clipped[k] {
					continue
				}
				if d := math.Abs(math.Abs(f(x)-tt.target) - tt.tol); d > 1e-9 {
					t.Errorf("end %d: |f − target| − tol = %g dB", k, d)
				}
			}
		})
	}
	t.Run("nominal-out-of-spec", func(t *testing.T) {
		f := func(x float64) float64 { return -2.6 - 0.0144*(x/mil)*(x/mil) }
		iv, _, err := SpecInterval(f, -10*mil, 10*mil, 0, -3, 0.25)
		if !errors.Is(err, ErrNominalOutOfSpec) || !iv.Empty() {
			t.Errorf("got %v, %v; want an empty interval and ErrNominalOutOfSpec", iv, err)
		}
	})
	t.Run("bad-tolerance", func(t *testing.T) {
		f := func(x float64) float64 { return -3 }
		if _, _, err := SpecInterval(f, -1, 1, 0, -3, 0); err == nil {
			t.Error("tolerance 0 accepted")
		}
	})
}

// TestSiteProbUniform checks the exact normal-plus-uniform CDF against direct
// numerical integration of the normal CDF over the uniform part (gonum
// integrate/quad.Fixed, 200-point Gauss–Legendre on each half) and, with no
// normal part, against the uniform CDF itself.
func TestSiteProbUniform(t *testing.T) {
	for _, p := range []SiteProb{
		{Mean: 0.3, SD: 1, Uniform: 2},
		{Mean: -1, SD: 0.2, Uniform: 3},
		{Mean: 0, SD: 2, Uniform: 0.01},
		{Mean: 0, SD: 1, Uniform: 1e-9}, // folded into the normal part
	} {
		for _, x := range []float64{-6, -3, -1.5, -0.2, 0, 0.7, 2, 4, 7} {
			f := func(s float64) float64 { return NormalCDF((x - p.Mean - s) / p.SD) }
			want := (quad.Fixed(f, -p.Uniform, 0, 200, nil, 0) + quad.Fixed(f, 0, p.Uniform, 200, nil, 0)) / (2 * p.Uniform)
			if got := p.CDF(x); math.Abs(got-want) > 1e-10 {
				t.Errorf("%+v: CDF(%g) = %.15g, quadrature %.15g", p, x, got, want)
			}
		}
	}
	// Two uniform parts: the exact double difference against nested
	// quadrature of the one-box form over the second box.
	for _, p := range []SiteProb{
		{Mean: 0.3, SD: 1, Uniform: 2, Uniform2: 1},
		{Mean: -0.5, SD: 0.3, Uniform: 1.5, Uniform2: 1.5},
		{Mean: 0, SD: 0.5, Uniform: 1, Uniform2: 0.05},
		{Mean: 0.2, SD: 0, Uniform: 1, Uniform2: 0.4},  // no normal part: a trapezoid
		{Mean: 0, SD: 1, Uniform: 1, Uniform2: 1e-9},   // folded into the normal part
		{Mean: 0, SD: 0.2, Uniform: 1e-9, Uniform2: 0}, // folded into the normal part
		{Mean: 0, SD: 0.2, Uniform: 0, Uniform2: 0.5},  // only the second set: still exact
	} {
		one := SiteProb{Mean: p.Mean, SD: p.SD, Uniform: p.Uniform}
		if p.Uniform == 0 {
			one.Uniform = p.Uniform2
		}
		w2 := p.Uniform2
		if p.Uniform == 0 {
			w2 = 0
		}
		n, tol := 200, 1e-10
		if p.SD == 0 {
			n, tol = 4000, 1e-7 // the one-box CDF has kinks there
		}
		for _, x := range []float64{-4, -2, -1.1, -0.3, 0, 0.4, 1.2, 2.5, 5} {
			want := one.CDF(x)
			if w2 > 0 {
				f := func(s float64) float64 { return one.CDF(x - s) }
				want = (quad.Fixed(f, -w2, 0, n, nil, 0) + quad.Fixed(f, 0, w2, n, nil, 0)) / (2 * w2)
			}
			if got := p.CDF(x); math.Abs(got-want) > tol {
				t.Errorf("%+v: CDF(%g) = %.15g, quadrature %.15g", p, x, got, want)
			}
		}
	}
	u := SiteProb{Mean: 1, Uniform: 2}
	for _, x := range []float64{-2, -1, 0, 1, 2.5, 3, 4} {
		want := math.Min(1, math.Max(0, (x-(1-2))/4))
		if got := u.CDF(x); math.Abs(got-want) > 1e-15 {
			t.Errorf("uniform CDF(%g) = %g, want %g", x, got, want)
		}
	}
	if got := u.Prob(Interval{0, 2}); math.Abs(got-0.5) > 1e-15 {
		t.Errorf("uniform P([0, 2]) = %g, want 0.5", got)
	}
	if got := u.Prob(EmptyInterval()); got != 0 {
		t.Errorf("P(empty) = %g", got)
	}
}

// testYield is an invented two-layer model on an 18 x 24 in panel: normal
// scale, rotation and offset terms, a uniform offset_y term on each layer
// (two uniform parts across lines along x), a per-site sigma, and a contributor naming both layers (which must
// cancel).
func testYield(t testing.TB) *Yield { return testYieldWeighted(t, false) }

// testYieldWeighted is testYield, with weights when weighted: the shared
// core moves B by 0.95 of A's movement, and the upper imaging moves B by −0.5
// of A's, which stretches its uniform term by 1.5 in the offset.
func testYieldWeighted(t testing.TB, weighted bool) *Yield {
	m := &Model{Contributors: []Contributor{
		{Name: "upper imaging", Layers: []string{"A"}, Terms: [NumTerms]Term{
			OffsetX:  {Spread: 0.3 * mil, Dist: Normal},
			OffsetY:  {Spread: 0.5 * mil, Dist: Uniform},
			Rotation: {Spread: 20 * urad, Dist: Normal},
			ScaleX:   {Mean: 20 * ppm, Spread: 40 * ppm, Dist: Normal},
			ScaleY:   {Spread: 30 * ppm, Dist: Normal},
		}, SiteSigma: 0.15 * mil},
		{Name: "lower imaging", Layers: []string{"B"}, Terms: [NumTerms]Term{
			OffsetX: {Spread: 0.4 * mil, Dist: Normal},
			OffsetY: {Mean: 0.2 * mil, Spread: 1.2 * mil, Dist: Uniform},
			Skew:    {Spread: 15 * urad, Dist: Normal},
		}},
		{Name: "shared core", Layers: []string{"A", "B"}, Terms: [NumTerms]Term{
			ScaleX: {Mean: -300 * ppm, Spread: 100 * ppm, Dist: Normal},
		}, SiteSigma: 5 * mil},
	}}
	if weighted {
		m.Contributors[0].Layers, m.Contributors[0].Weights = []string{"A", "B"}, []float64{1, -0.5}
		m.Contributors[2].Weights = []float64{1, 0.95}
	}
	x, y := panel.Vec{X: 1}, panel.Vec{Y: 1}
	sym := Interval{-2 * mil, 2 * mil}
	asym := Interval{-1 * mil, 2.5 * mil}
	sites := []YieldSite{
		{Pos: panel.Vec{}, U: x, Allowed: Interval{-1.2 * mil, 1.2 * mil}, Part: 0}, // the uniform term dominates
		{Pos: panel.Vec{X: 8 * inch, Y: 11 * inch}, U: x, Allowed: sym, Part: 0},
		{Pos: panel.Vec{X: 8 * inch, Y: 11 * inch}, U: y, Allowed: sym, Part: 1},
		{Pos: panel.Vec{X: -8 * inch, Y: -11 * inch}, U: y, Allowed: asym, Part: 1},
		{Pos: panel.Vec{X: -8 * inch, Y: 11 * inch}, U: x, Allowed: asym.Shift(0.5 * mil), Nominal: 0.5 * mil, Part: 2},
		{Pos: panel.Vec{X: 3 * inch, Y: -5 * inch}, U: panel.Dir(math.Pi / 6), Allowed: Interval{-1.4 * mil, 1.4 * mil}, Part: 2},
		{Pos: panel.Vec{X: 6 * inch, Y: 0}, U: y, Allowed: Interval{-0.6 * mil, 0.6 * mil}, Part: -1},
	}
	for i := range sites {
		sites[i].Upper, sites[i].Lower = "A", "B"
	}
	return NewYield(m, sites, 3)
}

// TestClosedFormVsMonteCarlo: the closed-form site yield must agree with the
// Monte Carlo estimate within 3 binomial standard errors √(p(1−p)/N), at sites
// with symmetric and asymmetric intervals, with and without the uniform term.
func TestClosedFormVsMonteCarlo(t *testing.T) {
	for _, weighted := range []bool{false, true} {
		t.Run(fmt.Sprintf("weighted=%v", weighted), func(t *testing.T) { closedFormVsMonteCarlo(t, testYieldWeighted(t, weighted)) })
	}
}

func closedFormVsMonteCarlo(t *testing.T, y *Yield) {
	trials := 1000000
	if testing.Short() {
		trials = 100000
	}
	r, err := y.MonteCarlo(context.Background(), MCSettings{Trials: trials, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	for i := range y.Sites {
		pc := y.ClosedForm(i)
		pm := r.SiteYield(i)
		se := math.Sqrt(pc * (1 - pc) / float64(trials))
		t.Logf("site %d: closed %.5f  mc %.5f  se %.5f  uniform %.3g, %.3g mil", i, pc, pm, se, y.Prob(i).Uniform/mil, y.Prob(i).Uniform2/mil)
		if math.Abs(pc-pm) > 3*se+1e-12 {
			t.Errorf("site %d: closed form %.5f, Monte Carlo %.5f: differ by %.1f SE", i, pc, pm, math.Abs(pc-pm)/se)
		}
		if pc < 0.3 || pc > 0.999 {
			t.Errorf("site %d: closed form %.5f: the test wants sites that sometimes fail", i, pc)
		}
	}
	// Lines along x are offset across in y, where the uniform offset_y term
	// acts; lines along y are not.
	if y.Prob(1).Uniform2 == 0 || y.Prob(2).Uniform != 0 {
		t.Errorf("both uniform terms should reach site 1 (lines along x) and none site 2 (lines along y)")
	}
	// Invariants of the tallies: the histogram counts every panel, and by
	// linearity of expectation the mean number of good parts is the sum of
	// the part yields.
	var n int64
	for _, c := range r.GoodParts {
		n += c
	}
	if n != int64(trials) {
		t.Errorf("histogram holds %d panels, want %d", n, trials)
	}
	var sum float64
	for i := range r.PartGood {
		sum += r.PartYield(i)
	}
	if math.Abs(sum-r.MeanGoodParts()) > 1e-12 {
		t.Errorf("mean good parts %g, sum of part yields %g", r.MeanGoodParts(), sum)
	}
	// A part is good only if all its sites are.
	for i, s := range y.Sites {
		if s.Part >= 0 && r.PartGood[s.Part] > r.SiteGood[i] {
			t.Errorf("part %d good %d times, its site %d only %d", s.Part, r.PartGood[s.Part], i, r.SiteGood[i])
		}
	}
}

// TestMonteCarloDeterministic: the same seed gives identical counts with one
// and with two workers, and a different seed gives different counts.
func TestMonteCarloDeterministic(t *testing.T) {
	y := testYield(t)
	run := func(workers int, seed uint64) *MCResult {
		r, err := y.MonteCarlo(context.Background(), MCSettings{Trials: 3*MCBlock + 17, Seed: seed, Workers: workers})
		if err != nil {
			t.Fatal(err)
		}
		return r
	}
	a, b, c := run(1, 11), run(2, 11), run(2, 12)
	same := func(x, y []int64) bool {
		if len(x) != len(y) {
			return false
		}
		for i := range x {
			if x[i] != y[i] {
				return false
			}
		}
		return true
	}
	if !same(a.SiteGood, b.SiteGood) || !same(a.PartGood, b.PartGood) || !same(a.GoodParts, b.GoodParts) {
		t.Errorf("1 and 2 workers differ:\n%v\n%v", a.SiteGood, b.SiteGood)
	}
	if same(a.SiteGood, c.SiteGood) {
		t.Errorf("seeds 11 and 12 gave identical counts %v", a.SiteGood)
	}
}

// TestYieldBudgetSums: at every site the variance shares sum to the closed-form
// variance of the across offset, and the panel budget is their mean.
func TestYieldBudgetSums(t *testing.T) {
	y := testYield(t)
	var buf []Share
	var total float64
	for i := range y.Sites {
		buf = y.Budget(buf, i)
		var s float64
		for _, sh := range buf {
			s += sh.Variance
			if y.Model.Contributors[sh.Contributor].Name == "shared core" {
				t.Errorf("site %d: a contributor naming both layers has a share %g", i, sh.Variance)
			}
		}
		sd := y.Stats(i).SDAcross
		if math.Abs(s-sd*sd) > 1e-12*sd*sd {
			t.Errorf("site %d: shares sum to %g m², variance %g m²", i, s, sd*sd)
		}
		total += sd * sd
	}
	var pb float64
	prev := math.Inf(1)
	for _, sh := range y.PanelBudget() {
		pb += sh.Variance
		if sh.Variance > prev {
			t.Error("panel budget is not sorted largest first")
		}
		prev = sh.Variance
	}
	if want := total / float64(len(y.Sites)); math.Abs(pb-want) > 1e-12*want {
		t.Errorf("panel budget sums to %g, mean site variance %g", pb, want)
	}
}

func TestMonteCarloBadInput(t *testing.T) {
	y := testYield(t)
	for _, n := range []int{0, -5} {
		if _, err := y.MonteCarlo(context.Background(), MCSettings{Trials: n}); err == nil {
			t.Errorf("trials %d accepted", n)
		}
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := y.MonteCarlo(ctx, MCSettings{Trials: 1000}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled run returned %v", err)
	}
}

// TestEmptyInterval: a site with no allowed offsets never yields, in closed
// form and in Monte Carlo, and its part never yields either.
func TestEmptyInterval(t *testing.T) {
	y := testYield(t)
	y.Sites[0].Allowed = EmptyInterval()
	r, err := y.MonteCarlo(context.Background(), MCSettings{Trials: 500, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if y.ClosedForm(0) != 0 || r.SiteGood[0] != 0 || r.PartGood[0] != 0 {
		t.Errorf("empty interval: closed %g, mc %d, part %d", y.ClosedForm(0), r.SiteGood[0], r.PartGood[0])
	}
}

func TestMonteCarloAllocs(t *testing.T) {
	y := testYield(t)
	sites := make([]mcSite, len(y.Sites))
	w := newMCWorker(y, sites)
	if a := testing.AllocsPerRun(5, func() { w.block(1, 0, 10) }); a > 0 {
		t.Errorf("a block of trials allocates %g times", a)
	}
}

// benchYield builds n sites spread over an 18 x 24 in panel with the test model.
func benchYield(n int) *Yield {
	base := testYield(nil)
	sites := make([]YieldSite, n)
	for i := range sites {
		fx := float64(i%50)/49 - 0.5
		fy := float64(i/50%40)/39 - 0.5
		u := panel.Vec{X: 1}
		if i%2 == 1 {
			u = panel.Vec{Y: 1}
		}
		sites[i] = YieldSite{Pos: panel.Vec{X: 16 * inch * fx, Y: 22 * inch * fy}, U: u, Upper: "A", Lower: "B",
			Allowed: Interval{-2 * mil, 2 * mil}, Part: i / 4}
	}
	return NewYield(base.Model, sites, (n+3)/4)
}

// BenchmarkMonteCarlo runs 10,000 panels of 2,000 sites and reports site
// evaluations per second per core.
func BenchmarkMonteCarlo(b *testing.B) {
	y := benchYield(2000)
	const trials = 10000
	for _, workers := range []int{1, 2} {
		b.Run(map[int]string{1: "workers=1", 2: "workers=2"}[workers], func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := y.MonteCarlo(context.Background(), MCSettings{Trials: trials, Seed: 1, Workers: workers}); err != nil {
					b.Fatal(err)
				}
			}
			evals := float64(trials) * float64(len(y.Sites)) * float64(b.N)
			b.ReportMetric(evals/b.Elapsed().Seconds()/float64(workers), "site-evals/s/core")
			b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/run")
		})
	}
}

// BenchmarkMonteCarloMemory shows that memory is flat in the number of
// trials: B/op and allocs/op are the same for 1,000 and 100,000 panels.
func BenchmarkMonteCarloMemory(b *testing.B) {
	y := benchYield(200)
	for _, trials := range []int{1000, 100000} {
		b.Run("trials="+strconv.Itoa(trials), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := y.MonteCarlo(context.Background(), MCSettings{Trials: trials, Seed: 1, Workers: 2}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// TestMonteCarloCoupons: a coupon part (Yield.Coupons) that always fails
// leaves the good parts per panel alone, while its own part yield and its
// sites are still counted. Three parts of one site each, no error terms:
// parts 0 and 2 always meet a ±1 mil window, coupon part 1 never meets an
// empty one, so every panel has exactly 2 good products of 2.
func TestMonteCarloCoupons(t *testing.T) {
	m := &Model{Contributors: []Contributor{{Name: "none", Layers: []string{"A"}}}}
	win := Interval{Lo: -25.4e-6, Hi: 25.4e-6}
	sites := []YieldSite{
		{U: panel.Vec{X: 1}, Upper: "A", Lower: "B", Allowed: win, Part: 0},
		{U: panel.Vec{X: 1}, Upper: "A", Lower: "B", Allowed: EmptyInterval(), Part: 1},
		{U: panel.Vec{X: 1}, Upper: "A", Lower: "B", Allowed: win, Part: 2},
	}
	y := NewYield(m, sites, 3)
	y.Coupons = []int{1}
	const trials = 300
	res, err := y.MonteCarlo(context.Background(), MCSettings{Trials: trials, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if y.Products() != 2 || len(res.GoodParts) != 3 || res.GoodParts[2] != trials {
		t.Errorf("good products per panel %v, want all %d panels at 2 of 2", res.GoodParts, trials)
	}
	if res.PartGood[0] != trials || res.PartGood[1] != 0 || res.PartGood[2] != trials || res.SiteGood[1] != 0 {
		t.Errorf("part counts %v, site counts %v", res.PartGood, res.SiteGood)
	}
	// Without the coupon mark the same failing part costs one part a panel.
	y.Coupons = nil
	res, err = y.MonteCarlo(context.Background(), MCSettings{Trials: trials, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.GoodParts) != 4 || res.GoodParts[2] != trials {
		t.Errorf("good parts per panel %v, want all %d panels at 2 of 3", res.GoodParts, trials)
	}
}
