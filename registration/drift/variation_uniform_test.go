package drift

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/stat/combin"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// gilPelaez returns P(N(0, sd²) + Σⱼ Uⱼ ≤ x), Uⱼ uniform on [−a[j], a[j]],
// by the inversion of the characteristic function (J. Gil-Pelaez, "Note on
// the inversion theorem", Biometrika 38 (1951) 481–482): for a symmetric
// distribution F(x) = ½ + (1/π)·∫₀^∞ sin(t·x)/t·ψ(t) dt, with
// ψ(t) = exp(−sd²t²/2)·Πⱼ sin(aⱼt)/(aⱼt) (the characteristic functions of
// the normal and the uniform, Abramowitz & Stegun 26.1.10; Johnson, Kotz &
// Balakrishnan, Continuous Univariate Distributions vol. 2, 2nd ed., ch. 26).
// The integral stops at t = 9.5/sd, where the normal factor is 2e-20, and
// is taken by gonum's Gauss–Legendre rule on pieces a tenth of the
// shortest period wide: an independent path to the closed form, good to
// rounding.
func gilPelaez(x, sd float64, a []float64) float64 {
	f := func(t float64) float64 {
		if t == 0 {
			return x
		}
		p := math.Sin(t*x) / t * math.Exp(-sd*sd*t*t/2)
		for _, w := range a {
			p *= math.Sin(w*t) / (w * t)
		}
		return p
	}
	hi := 9.5 / sd
	freq := math.Abs(x)
	for _, w := range a {
		freq += w
	}
	pieces := int(math.Ceil(hi*freq/(2*math.Pi)*10)) + 20
	h := hi / float64(pieces)
	var s float64
	for i := range pieces {
		s += quad.Fixed(f, float64(i)*h, float64(i+1)*h, 16, quad.Legendre{}, 0)
	}
	return 0.5 + s/math.Pi
}

// boxCDF returns P(N(0, sd²) + Σⱼ Uⱼ ≤ x) from boxNormal.
func boxCDF(x, sd float64, a []float64) float64 {
	v := sd * sd
	for _, w := range a {
		v += w * w / 3
	}
	var d boxNormal
	d.set(sd*sd, append([]float64(nil), a...), v)
	return d.cdf(x / math.Sqrt(v))
}

// boxExact is the agreement of boxNormal's CDF with the Gil-Pelaez
// inversion and the Irwin–Hall CDF: measured 9.4e-16 and 8.9e-16, rounding
// of sums of a few dozen terms of order 1; a hundred times that leaves
// room for other platforms' erfc and exp and for the inversion's own
// rounding, and is far below any probability the yield reports (six
// decimals) while a wrong corner sign, recurrence or series term errs by
// 1e-6 and more.
const boxExact = 100 * 9.4e-16

// TestBoxNormalCDF checks the CDF of a normal plus k uniforms (k = 1, 2, 3,
// half-widths from 0.1σ to 10σ, and narrower boxes taken by the series)
// against the Gil-Pelaez inversion of its
// characteristic function, over ±4 standard deviations of the sum.
func TestBoxNormalCDF(t *testing.T) {
	widths := []float64{0.1, 0.3, 1, 3, 10}
	var worst float64
	var worstAt string
	var cases [][]float64
	for _, w1 := range widths {
		cases = append(cases, []float64{w1})
		for _, w2 := range widths {
			cases = append(cases, []float64{w1, w2})
		}
	}
	for _, w := range widths {
		cases = append(cases, []float64{w, 1, 3}, []float64{w, w, w}, []float64{w, 0.1, 10})
	}
	// Narrower boxes, and either side of the series' bound (boxNarrow:
	// Σ(a/σ)² = 0.25), alone and beside wide ones.
	cases = append(cases, []float64{0.001}, []float64{0.01, 3}, []float64{0.01, 0.02, 0.05},
		[]float64{0.49}, []float64{0.51}, []float64{0.35, 0.36}, []float64{0.3, 0.4, 5}, []float64{0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 2})
	for _, a := range cases {
		v := 1.0
		for _, w := range a {
			v += w * w / 3
		}
		for i := -8; i <= 8; i++ {
			x := 0.5 * float64(i) * math.Sqrt(v)
			got, want := boxCDF(x, 1, a), gilPelaez(x, 1, a)
			if math.Abs(got-want) > worst {
				worst, worstAt = math.Abs(got-want), fmt.Sprintf("a = %v σ at x = %.3g", a, x)
			}
			if math.Abs(got-want) > boxExact {
				t.Errorf("a = %v σ at x = %.3g: CDF %.16f, Gil-Pelaez %.16f", a, x, got, want)
			}
		}
	}
	t.Logf("%d cases, worst difference from the Gil-Pelaez inversion %.2g (%s)", len(cases), worst, worstAt)
}

// irwinHall returns the CDF of the sum of n independent uniforms on [0, 1]
// at x: (1/n!)·Σ_{k=0}^{⌊x⌋} (−1)ᵏ·C(n, k)·(x − k)ⁿ (J. O. Irwin,
// Biometrika 19 (1927) 225–239; P. Hall, Biometrika 19 (1927) 240–245;
// Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions vol. 2,
// 2nd ed., ch. 26, sec. 9).
func irwinHall(n int, x float64) float64 {
	if x <= 0 {
		return 0
	}
	if x >= float64(n) {
		return 1
	}
	if x > float64(n)/2 {
		// The sum is symmetric about n/2; the alternating sum is
		// shorter, and cancels less, from the nearer end.
		return 1 - irwinHall(n, float64(n)-x)
	}
	var s float64
	for k := 0; k <= int(x); k++ {
		s += math.Pow(-1, float64(k)) * float64(combin.Binomial(n, k)) * math.Pow(x-float64(k), float64(n))
	}
	return s / factorial(n)
}

