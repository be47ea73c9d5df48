package drift

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/job"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// windowExact is the agreement of windowQuad with gonum's distributions:
// both are built on erfc or the regularised incomplete gamma function,
// good to a few ulps of 1; measured below 3e-16 here, allow 1e-13.
const windowExact = 1e-13

// TestWindowQuad checks P(lo ≤ m + s·t + q·t² ≤ hi), t standard normal,
// against published distributions: with s = 0 the coupling is m + q·χ²₁
// (a squared standard normal is χ² with one degree of freedom: Johnson,
// Kotz & Balakrishnan, Continuous Univariate Distributions vol. 1, 2nd
// ed., ch. 18), gonum's distuv.ChiSquared{K: 1}; as q → 0 it is normal,
// distuv.Normal; in between, against a Monte Carlo of 10⁶ draws within 4
// standard errors (binomial, √(p(1−p)/N); exceeded with probability
// 6.3e-5 per case).
func TestWindowQuad(t *testing.T) {
	chi := distuv.ChiSquared{K: 1}
	for _, tt := range []struct {
		name         string
		m, q, lo, hi float64
	}{
		{"q>0", 0, 0.3, 0.1, 0.9},
		{"q<0", 0, -0.3, -0.9, -0.1},
		{"shifted", -0.2, 0.5, -0.1, 1},
		{"vertex inside", 0.1, 0.2, -1, 0.5},
		{"q<0, vertex inside", 0.1, -0.2, -0.5, 1},
		{"wholly outside", 0.1, 0.2, -1, 0.05},
	} {
		// q·χ² ∈ [lo − m, hi − m].
		a, b := (tt.lo-tt.m)/tt.q, (tt.hi-tt.m)/tt.q
		if a > b {
			a, b = b, a
		}
		want := chi.CDF(math.Max(0, b)) - chi.CDF(math.Max(0, a))
		got := windowQuad(tt.m, 0, tt.q, tt.lo, tt.hi)
		if math.Abs(got-want) > windowExact {
			t.Errorf("%s: P = %.16f, χ²₁ gives %.16f", tt.name, got, want)
		}
	}
	for _, q := range []float64{1e-13, -1e-13} {
		n := distuv.Normal{Mu: -0.1, Sigma: 0.4}
		want := n.CDF(0.5) - n.CDF(-0.3)
		if got := windowQuad(-0.1, 0.4, q, -0.3, 0.5); math.Abs(got-want) > windowExact {
			t.Errorf("q = %g: P = %.16f, normal %.16f", q, got, want)
		}
	}
	rng := rand.New(rand.NewPCG(3, 4))
	const n = 1000000
	for _, tt := range []struct{ m, s, q, lo, hi float64 }{
		{0, 0.4, 0.1, -0.5, 0.5},
		{0.2, 0.4, -0.15, -0.5, 0.5},
		{-0.3, 0.2, 0.3, -0.5, 0.5},
		{0, 0.05, -0.5, -0.5, 0.1},
	} {
		good := 0
		for range n {
			x := rng.NormFloat64()
			if c := tt.m + tt.s*x + tt.q*x*x; c >= tt.lo && c <= tt.hi {
				good++
			}
		}
		p := float64(good) / n
		se := math.Sqrt(p * (1 - p) / n)
		got := windowQuad(tt.m, tt.s, tt.q, tt.lo, tt.hi)
		t.Logf("m %g s %g q %g: closed %.5f, Monte Carlo %.5f ± %.5f", tt.m, tt.s, tt.q, got, p, se)
		if math.Abs(got-p) > 4*se {
			t.Errorf("m %g s %g q %g: closed form %.5f, Monte Carlo %.5f ± %.5f", tt.m, tt.s, tt.q, got, p, se)
		}
	}
}

// curvedInput is a centred broadside pair whose core thickness varies by
// a quarter of the 4 mil core (coupling goes about as 1/h across it, so
// ±3σ is far from linear) under a registration offset, on a 3 x 3 array.
func curvedInput(t *testing.T, name string, tol float64) *Input {
	t.Helper()
	s := namedPair(name, section.Spec{Coupling: -3, Tolerance: tol})
	arr := panel.Array{Part: "p", Count: [2]int{3, 3}, Pitch: panel.Vec{X: 4 * inch, Y: 6 * inch}}
	l, inst, sites := layout(t, name, 90, arr)
	m := &registration.Model{Contributors: []registration.Contributor{{Name: "L3", Layers: []string{"L3"},
		Terms:     [registration.NumTerms]registration.Term{registration.OffsetX: term(0.3*mil, 0.6*mil)},
		SiteSigma: 0.2 * mil}}}
	pm := &process.Model{Size: l.Panel.Size, Terms: []process.Term{
		{Name: "c2", Layer: "C2", Quantity: process.Thickness, Panel: term(0, 0.8*mil), SiteSigma: 0.5 * mil,
			Shape: process.Shape{Kind: process.Dome, Amplitude: 0.3 * mil}}}}
	return &Input{Layout: l, Instances: inst, Sites: sites, Sections: []*section.Section{s}, Model: m, Process: pm}
}