func factorial(n int) float64 {
	f := 1.0
	for k := 2; k <= n; k++ {
		f *= float64(k)
	}
	return f
}

// TestBoxNormalIrwinHall: with no normal part (σ → 0, and σ = 0 itself)
// the sum of k equal uniforms on [−a, a] is 2a·S − k·a, S Irwin–Hall; a
// normal part of 1e-9 of a box rounds the kinks by nothing visible.
func TestBoxNormalIrwinHall(t *testing.T) {
	var worst float64
	for _, sd := range []float64{0, 1e-9} {
		for k := 1; k <= maxBoxes; k++ {
			for _, a := range []float64{0.5, 2} {
				as := make([]float64, k)
				for j := range as {
					as[j] = a
				}
				for i := 0; i <= 40; i++ {
					s := float64(k) * float64(i) / 40
					got, want := boxCDF(2*a*s-float64(k)*a, sd, as), irwinHall(k, s)
					d := math.Abs(got - want)
					if sd > 0 && k == 1 {
						// σ rounds the density's jump of 1/(2a) at a
						// box edge: by σ·φ(0)/(2a) there.
						d = math.Max(0, d-sd*0.4/(2*a))
					}
					worst = math.Max(worst, d)
					if d > boxExact {
						t.Errorf("σ %g, %d boxes of %g at S = %g: CDF %.16f, Irwin–Hall %.16f", sd, k, a, s, got, want)
					}
				}
			}
		}
	}
	t.Logf("worst difference from Irwin–Hall %.2g", worst)
	// Two unequal boxes, σ = 0: the trapezoid, by hand: the density of
	// U₁ + U₂ on [−a₁, a₁] and [−a₂, a₂], a₁ ≥ a₂, rises linearly over
	// [−a₁ − a₂, −a₁ + a₂] to 1/(2a₁), so P(X ≤ −a₁ + a₂) = a₂/(2a₁).
	a1, a2 := 3.0, 0.4
	if got, want := boxCDF(-a1+a2, 0, []float64{a1, a2}), a2/(2*a1); math.Abs(got-want) > boxExact {
		t.Errorf("trapezoid: CDF %.16f, want %.16f", got, want)
	}
}

// TestBoxNormalFold measures the approximation of boxNormal.set: wide
// boxes beyond maxBoxes folded into the normal part by the central limit
// theorem, against the Gil-Pelaez inversion, with bounds twice the
// measured (the notes of variation_uniform.go quote them); up to maxBoxes,
// and narrow boxes (the series), are exact.
func TestBoxNormalFold(t *testing.T) {
	for _, tt := range []struct {
		sd    float64
		a     []float64
		bound float64
	}{
		{0.1, []float64{1, 1, 1, 1, 1, 1}, boxExact},
		{1, []float64{0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 1}, boxExact},
		{0.1, []float64{1, 1, 1, 1, 1, 1, 1}, 2 * 5.3e-4},
		{1, []float64{1, 1, 1, 1, 1, 1, 1}, 2 * 2.8e-4},
		{0.1, []float64{1, 1, 1, 1, 1, 1, 1, 1}, 2 * 8.3e-4},
		{0.1, []float64{3, 2, 1, 1, 1, 1, 0.5}, 2 * 3.6e-6},
	} {
		t.Run(fmt.Sprint(tt.sd, tt.a), func(t *testing.T) {
			v := tt.sd * tt.sd
			for _, w := range tt.a {
				v += w * w / 3
			}
			var worst float64
			for i := -40; i <= 40; i++ {
				x := 0.1 * float64(i) * math.Sqrt(v)
				worst = math.Max(worst, math.Abs(boxCDF(x, tt.sd, tt.a)-gilPelaez(x, tt.sd, tt.a)))
			}
			t.Logf("worst error %.2g (bound %.2g)", worst, tt.bound)
			if worst > tt.bound {
				t.Errorf("worst error %.3g, above %.3g", worst, tt.bound)
			}
		})
	}
}

// narrowPolyErr is the measured largest difference between
// boxNormal.narrowBelow (the series in monomials, one Horner sweep) and
// the Hermite recurrence of boxNormal.corner it replaces, over
// TestBoxNormalNarrowPoly's cases: 5.6e-17 in the CDF and 2.2e-16 in the
// density, rounding of sums of order 1. The bound is ten times the larger:
// another platform's exp and erfc, and the order of the additions, move
// the last bit or two, while a wrong coefficient of a Hermite polynomial
// or a term left out errs by far more (for one box of 0.3σ the term of
// He₃ alone, e₂ = 0.3⁴/5! = 6.8e-5, times 3z at z = 1, is 2e-4).
const (
	narrowPolyErr     = 2.2e-16
	narrowPolyAllowed = 10 * narrowPolyErr
)

// TestBoxNormalNarrowPoly checks the CDF and density of a normal part
// plus narrow boxes taken in the monomial basis (narrowPoly) against the
// Hermite recurrence (corner at the one corner of no wide box), over
// one to four boxes from 0.001σ to the series' bound Σ(aⱼ/σ)² = boxNarrow,
// at x from −boxFar to 0 (below's domain); and that the coefficients are
// those of the Hermite polynomials (Abramowitz & Stegun 22.3.11: He₃ =
// z³ − 3z, He₅ = z⁵ − 10z³ + 15z, He₇ = z⁷ − 21z⁵ + 105z³ − 105z).
func TestBoxNormalNarrowPoly(t *testing.T) {
	for m, want := range map[int][]float64{2: {-3, 1}, 3: {15, -10, 1}, 4: {-105, 105, -21, 1}} {
		for k, w := range want {
			if hermOdd[m][k] != w {
				t.Errorf("He_%d: coefficient of z^%d %g, want %g", 2*m-1, 2*k+1, hermOdd[m][k], w)
			}
		}
	}
	cases := [][]float64{{0.001}, {0.05}, {0.3}, {0.49}, {0.05, 0.05}, {0.2, 0.3}, {0.35, 0.35},
		{0.01, 0.02, 0.05}, {0.2, 0.2, 0.2}, {0.1, 0.15, 0.2, 0.25}, {0.25, 0.25, 0.25, 0.25}}
	var worstP, worstD float64
	var at string
	for _, a := range cases {
		v := 1.0
		for _, w := range a {
			v += w * w / 3
		}
		var d boxNormal
		d.set(1, append([]float64(nil), a...), v)
		if d.n != 0 || d.m == 0 {
			t.Fatalf("a = %v σ: %d wide boxes, %d series terms; want the series alone", a, d.n, d.m)
		}
		// The recurrence reads the series' coefficients in the units of
		// √v, which the closed form of one or two boxes leaves unset.
		ref := d
		sc := 1 / math.Sqrt(v)
		var scaled []float64
		for _, w := range a {
			scaled = append(scaled, w*sc)
		}
		copy(ref.c[:], seriesProduct(scaled, d.m))
		for i := 0; i <= 172; i++ {
			x := -boxFar + 0.05*float64(i)
			p, dens := d.below(x)
			f, g := ref.corner(x) // one corner, d.inv = 1
			f, g = math.Min(1, math.Max(0, f)), math.Max(0, g)
			if e := math.Abs(p - f); e > worstP {
				worstP, at = e, fmt.Sprintf("a = %v σ at x = %.3g", a, x)
			}
			worstD = math.Max(worstD, math.Abs(dens-g))
			if math.Abs(p-f) > narrowPolyAllowed || math.Abs(dens-g) > narrowPolyAllowed {
				t.Errorf("a = %v σ at x = %.3g: CDF %.17g, recurrence %.17g; density %.17g, recurrence %.17g", a, x, p, f, dens, g)
			}
		}
	}
	t.Logf("worst difference from the recurrence: CDF %.2g (%s), density %.2g", worstP, at, worstD)
}

// pairSeriesErr is the largest relative difference measured between the
// closed form of pairSeries and the product of the two boxes' sinh series
// over TestPairSeries's cases: 1.6e-15 (at the ninth term and beyond),
// the rounding of a dozen positive steps and of the product multiplied
// out here from math.Pow and factorials. The bound is ten times that, for other orders of
// the rounding; a wrong factorial or power errs by a factor of order one.
const (
	pairSeriesErr     = 1.6e-15
	pairSeriesAllowed = 10 * pairSeriesErr
)

// TestPairSeries checks the coefficients of one or two narrow boxes in
// closed form (pairSeries) against the product of their series
// sinh(x)/x = Σ x²ᵐ/(2m + 1)! (Abramowitz & Stegun 4.5.62) multiplied
// out here, relative to each coefficient: equal boxes, unequal ones, one
// far narrower than the other (where A^{2m+2} − B^{2m+2} would cancel)
// and one box alone.
func TestPairSeries(t *testing.T) {
	var worst float64
	for _, b := range [][2]float64{{0.3, 0.28}, {0.35, 0.35}, {0.2, 0.1}, {0.3, 0.001}, {0.01, 0.02}, {0.49, 0}, {0.05, 0}} {
		var e [boxSeries + 1]float64
		n := pairCoeffs(b[0], b[1], &e)
		want := seriesProduct(b[:], boxSeries)
		for m := 0; m <= min(n+1, boxSeries); m++ { // and the first term left out
			if want[m] == 0 {
				continue
			}
			d := math.Abs(e[m]-want[m]) / want[m]
			worst = math.Max(worst, d)
			if d > pairSeriesAllowed {
				t.Errorf("b = %v σ: e[%d] = %.17g, the product of the series %.17g", b, m, e[m], want[m])
			}
		}
	}
	t.Logf("worst relative difference %.2g", worst)
}

// seriesProduct returns the coefficients of u⁰ … u²ᵐ of Πⱼ sinh(aⱼu)/(aⱼu)
// (Abramowitz & Stegun 4.5.62), multiplied out term by term.
func seriesProduct(a []float64, m int) []float64 {
	c := make([]float64, m+1)
	c[0] = 1
	for _, w := range a {
		next := make([]float64, m+1)
		for i := range c {
			for j := 0; i+j <= m; j++ {
				next[i+j] += c[i] * math.Pow(w, float64(2*j)) / factorial(2*j+1)
			}
		}
		c = next
	}
	return c
}