// TestSecondOrderMonteCarlo: on a job with a strong curvature the closed
// form with the second-order term agrees with the Monte Carlo, which draws
// the same model term by term (variation_quad_mc.go), within 4 standard
// errors at every site (binomial, as TestYieldProcessMonteCarlo); and the
// first-order closed form does not, at some site, so the term matters here
// and the comparison can fail.
func TestSecondOrderMonteCarlo(t *testing.T) {
	in := curvedInput(t, "curved", 0.15)
	a, err := Analyse(t.Context(), in, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	so := a.Curves[0].Second
	if so == nil {
		t.Fatal("no second-order term fitted")
	}
	t.Logf("nodes %d, at the first: e₀ %.4f dB, κ %.4f, ρ %.4f /dB", len(so.Offsets), so.Shift[0], so.Slope[0], so.Curv[0])
	res, err := a.Yield.MonteCarlo(t.Context(), registration.MCSettings{Trials: 40000, Seed: 11})
	if err != nil {
		t.Fatal(err)
	}
	// The first-order evaluator: the same binding without the term.
	ev := a.Evaluator(0)
	lin := *ev.Proc
	lin.second = nil
	first := Evaluator{Curve: ev.Curve, Rel: ev.Rel, Proc: &lin}
	worstFirst := 0.0
	for i := range a.Sites {
		pc, pmc, se := a.Sites[i].PInSpec, res.SiteYield(i), res.SiteSE(i)
		if math.Abs(pc-pmc) > 4*se {
			t.Errorf("site %d: closed form %.5f, Monte Carlo %.5f ± %.5f", i, pc, pmc, se)
		}
		r := &a.Sites[i]
		p1 := first.EvalSite(r.Row, r.Site.Pos).PInSpec
		worstFirst = math.Max(worstFirst, math.Abs(p1-pmc)/se)
	}
	t.Logf("site 0: closed %.5f, MC %.5f ± %.5f; first order at most %.1f SE from MC", a.Sites[0].PInSpec, res.SiteYield(0), res.SiteSE(0), worstFirst)
	if worstFirst <= 4 {
		t.Errorf("the first-order closed form is within %.1f SE of Monte Carlo everywhere: the case does not test the second-order term", worstFirst)
	}
	if p := a.MeanPInSpec(); p < 0.1 || p > 0.95 {
		t.Errorf("mean yield %.3f: the case should sit away from 0 and 1", p)
	}
}

// TestSecondOrderMoments: the coupling's conditional mean is m + q and
// its variance v + 2q² (a standard normal's E t² = 1, E t³ = 0,
// E t⁴ = 3: Abramowitz & Stegun 26.2.2 with the normal's moments), as the
// map's drift and ProcessSD state them: checked against a Monte Carlo of
// the evaluator's own m, v and q at the site, within 4 standard errors of
// the sample mean and 4 of the sample variance (whose standard error is
// about √((μ₄ − σ⁴)/N)).
func TestSecondOrderMoments(t *testing.T) {
	ev, r, row := firstSite(t, curvedInput(t, "moments", 0.15))
	m, v, q := ev.at(r.Offset, row)
	rng := rand.New(rand.NewPCG(5, 6))
	const n = 400000
	var s1, s2, s4 float64
	for range n {
		x := rng.NormFloat64()
		c := math.Sqrt(v)*x + q*x*x
		s1 += c
	}
	mean := s1 / n
	rng = rand.New(rand.NewPCG(5, 6))
	for range n {
		x := rng.NormFloat64()
		d := math.Sqrt(v)*x + q*x*x - mean
		s2 += d * d
		s4 += d * d * d * d
	}
	va := s2 / n
	seMean, seVar := math.Sqrt(va/n), math.Sqrt((s4/n-va*va)/n)
	t.Logf("q %.5f dB, √v %.5f dB: mean %.6f (want %.6f ± %.6f), variance %.6f (want %.6f ± %.6f)", q, math.Sqrt(v), mean, q, seMean, va, v+2*q*q, seVar)
	if math.Abs(mean-q) > 4*seMean || math.Abs(va-(v+2*q*q)) > 4*seVar {
		t.Errorf("moments %.6f, %.6f; want %.6f, %.6f", mean, va, q, v+2*q*q)
	}
	if got := r.Coupling - m; math.Abs(got-q) > assembly {
		t.Errorf("the site's coupling exceeds m by %.6f dB, want q = %.6f", got, q)
	}
	if got := r.ProcessSD; math.Abs(got-math.Sqrt(v+2*q*q)) > assembly {
		t.Errorf("ProcessSD %.6f, want √(v + 2q²) = %.6f", got, math.Sqrt(v+2*q*q))
	}
	if math.Abs(q) < 4*seMean {
		t.Errorf("q = %.2g dB is too small for the case to test the mean", q)
	}
}

// firstSite analyses in and returns the evaluator, the evaluated first
// site and its process row.
func firstSite(t *testing.T, in *Input) (Evaluator, *Site, *procRow) {
	t.Helper()
	a, err := Analyse(t.Context(), in, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	ev := a.Evaluator(0)
	r := &a.Sites[0]
	var row procRow
	ev.Proc.row(&row, r.Site.Pos)
	return ev, r, &row
}

// TestNoProcessNoSecondOrder: without process terms no curve carries a
// second-order term and the sites take the registration evaluator:
// Eval's process fields are all zero and the yield has no process
// checker, so registration alone gives the numbers it gave before.
func TestNoProcessNoSecondOrder(t *testing.T) {
	in := curvedInput(t, "noproc", 0.15)
	in.Process = nil
	a, err := Analyse(t.Context(), in, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	if a.Curves[0].Second != nil || a.procOf(0) != nil || a.Yield.Check != nil {
		t.Fatalf("without process terms: second-order term %v, process side %v, checker %v", a.Curves[0].Second, a.procOf(0), a.Yield.Check)
	}
	for i := range a.Sites {
		r := &a.Sites[i]
		if r.DriftProcess != 0 || r.DriftSecondOrder != 0 || r.ProcessSD != 0 || r.TermDrifts != nil {
			t.Errorf("site %d: process fields %g %g %g %v without process terms", i, r.DriftProcess, r.DriftSecondOrder, r.ProcessSD, r.TermDrifts)
		}
		// The registration yield: P(δ ∈ allowed interval).
		if want := a.Yield.Prob(i).Prob(a.Curves[0].Allowed); r.PInSpec != want {
			t.Errorf("site %d: P %.12f, registration yield %.12f", i, r.PInSpec, want)
		}
	}
}

// sampleInput loads the embedded sample file (samples/) as an Input, its
// process model edited by edit first when edit is not nil.
func sampleInput(t *testing.T, file string, edit func(*process.Model)) *Input {
	t.Helper()
	j, err := job.Load("../../samples/"+file, nil)
	if err != nil {
		t.Fatal(err)
	}
	if edit != nil {
		edit(j.Process)
	}
	return &Input{Title: j.Title, Source: j.File, Layout: j.Layout, Instances: j.Instances, Sites: j.Sites, Sections: j.Sections, Model: j.Model, Process: j.Process}
}

// sampleMicrostripLimit is the linearity error of the model used that
// the microstrip sample must stay below: the 0.05 dB limit of the check
// itself. Measured 0.014 dB (0.035 dB before the term followed the sites'
// means; first order 0.183 dB); the 0.036 dB between holds eighteen times
// the 0.002 dB the solver's meshes of two geometries differ by at 0.1 %
// (tol's ConfirmDB note).
const sampleMicrostripLimit = linearLimit

// TestSampleMicrostripLinearity: the topology sample's edge-coupled
// microstrip under mask, solved at the default 0.1 %, at its ten worst
// sites: the first-order model errs above the limit at the combined ±3σ
// extremes, the model with the second-order term below it.
func TestSampleMicrostripLinearity(t *testing.T) {
	if testing.Short() {
		t.Skip("solves the sample at 0.1 %")
	}
	set := &Settings{CacheDir: cacheDir}
	a, err := Analyse(t.Context(), sampleInput(t, "topology-microstrip.toml", nil), set)
	if err != nil {
		t.Fatal(err)
	}
	if err := a.CheckLinearity(t.Context(), set, 10); err != nil {
		t.Fatal(err)
	}
	lin := a.Summary(10).Linearity
	t.Logf("%s", lin)
	if lin.MaxErrorDB <= lin.LimitDB {
		t.Errorf("first-order error %.4f dB within the limit %.3f dB: the sample no longer tests the second-order term", lin.MaxErrorDB, lin.LimitDB)
	}
	if lin.MaxModelErrorDB > sampleMicrostripLimit || lin.Warning != "" {
		t.Errorf("model error %.4f dB, above %.3f dB (warning %q)", lin.MaxModelErrorDB, sampleMicrostripLimit, lin.Warning)
	}
}

// secondNodeTol bounds the coupling error, at ±3σ along the steepest
// direction, of the term interpolated from secondNodes nodes against one
// fitted at the midpoints between them: 0.002 dB, the size of the
// solver's jitter between two geometries at 0.1 % (linearAccuracy), about
// twice the 0.0011 dB measured.
const secondNodeTol = 0.002

// TestSecondOrderNodes measures the node count: on a broadside pair whose
// offset spreads over ±6 mil, the term of secondNodes nodes, interpolated
// at the midpoints between them, against the term fitted there directly
// (a fit at 2·secondNodes − 1 nodes holds both).
func TestSecondOrderNodes(t *testing.T) {
	if testing.Short() {
		t.Skip("solves at 0.1 %")
	}
	s := namedPair("nodes", section.Spec{Coupling: -3, Tolerance: 0.5})
	pm := &process.Model{Size: panel.Vec{X: 12 * inch, Y: 12 * inch}, Terms: []process.Term{
		{Name: "c2", Layer: "C2", Quantity: process.Thickness, Panel: term(0.1*mil, 0.3*mil)},
		{Name: "w3", Layer: "L3", Quantity: process.Width, Panel: term(0, 0.5*mil)}}}
	set := testSettings(t)
	set.Accuracy = linearAccuracy
	set.Sensitivities = true
	c, err := SolveSection(t.Context(), s, 8*mil, set)
	if err != nil {
		t.Fatal(err)
	}
	pos := []panel.Vec{{}}
	coarse, err := fitSecond(t.Context(), set, pm, c, pos, -6*mil, 6*mil, secondNodes)
	if err != nil {
		t.Fatal(err)
	}
	fine, err := fitSecond(t.Context(), set, pm, c, pos, -6*mil, 6*mil, 2*secondNodes-1)
	if err != nil {
		t.Fatal(err)
	}
	ev := Evaluator{Curve: c, Proc: bindProc(pm, c, pos)}
	var row procRow
	ev.Proc.row(&row, panel.Vec{})
	worst := 0.0
	for k := 1; k < len(fine.Offsets); k += 2 {
		off := fine.Offsets[k]
		_, v, _ := ev.at(off, &row) // first order: the curve has no term
		e0, kappa, rho := coarse.at(off)
		d := math.Abs(e0-(fine.Shift[k]+fine.Across)) + secondT*math.Sqrt(v)*math.Abs(kappa-fine.Slope[k]) + secondT*secondT*v*math.Abs(rho-fine.Curv[k])
		t.Logf("midpoint %.3f mil: e₀ %.5f/%.5f κ %.5f/%.5f ρ %.5f/%.5f: %.5f dB at 3σ", off/mil, e0, fine.Shift[k], kappa, fine.Slope[k], rho, fine.Curv[k], d)
		worst = math.Max(worst, d)
	}
	if worst > secondNodeTol {
		t.Errorf("interpolating %d nodes errs by %.4f dB at 3σ, above %.3f dB", secondNodes, worst, secondNodeTol)
	}
}

// siteMeansLimit is the model error the parts that follow a site's means
// (MeanTerm) must bring the uniform-etch microstrip below: the issue's
// linearity limit, linearLimit. Measured: 0.018 dB with them, 0.057 dB
// without (the term fitted at the section's mean parameters alone).
const siteMeansLimit = linearLimit

// TestSecondOrderSiteMeans: the topology sample's edge-coupled microstrip
// with its conveyor-etch term made uniform (±0.6 mil, so that the worst
// sites sit at the dome's centre, far from the sites' mean parameters): at
// the combined ±3σ extremes of its ten worst sites the model with the
// MeanTerms is within siteMeansLimit of direct solves, and the same model
// without them (the term of the section's mean parameters alone) is not,
// so the test fails when the site's own part is lost.
func TestSecondOrderSiteMeans(t *testing.T) {
	if testing.Short() {
		t.Skip("solves the sample at 0.1 %")
	}
	in := sampleInput(t, "topology-microstrip.toml", func(pm *process.Model) {
		etch := slices.IndexFunc(pm.Terms, func(pt process.Term) bool { return pt.Quantity == process.Width })
		if etch < 0 {
			t.Fatal("the sample has no width term")
		}
		pm.Terms[etch].Panel = registration.Term{Spread: 0.6 * mil, Dist: registration.Uniform}
	})
	set := &Settings{CacheDir: cacheDir}
	a, err := Analyse(t.Context(), in, set)
	if err != nil {
		t.Fatal(err)
	}
	check := func() *Linearity {
		t.Helper()
		if err := a.CheckLinearity(t.Context(), set, 10); err != nil {
			t.Fatal(err)
		}
		lin := a.Summary(10).Linearity
		t.Logf("%s", lin)
		return lin
	}
	var means int
	for _, c := range a.Curves {
		if c != nil && c.Second != nil {
			means += len(c.Second.Means)
		}
	}
	if means == 0 {
		t.Fatal("no binding got a MeanTerm: the sample's dome, plating edge and etch tilt move the means")
	}
	if lin := check(); lin.MaxModelErrorDB > siteMeansLimit || lin.Warning != "" {
		t.Errorf("with the sites' own parts the model errs by %.4f dB, above %.3f dB (warning %q)", lin.MaxModelErrorDB, siteMeansLimit, lin.Warning)
	}
	for _, c := range a.Curves {
		if c != nil && c.Second != nil {
			c.Second.Means = nil
		}
	}
	a.bindProcess()
	if lin := check(); lin.MaxModelErrorDB <= siteMeansLimit {
		t.Errorf("without the sites' own parts the model errs by %.4f dB, within %.3f dB: the job no longer tests them", lin.MaxModelErrorDB, siteMeansLimit)
	}
}

// drawsRMSLimit bounds the model's rms error against direct solves over
// random draws of the process at a worst site (TestSecondOrderDraws):
// 0.027 dB, 1.5 times the largest measured (0.0177 dB on the sample's
// microstrip, 384 draws, seeds 2 to 4 within 0.0001 dB, before the mean
// across u was added, and 0.0177 dB after it on 192; 0.0069 dB on two
// cores), the factor for the spread of the rms of fewer draws, whose
// errors are heavy-tailed (96 draws gave 0.013 to 0.019 dB), and for the
// solver's jitter between geometries.
const drawsRMSLimit = 0.027

// TestSecondOrderDraws measures the model where yield is decided rather
// than at the corners of CheckLinearity, where every term sits at 3σ at
// once (a point of radius 3·√n standard deviations, where the terms' mixed
// curvature the rank-one term leaves out is largest): at the worst site of
// each topology sample, draws of every term as it is distributed (panel
// part normal or uniform, site part normal) solved directly, against the
// model's coupling for the same draw and against first order. The model
// must stay within drawsRMSLimit rms and, where the coupling is curved
// (the microstrip: 0.0177 dB against 0.0366 dB first order), below
// vsFirst times first order's rms; on two cores the curvature is small
// (0.0069 dB against 0.0081 dB).
func TestSecondOrderDraws(t *testing.T) {
	if testing.Short() {
		t.Skip("solves the samples at 0.1 %")
	}
	for _, tc := range []struct {
		file    string
		draws   int
		vsFirst float64 // 0: no comparison
	}{
		{"topology-two-core.toml", 96, 0},
		{"topology-microstrip.toml", 192, 0.7},
	} {
		t.Run(tc.file, func(t *testing.T) {
			set := &Settings{CacheDir: cacheDir}
			a, err := Analyse(t.Context(), sampleInput(t, tc.file, nil), set)
			if err != nil {
				t.Fatal(err)
			}
			r := &a.Sites[a.Worst(1)[0]]
			ev := a.Evaluator(r.Section)
			c := ev.Curve
			var row procRow
			ev.Proc.row(&row, r.Site.Pos)
			e0, kappa, rho := ev.Proc.secondAt(r.Offset, row.second)
			nb := len(ev.Proc.Bind)
			sens := make([]float64, nb)
			mean := c.Coupling(r.Offset)
			for b := range sens {
				sens[b] = ev.termSens(b, r.Offset)
				mean += sens[b] * row.means()[b]
			}
			n := tc.draws
			rng := rand.New(rand.NewPCG(1, 2))
			offs := make([]float64, n)
			dps := make([][3][]float64, n)
			model, first := make([]float64, n), make([]float64, n)
			for i := range n {
				dp := make([]float64, nb)
				var l float64
				for b, bd := range ev.Proc.Bind {
					pt := &a.In.Process.Terms[bd.Term]
					dev := pt.SiteSigma * rng.NormFloat64()
					switch pt.Panel.Dist {
					case registration.Normal:
						dev += pt.Panel.Spread * rng.NormFloat64()
					case registration.Uniform:
						dev += pt.Panel.Spread * (2*rng.Float64() - 1)
					}
					dp[b] = row.means()[b] + dev
					l += sens[b] * dev
				}
				offs[i], dps[i][1] = r.Offset, dp
				model[i] = mean + e0 + kappa*l + rho*l*l
				first[i] = mean + l
			}
			cs, err := solveNodes(t.Context(), c, ev.Proc.Bind, offs, dps, set)
			if err != nil {
				t.Fatal(err)
			}
			var ms, fs, bias float64
			for i := range n {
				d := cs[i][1]
				ms += (model[i] - d) * (model[i] - d) / float64(n)
				fs += (first[i] - d) * (first[i] - d) / float64(n)
				bias += (model[i] - d) / float64(n)
			}
			rms, frms := math.Sqrt(ms), math.Sqrt(fs)
			t.Logf("site %s, %d draws: model rms error %.4f dB (mean %+.4f), first order %.4f dB", r.Site.Name, n, rms, bias, frms)
			if rms > drawsRMSLimit {
				t.Errorf("the model errs by %.4f dB rms over the draws, above %.3f dB", rms, drawsRMSLimit)
			}
			if tc.vsFirst > 0 && rms > tc.vsFirst*frms {
				t.Errorf("the model errs by %.4f dB rms over the draws, first order by %.4f dB: not below %g of it", rms, frms, tc.vsFirst)
			}
		})
	}
}

// TestSecondOrderMomentsUniform: with the term's panel part uniform
// (half-width 1.4 mil, a small site part beside it) the coupling's
// variance is v + Var(X²)·q², Var(X²) = 2 + γ₂ for the standardised
// deviation X (squareVar), not the normal's 2. Var(X²) is checked against
// a Monte Carlo of X drawn as its parts are distributed, within 4 standard
// errors (of a sample variance, √((μ₄ − σ⁴)/N) for X²), and the normal's
// 2 is not within them, so the case tests the kurtosis; ProcessSD states
// √(v + Var(X²)·q²).
func TestSecondOrderMomentsUniform(t *testing.T) {
	in := curvedInput(t, "momentsuni", 0.15)
	pt := &in.Process.Terms[0]
	pt.Panel = registration.Term{Spread: 1.4 * mil, Dist: registration.Uniform}
	pt.SiteSigma = 0.1 * mil
	ev, r, row := firstSite(t, in)
	_, v, q := ev.at(r.Offset, row)
	_, sq := ev.squareVar(r.Offset, row)
	// X = L/√v₁: the uniform part and the site's normal, in units of
	// their total standard deviation (one term: the sensitivity cancels).
	w, sdSite := pt.Panel.Spread, pt.SiteSigma
	scale := 1 / math.Sqrt(w*w/3+sdSite*sdSite)
	rng := rand.New(rand.NewPCG(7, 8))
	const n = 400000
	xs := make([]float64, n)
	var mean float64
	for i := range xs {
		x := (w*(2*rng.Float64()-1) + sdSite*rng.NormFloat64()) * scale
		xs[i] = x * x
		mean += xs[i] / n
	}
	var s2, s4 float64
	for _, x2 := range xs {
		d := x2 - mean
		s2 += d * d
		s4 += d * d * d * d
	}
	va := s2 / n
	se := math.Sqrt((s4/n - va*va) / n)
	t.Logf("Var(X²) %.5f, Monte Carlo %.5f ± %.5f (E X² %.5f)", sq, va, se, mean)
	if math.Abs(va-sq) > 4*se {
		t.Errorf("Var(X²) %.5f, Monte Carlo %.5f ± %.5f", sq, va, se)
	}
	if math.Abs(va-2) <= 4*se {
		t.Errorf("the normal's Var(X²) = 2 is within 4 standard errors too: the case does not test the kurtosis")
	}
	if got, want := r.ProcessSD, math.Sqrt(v+sq*q*q); math.Abs(got-want) > assembly {
		t.Errorf("ProcessSD %.6f, want √(v + Var(X²)·q²) = %.6f", got, want)
	}
}