// TestBoxNormalQuantile: the 3σ point of a uniform alone is (2Φ(3) − 1)
// of its half-width, of a normal part alone 3σ; for a mixture the CDF
// there is Φ(3) (Abramowitz & Stegun 26.2.29).
func TestBoxNormalQuantile(t *testing.T) {
	var d boxNormal
	d.set(0, []float64{1}, 1.0/3)
	if got, want := d.quantileSigmas(3, 3)/math.Sqrt(3), 1-2*normCDF(-3); math.Abs(got-want) > 1e-9 {
		t.Errorf("uniform alone: %.12f of the half-width, want %.12f", got, want)
	}
	d.set(0.5, []float64{1.2, 0.4}, 0.5+(1.44+0.16)/3)
	z := d.quantileSigmas(3, 3)
	if got, _ := d.upper(z); math.Abs(got-normCDF(-3)) > 1e-12 {
		t.Errorf("mixture: P(X > %g) = %.3g, want Φ(−3) = %.3g", z, got, normCDF(-3))
	}
	// Narrow boxes (the series): from its Cornish–Fisher start the point
	// takes one Newton step; the stopping rule leaves P(X > z) at Φ(−3)
	// to rounding (measured 2e-18; allowed boxExact, the CDF's own bound).
	// The start errs by the order of κ₄² (measured 8e-9).
	a := []float64{0.1, 0.08}
	d.set(1, a, 1+(0.01+0.0064)/3)
	if got, want := d.cornishFisher(3), 3.0; !(got < want) || got < want-1e-4 {
		t.Errorf("narrow boxes: Cornish–Fisher start %.9f, want just below 3", got)
	}
	z = d.quantileSigmas(3, d.cornishFisher(3))
	if got, _ := d.upper(z); math.Abs(got-normCDF(-3)) > boxExact {
		t.Errorf("narrow boxes: P(X > %.15f) = %.17g, want Φ(−3) = %.17g", z, got, normCDF(-3))
	}
	t.Logf("narrow boxes: Cornish–Fisher %.12f, point %.12f, P − Φ(−3) = %.2g", d.cornishFisher(3), z, func() float64 { u, _ := d.upper(z); return u - normCDF(-3) }())
	// A box of no width (a term whose sensitivity vanishes) is no box:
	// a uniform alone of half-width 1, scaled by √3.
	d.set(0, []float64{0, 1}, 1.0/3)
	if got, want := d.cdf(0.5*math.Sqrt(3)), 0.75; d.n != 1 || math.Abs(got-want) > boxExact {
		t.Errorf("with an empty box: %d boxes, CDF %.16f, want %g", d.n, got, want)
	}
	var n *boxNormal
	if n.quantileSigmas(3, 3) != 3 {
		t.Error("normal: the 3σ point is not 3")
	}
}

// uniformInput is a broadside pair whose L3 width varies from panel to
// panel uniformly over ±w (a wide box, little else: a small per-site
// part), under a normal registration offset, on a 3 x 3 array.
func uniformInput(t *testing.T, name string, tol, w float64) *Input {
	t.Helper()
	s := namedPair(name, section.Spec{Coupling: -3, Tolerance: tol})
	arr := panel.Array{Part: "p", Count: [2]int{3, 3}, Pitch: panel.Vec{X: 4 * inch, Y: 6 * inch}}
	l, inst, sites := layout(t, name, 90, arr)
	m := &registration.Model{Contributors: []registration.Contributor{{Name: "L3", Layers: []string{"L3"},
		Terms: [registration.NumTerms]registration.Term{registration.OffsetX: term(0.2*mil, 0.3*mil)}}}}
	pm := &process.Model{Size: l.Panel.Size, Terms: []process.Term{
		{Name: "w3", Layer: "L3", Quantity: process.Width, Panel: registration.Term{Spread: w, Dist: registration.Uniform},
			SiteSigma: 0.05 * w, Shape: process.Shape{Kind: process.Tilt, Amplitude: 0.2 * w}}}}
	return &Input{Layout: l, Instances: inst, Sites: sites, Sections: []*section.Section{s}, Model: m, Process: pm}
}

// TestUniformProcessMonteCarlo: on a job whose coupling is moved mostly
// by a wide uniform panel part, the closed-form site yield agrees with the
// Monte Carlo (variation_mc.go, which draws the part uniform) within 4
// standard errors at every site (binomial, as TestYieldProcessMonteCarlo),
// and the normal approximation of the part (its variance w²/3, the
// closed form before the uniform parts were exact) does not, at some site,
// by far more: the case can fail.
func TestUniformProcessMonteCarlo(t *testing.T) {
	in := uniformInput(t, "unif", 0.08, 1.5*mil)
	a, err := Analyse(t.Context(), in, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	res, err := a.Yield.MonteCarlo(t.Context(), registration.MCSettings{Trials: 40000, Seed: 13})
	if err != nil {
		t.Fatal(err)
	}
	ev := a.Evaluator(0)
	nom := ev.Curve.Section.NominalOffset()
	worstNew, worstOld := 0.0, 0.0
	for i := range a.Sites {
		r := &a.Sites[i]
		pc, pmc, se := r.PInSpec, res.SiteYield(i), res.SiteSE(i)
		var row procRow
		ev.Proc.row(&row, r.Site.Pos)
		row.boxes = 0 // the normal approximation
		old := ev.pInSpecProc(ev.Rel.Prob(&r.Row, nom), &row)
		t.Logf("site %d: closed %.5f, normal approximation %.5f, MC %.5f ± %.5f", i, pc, old, pmc, se)
		worstNew = math.Max(worstNew, math.Abs(pc-pmc)/se)
		worstOld = math.Max(worstOld, math.Abs(old-pmc)/se)
		if math.Abs(pc-pmc) > 4*se {
			t.Errorf("site %d: closed form %.5f, Monte Carlo %.5f ± %.5f", i, pc, pmc, se)
		}
	}
	t.Logf("closed form at most %.2f SE from Monte Carlo, the normal approximation %.1f SE", worstNew, worstOld)
	if worstOld <= 4 {
		t.Errorf("the normal approximation is within %.1f SE of Monte Carlo everywhere: the case does not test the uniform part", worstOld)
	}
}

// BenchmarkSiteUniform is the closed form of one site of
// bigProcessInput (12 process terms, two of them with uniform panel
// parts, narrow against the rest: the series), P(in spec) and the worst
// drift, exact ("uniform") and with the uniform parts taken as normal
// ("normal", the path of jobs without them).
func BenchmarkSiteUniform(b *testing.B) {
	_, _, a := evaluatedProcess(b)
	ev := a.Evaluator(a.Sites[0].Section)
	r := &a.Sites[0]
	op := ev.Rel.Prob(&r.Row, ev.Curve.Section.NominalOffset())
	for _, exact := range []bool{false, true} {
		name := "normal"
		if exact {
			name = "uniform"
		}
		b.Run(name, func(b *testing.B) {
			var row procRow
			ev.Proc.row(&row, r.Site.Pos)
			if !exact {
				row.boxes = 0
			} else if row.boxes != 2 {
				b.Fatalf("%d uniform parts, want 2", row.boxes)
			}
			b.ReportAllocs()
			cpu0 := cpuSeconds(b)
			for b.Loop() {
				ev.pInSpecProc(op, &row)
				ev.worstDriftProc(r.Offset, r.Stats.SDAcross, &row)
			}
			// Per CPU second too: on a shared machine the wall figure
			// counts the time the benchmark waited for a core.
			b.ReportMetric((cpuSeconds(b)-cpu0)*1e6/float64(b.N), "cpu-µs/op")
		})
	}
}

// TestUniformEdgeCoupled works an edge-coupled pair (its offset fixed)
// whose width varies from panel to panel uniformly over ±w and nothing
// else, first order, by hand from the uniform distribution: the coupling
// c₀ + s·U is uniform over c₀ ± |s|·w, so P(in spec) is the share of that
// interval inside the window; the worst drift is at U = ±(2Φ(3) − 1)·w,
// the points a normal part reaches at 3σ with the same probability
// (Abramowitz & Stegun 26.2.29); and the offset domain is the spec
// interval widened by |s|·w, the box edge, not 6·|s|·w/√3. Then with a
// per-site normal part beside it, P(in spec) against the Gil-Pelaez
// inversion of the same sum.
func TestUniformEdgeCoupled(t *testing.T) {
	const w = 0.6 * mil
	s := microstripPair()
	size := panel.Vec{X: 18 * inch, Y: 24 * inch}
	box := registration.Term{Spread: w, Dist: registration.Uniform}
	pm := &process.Model{Size: size, Terms: []process.Term{{Name: "w", Layer: "L1", Quantity: process.Width, Panel: box}}}
	// A first solve for the sensitivity, to place the window inside the
	// coupling's box.
	ev := procEvaluator(t, s, &registration.Model{}, pm, []panel.Vec{{}})
	nom := s.NominalOffset()
	sw := ev.termSens(0, nom)
	c0 := ev.Curve.Coupling(nom)
	half := math.Abs(sw) * w // the coupling's half-width
	if half < 0.05 {
		t.Fatalf("sensitivity %g dB/mil: too small for the case", sw*mil)
	}
	// A window from c₀ − 0.3·half to c₀ + 0.5·half: centre c₀ + 0.1·half.
	s.Spec = section.Spec{Coupling: c0 + 0.1*half, Tolerance: 0.4 * half}
	ev = procEvaluator(t, s, &registration.Model{}, pm, []panel.Vec{{}})
	// The solve for the new spec reaches other offsets: the curve and
	// its sensitivities move by the solver's accuracy. Take them anew.
	sw, c0 = ev.termSens(0, nom), ev.Curve.Coupling(nom)
	half = math.Abs(sw) * w
	lim := [2]float64{s.Spec.Coupling - s.Spec.Tolerance, s.Spec.Coupling + s.Spec.Tolerance}
	r := ev.Eval(panel.Vec{}, panel.Vec{X: 1})
	want := (math.Min(lim[1], c0+half) - math.Max(lim[0], c0-half)) / (2 * half)
	t.Logf("P %.3g from the box share, worst drift %.3g dB from the 3σ point", r.PInSpec-want, math.Abs(r.WorstDrift)-half*(1-2*normCDF(-3)))
	// Measured: P exact, the worst drift 2.7e-11 dB off (its point is
	// placed to boxQuantileTol, 1e-10 relative); bounds boxExact and
	// 1e-9 of the box, ten times the quantile's tolerance.
	if math.Abs(r.PInSpec-want) > boxExact {
		t.Errorf("P = %.12f, want the share of the box inside the window %.12f", r.PInSpec, want)
	}
	if want := half * (1 - 2*normCDF(-3)); math.Abs(math.Abs(r.WorstDrift)-want) > 1e-9*half {
		t.Errorf("worst drift %.9f dB, want ±%.9f", r.WorstDrift, want)
	}
	lo, hi := ev.Curve.Curve.Range()
	iv, _, err := registration.SpecInterval(ev.Curve.Coupling, lo, hi, nom, s.Spec.Coupling, s.Spec.Tolerance+half)
	if err != nil {
		t.Fatal(err)
	}
	if d := ev.Proc.Domain; math.Abs(d.Lo-iv.Lo) > 1e-12 || math.Abs(d.Hi-iv.Hi) > 1e-12 {
		t.Errorf("domain %v, want %v (the window widened by the box edge)", d, iv)
	}
	t.Logf("P %.6f, worst drift %.5f dB of a %.5f dB box", r.PInSpec, r.WorstDrift, half)

	// With a per-site normal part of a third of the box.
	pm.Terms[0].SiteSigma = w / 3
	ev = procEvaluator(t, s, &registration.Model{}, pm, []panel.Vec{{}})
	r = ev.Eval(panel.Vec{}, panel.Vec{X: 1})
	sd := math.Abs(sw) * w / 3
	want = gilPelaez(lim[1]-c0, sd, []float64{half}) - gilPelaez(lim[0]-c0, sd, []float64{half})
	t.Logf("with a site part: P %.3g from Gil-Pelaez", r.PInSpec-want)
	if math.Abs(r.PInSpec-want) > boxExact { // measured 1.1e-16
		t.Errorf("with a site part: P = %.12f, Gil-Pelaez %.12f", r.PInSpec, want)
	}
}

// TestWindowQuadBoxes: the window of m + s·X + q·X², X a normal plus two
// uniforms, against a Monte Carlo of 10⁶ draws within 4 standard errors
// (binomial, as TestWindowQuad).
func TestWindowQuadBoxes(t *testing.T) {
	var d boxNormal
	const sn, a1, a2 = 0.4, 1.2, 0.5
	v := sn*sn + (a1*a1+a2*a2)/3
	d.set(sn*sn, []float64{a1, a2}, v)
	rng := rand.New(rand.NewPCG(5, 6))
	const n = 1000000
	xs := make([]float64, n)
	for i := range xs {
		xs[i] = (sn*rng.NormFloat64() + a1*(2*rng.Float64()-1) + a2*(2*rng.Float64()-1)) / math.Sqrt(v)
	}
	for _, tt := range []struct{ m, s, q, lo, hi float64 }{
		{0, 1, 0, -0.8, 1.1},
		{0.1, 1, 0.2, -0.8, 1.1},
		{0.1, 1, -0.3, -0.8, 0.6},
		{0, 0.2, 0.5, 0.1, 0.9},
		{-0.2, 0.5, -0.4, -1, 0},
	} {
		good := 0
		for _, x := range xs {
			if c := tt.m + tt.s*x + tt.q*x*x; c >= tt.lo && c <= tt.hi {
				good++
			}
		}
		p := float64(good) / n
		se := math.Sqrt(p * (1 - p) / n)
		got := windowQuadOf(&d, tt.m, tt.s, tt.q, tt.lo, tt.hi)
		if math.Abs(got-p) > 4*se {
			t.Errorf("m %g s %g q %g: closed form %.5f, Monte Carlo %.5f ± %.5f", tt.m, tt.s, tt.q, got, p, se)
		}
	}
}

// TestUniformQuadrature: the offset integral of a site whose coupling box
// edges cross a spec limit within the offsets reached (kinks in the
// window, cut out by boxCuts) against the midpoint rule with 400,000
// points over the same range (error h²·f″/24, below 1e-10 between the
// kinks). Measured 6.4e-12 (3.8e-8 without the cuts at the kinks); allow
// 1e-9, the integral's own bound (procNodes: 1e-8 over ±6σ) divided by
// ten, since here the density is smooth.
func TestUniformQuadrature(t *testing.T) {
	in := uniformInput(t, "unifq", 0.08, 0.8*mil)
	in.Process.Terms[0].SiteSigma = 0
	a, err := Analyse(t.Context(), in, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	ev := a.Evaluator(0)
	var row procRow
	ev.Proc.row(&row, panel.Vec{})
	sp := ev.Curve.Section.Spec
	mu, sd := ev.Curve.Section.NominalOffset()+0.2*mil, 0.3*mil
	const n = 400000
	lo, hi := math.Max(ev.Proc.Domain.Lo, mu-procRangeSigmas*sd), math.Min(ev.Proc.Domain.Hi, mu+procRangeSigmas*sd)
	h := (hi - lo) / n
	var want float64
	for i := range n {
		x := lo + (float64(i)+0.5)*h
		z := (x - mu) / sd
		want += math.Exp(-z*z/2) / (sd * math.Sqrt(2*math.Pi)) * h * ev.windowAt(x, &row, sp.Coupling-sp.Tolerance, sp.Coupling+sp.Tolerance)
	}
	got := ev.pInSpecProc(registration.SiteProb{Mean: mu, SD: sd}, &row)
	t.Logf("P %.12f, midpoint rule %.12f", got, want)
	if math.Abs(got-want) > 1e-9 {
		t.Errorf("P = %.12f, midpoint rule %.12f", got, want)
	}
}

// TestMayBeWide: wherever boxNormal.set splits off a wide box (corners)
// at some offset of a site, Proc.mayBeWide says a box may be wide there,
// so boxCuts never skips a scan that would find a kink; and it tells the
// cases apart: a box narrow against a normal term everywhere, wide
// everywhere, and one whose split changes across the offsets (a uniform
// width on L3 beside a normal thickness of the core C2, scaled so that
// within the offsets the box crosses the series' bound boxNarrow).
func TestMayBeWide(t *testing.T) {
	const w = 0.4 * mil
	s := namedPair("maywide", section.Spec{Coupling: -3, Tolerance: 1})
	box := registration.Term{Spread: w, Dist: registration.Uniform}
	at := []panel.Vec{{}, {X: 3 * inch, Y: -2 * inch}}
	model := func(sd4 float64) *process.Model {
		return &process.Model{Size: panel.Vec{X: 18 * inch, Y: 24 * inch}, Terms: []process.Term{
			{Name: "w3", Layer: "L3", Quantity: process.Width, Panel: box, Shape: process.Shape{Kind: process.Tilt, Amplitude: 0.1 * mil}},
			{Name: "t2", Layer: "C2", Quantity: process.Thickness, Panel: term(0, sd4)}}}
	}
	ev := procEvaluator(t, s, &registration.Model{}, model(w), at)
	// The box's a² = boxNarrow·vₙ where |s₃|·w = ½·|s₂|·sd4: sd4 = edge
	// puts that at the geometric middle of the ratio's range.
	lo, hi := ev.Curve.Curve.Range()
	rmin, rmax := math.Inf(1), 0.0
	for i := 0; i <= 400; i++ {
		off := lo + (hi-lo)*float64(i)/400
		r := math.Abs(ev.termSens(0, off)) / math.Abs(ev.termSens(1, off))
		rmin, rmax = math.Min(rmin, r), math.Max(rmax, r)
	}
	if !(rmax > 1.05*rmin) {
		t.Fatalf("the sensitivities' ratio spans %g to %g: the split does not change across the offsets", rmin, rmax)
	}
	edge := 2 * w * math.Sqrt(rmin*rmax)
	for _, tt := range []struct {
		name      string
		sd4       float64
		narrow    bool // some offset with every box narrow
		wide      bool // some offset with a wide box
		skipsSome bool // mayBeWide false somewhere
	}{
		{"narrow", 20 * edge, true, false, true},
		{"wide", edge / 20, false, true, false},
		{"mixed", edge, true, true, true},
	} {
		t.Run(tt.name, func(t *testing.T) {
			ev := procEvaluator(t, s, &registration.Model{}, model(tt.sd4), at)
			lo, hi := ev.Curve.Curve.Range()
			var narrow, wide, skips bool
			for _, p := range at {
				var row procRow
				ev.Proc.row(&row, p)
				for i := 0; i <= 4000; i++ {
					off := lo + (hi-lo)*float64(i)/4000
					var d boxNormal
					ev.atBoxes(off, &row, &d)
					may := ev.Proc.mayBeWide(off, off)
					if d.n > 0 && !may {
						t.Fatalf("at %.4f mil: %d wide boxes, but mayBeWide is false", off/mil, d.n)
					}
					narrow, wide, skips = narrow || d.n == 0, wide || d.n > 0, skips || !may
				}
			}
			if narrow != tt.narrow || wide != tt.wide || skips != tt.skipsSome {
				t.Errorf("narrow somewhere %v, wide somewhere %v, skipped somewhere %v; want %v, %v, %v", narrow, wide, skips, tt.narrow, tt.wide, tt.skipsSome)
			}
		})
	}
}

// BenchmarkBoxNormal times the per-offset parts of the closed form with
// two narrow uniform parts, as at the sites of BenchmarkSiteUniform (the
// series of about ten terms): set, and one CDF read from it.
func BenchmarkBoxNormal(b *testing.B) {
	a := [2]float64{0.3, 0.28}
	v := 1 + (a[0]*a[0]+a[1]*a[1])/3
	b.Run("set", func(b *testing.B) {
		b.ReportAllocs()
		var d boxNormal
		for b.Loop() {
			w := a
			d.set(1, w[:], v)
		}
		if d.n != 0 || d.m < 8 {
			b.Fatalf("%d wide boxes, %d series terms: not the case timed", d.n, d.m)
		}
	})
	b.Run("cdf", func(b *testing.B) {
		b.ReportAllocs()
		var d boxNormal
		w := a
		d.set(1, w[:], v)
		x, sink := -1.3, 0.0
		for b.Loop() {
			sink += d.cdf(x)
			x += 1e-9
		}
		_ = sink
	})
}

// The largest differences measured between X's distribution read from
// the section's table (boxTab, polynomials of degree boxTabDeg = 3 in the
// row weight) and set's, over TestBoxTab's offsets: 4.9e-15 in the CDF and
// 1.3e-14 in the density (the series terms below boxSeriesTol that set
// leaves out and the table keeps, and rounding: the same with degree 5),
// 3.9e-14 in the 3σ point (Newton's stopping rule, boxQuantileStep,
// leaves it to ~2e-14) and 5.3e-15 in the reach. The bounds are four
// times those: room for other platforms' exp and erfc while at the exact
// path's own truncation (boxSeriesTol); a table of degree 1 errs by 5e-10
// in the reach and 2.4e-13 in the 3σ point, and fails them.
const (
	boxTabCDF, boxTabDensity, boxTabZ, boxTabReach = 4.9e-15, 1.3e-14, 3.9e-14, 5.3e-15
	boxTabMargin                                   = 4
)

// TestBoxTab checks X's distribution read from the section's table
// against boxNormal.set at offsets between the table's points (eleven
// per interval, none a Chebyshev point) over every tabulated interval of
// two sections: the L3 width uniform beside a wide normal core thickness
// (one box), and the L3 and L4 widths uniform (two); and that a box that
// may be wide leaves no interval tabulated.
func TestBoxTab(t *testing.T) {
	const w = 0.4 * mil
	s := namedPair("boxtab", section.Spec{Coupling: -3, Tolerance: 1})
	box := registration.Term{Spread: w, Dist: registration.Uniform}
	size := panel.Vec{X: 18 * inch, Y: 24 * inch}
	t2 := process.Term{Name: "t2", Layer: "C2", Quantity: process.Thickness, Panel: term(0, 4*mil)}
	w3 := process.Term{Name: "w3", Layer: "L3", Quantity: process.Width, Panel: box, SiteSigma: 0.3 * mil}
	w4 := process.Term{Name: "w4", Layer: "L4", Quantity: process.Width, Panel: box, SiteSigma: 0.3 * mil}
	var worstP, worstD, worstZ, worstR float64
	for _, tt := range []struct {
		name  string
		terms []process.Term
		tab   bool
	}{
		{"one box", []process.Term{w3, t2}, true},
		{"two boxes", []process.Term{w3, w4, t2}, true},
		{"wide", []process.Term{{Name: "w3", Layer: "L3", Quantity: process.Width, Panel: box}}, false},
	} {
		ev := procEvaluator(t, s, &registration.Model{}, &process.Model{Size: size, Terms: tt.terms}, []panel.Vec{{}})
		pr := ev.Proc
		if pr.boxTab != nil {
			t.Fatalf("%s: a table for one site", tt.name)
		}
		pr.tabulateBoxes() // as for many sites (boxTabPays)
		if (pr.boxTab != nil) != tt.tab {
			t.Fatalf("%s: tabulated %v, want %v", tt.name, pr.boxTab != nil, tt.tab)
		}
		if pr.boxTab == nil {
			continue
		}
		var row procRow
		pr.row(&row, panel.Vec{})
		n := 0
		for i := range pr.tabRows - 1 {
			if !pr.boxTab.has(i) {
				continue
			}
			n++
			for k := range 11 {
				f := (float64(k) + 0.5) / 11
				var got, want boxNormal
				pr.boxTab.fill(i, f, &got)
				r0, r1 := pr.tab[i*len(pr.Bind):(i+1)*len(pr.Bind)], pr.tab[(i+1)*len(pr.Bind):(i+2)*len(pr.Bind)]
				setBoxes(0, r0, r1, f, &row, &want, true)
				if got.m < want.m {
					t.Fatalf("%s, interval %d at %g: %d series terms, set %d", tt.name, i, f, got.m, want.m)
				}
				for j := 0; j <= 86; j++ {
					x := -boxFar + 0.1*float64(j)
					p, d := got.below(x)
					pw, dw := want.below(x)
					worstP, worstD = math.Max(worstP, math.Abs(p-pw)), math.Max(worstD, math.Abs(d-dw))
					if math.Abs(p-pw) > boxTabMargin*boxTabCDF || math.Abs(d-dw) > boxTabMargin*boxTabDensity {
						t.Errorf("%s, interval %d at %g, x = %g: CDF %.17g, set %.17g; density %.17g, set %.17g", tt.name, i, f, x, p, pw, d, dw)
					}
				}
				z, zw := got.quantileSigmas(3, 3), want.quantileSigmas(3, 3)
				worstZ = math.Max(worstZ, math.Abs(z-zw))
				worstR = math.Max(worstR, math.Abs(got.reach(6)-want.reach(6)))
				if math.Abs(z-zw) > boxTabMargin*boxTabZ || math.Abs(got.reach(6)-want.reach(6)) > boxTabMargin*boxTabReach || math.Abs(got.cornishFisher(3)-want.cornishFisher(3)) > boxTabMargin*boxTabReach {
					t.Errorf("%s, interval %d at %g: 3σ point %.17g, set %.17g; reach %.17g, set %.17g", tt.name, i, f, z, zw, got.reach(6), want.reach(6))
				}
			}
		}
		if n == 0 {
			t.Fatalf("%s: no interval tabulated", tt.name)
		}
	}
	t.Logf("worst difference from set: CDF %.2g, density %.2g, 3σ point %.2g, reach %.2g", worstP, worstD, worstZ, worstR)
}

// BenchmarkBoxTab times reading X's distribution from the section's table
// (boxTab.fill) at the sites of BenchmarkSiteUniform, against set
// (BenchmarkBoxNormal/set).
func BenchmarkBoxTab(b *testing.B) {
	_, _, a := evaluatedProcess(b)
	pr := a.Evaluator(a.Sites[0].Section).Proc
	i, _ := pr.rowAt(a.Sites[0].Offset)
	if !pr.boxTab.has(i) {
		b.Fatal("the site's interval is not tabulated")
	}
	b.ReportAllocs()
	var d boxNormal
	f := 0.3
	for b.Loop() {
		pr.boxTab.fill(i, f, &d)
		f = 1 - f
	}
}
