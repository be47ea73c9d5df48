package drift

import (
	"math"
	"slices"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration"
)

// Uniform panel parts of the process terms.
//
// A process term's panel-to-panel part may be uniform on [μ − w, μ + w]
// (registration.Uniform, process.Term.Panel). Conditional on the offset δ
// the first-order process deviation is then
//
//	L = Σᵢ sᵢ·(Δpᵢ − μᵢ) = N + Σⱼ Uⱼ,
//
// N normal of variance v_n = Σ sᵢ²·(σᵢ² − wᵢ²/3) (the normal panel parts
// and every per-site part), Uⱼ uniform on [−aⱼ, aⱼ], aⱼ = |sⱼ|·wⱼ, all
// independent. L is not normal; in the units of its standard deviation
// √v (v = v_n + Σ aⱼ²/3), X = L/√v has the distribution boxNormal holds,
// and the window probability is P(lo ≤ m + s·X + q·X² ≤ hi), the CDF of X
// at the roots of two quadratics (windowQuadOf, as for a normal X).
//
// The CDF of a normal plus k uniforms. Let G₀(y) = Φ(y/σ) and
// G_n(y) = ∫_{−∞}^{y} G_{n−1}(u) du, so that G_n(y) = E[(y − N)₊ⁿ]/n!.
// The density of Uⱼ is (1/2aⱼ)·[H(u + aⱼ) − H(u − aⱼ)], H the unit step,
// so P(N + U₁ ≤ x) = (1/2a₁)·∫_{−a₁}^{a₁} G₀(x − u) du
// = [G₁(x + a₁) − G₁(x − a₁)]/(2a₁), and by induction over the boxes
//
//	P(N + Σⱼ Uⱼ ≤ x) = (1/Πⱼ 2aⱼ)·Σ_ε (Πⱼ εⱼ)·G_k(x + Σⱼ εⱼ·aⱼ),
//
// the sum over the 2^k corners ε ∈ {−1, +1}^k of the box. In the repeated
// integrals of the complementary error function (Abramowitz & Stegun,
// Handbook of Mathematical Functions, 7.2.1–7.2.5: iⁿerfc z =
// ∫_z^∞ iⁿ⁻¹erfc t dt, i⁻¹erfc z = (2/√π)·e^{−z²}, i⁰erfc = erfc),
// substituting u = −t/(σ√2) in each integral gives
// G_n(y) = ½·(σ√2)ⁿ·iⁿerfc(−y/(σ√2)), and the recurrence 7.2.5,
// 2n·iⁿerfc z = iⁿ⁻²erfc z − 2z·iⁿ⁻¹erfc z, becomes
//
//	G_n(y) = [y·G_{n−1}(y) + σ²·G_{n−2}(y)]/n,
//	G₀ = Φ(y/σ), G₁ = y·Φ(y/σ) + σ·φ(y/σ)
//
// (the same follows from Stein's identity E[N·f(N)] = σ²·E f′(N)). Written
// in y rather than z it holds at σ = 0 as well, where G_n(y) = y₊ⁿ/n! and
// the sum is the CDF of a sum of uniforms: for k equal widths the
// Irwin–Hall distribution (J. O. Irwin, Biometrika 19 (1927) 225–239;
// P. Hall, Biometrika 19 (1927) 240–245), which the tests check.
//
// Numerical stability. The recurrence loses digits relative to G_n where
// G_n is small (y ≪ −σ: the upward recurrence at large positive z), but
// not absolutely: its terms there are below σⁿ·φ(y/σ)·|y/σ|ⁿ, so the
// corner sum's absolute error stays at rounding. X is symmetric, so
// P(X ≤ x) for x > 0 is taken as 1 − P(X ≤ −x): every corner then lies
// below Σ aⱼ, and the sum's terms, of size (Σ aⱼ)ᵏ/k!, cancel to Π 2aⱼ
// by at most (Σ aⱼ)ᵏ/(k!·Π 2aⱼ).
//
// Narrow boxes. A box narrow against the normal part would make the k-th
// difference cancel by σ/(2aⱼ) per box (a box of 0.01σ loses two digits),
// and cost two corners. Its difference is instead taken by its Taylor
// series: with D = d/dy, [G(y + a) − G(y − a)]/(2a) = S(a·D)·DG,
// S(u) = sinh(u)/u = Σₘ u²ᵐ/(2m + 1)! (Abramowitz & Stegun 4.5.62), and
// DʲG_n = G_{n−j}, so the narrow boxes together act on the corners' sum
// of G_k (k the wide boxes) by Σₘ cₘ·G_{k−2m}, cₘ the coefficients of
// Πⱼ S(aⱼu) in u²ᵐ, and the orders below 0 are Φ's derivatives,
// G_{−j} = (−1)^{j−1}·He_{j−1}(y/σ)·φ(y/σ)/σʲ (Rodrigues' formula for
// the Hermite polynomials He, Abramowitz & Stegun 22.11, and their
// recurrence He_{n+1} = x·He_n − n·He_{n−1}, 22.7). With H² = Σ(aⱼ/σ)² over the
// narrow boxes, cₘ ≤ (H²/6)ᵐ/m! (termwise, as boxFar's bound), and
// Cramér's inequality |Heₙ(x)|·e^{−x²/4} ≤ 1.086·√(n!) (Abramowitz &
// Stegun 22.14.17) bounds the term m by 0.43·√((2m−1)!)·(H²/6)ᵐ/m!; the
// narrowest boxes go into the series while H² ≤ boxNarrow = 0.25, where
// 14 terms reach 2.6e-17; the series stops at the first term whose bound
// is below boxSeriesTol. Every corner then costs one Φ and one φ
// whatever the narrow boxes. With no wide box (the common case of narrow
// panel parts beside a wider normal part) the sum is the series alone at
// one corner, Φ(z) − φ(z)·Σ eₘ·He_{2m−1}(z): set converts it to powers of
// z once (narrowPoly), so that each CDF is one Horner sweep, and one or
// two boxes take their coefficients in closed form (pairSeries), their
// bound on the coefficients themselves. Measured against the Gil-Pelaez
// inversion of the characteristic function over k = 1, 2, 3 and
// half-widths 0.1σ to 10σ, and narrower boxes down to 0.001σ on both
// sides of boxNarrow: 4.1e-15 (a box of 0.001σ, whose series stops after
// one term: the second, below boxSeriesTol, left out; 9.4e-16 elsewhere);
// against the Irwin–Hall CDF for up to six equal boxes: 8.9e-16
// (TestBoxNormalCDF, TestBoxNormalIrwinHall).
//
// More boxes. 2^k corners cost 2^k evaluations of Φ and of φ; beyond
// maxBoxes wide boxes the narrowest of them are folded into the normal
// part by their variance, the approximation of the central limit theorem
// for their sum. Its error, measured against the inversion
// (TestBoxNormalFold): 5.3e-4 for seven equal boxes with a normal part of
// a tenth of one (the worst case: the folded box as wide as the rest),
// 8.3e-4 for eight, 2.8e-4 for seven with a normal part as wide as a box,
// and 3.6e-6 when the folded box is the narrowest of unequal ones.
//
// Cost (BenchmarkSiteUniform, one site of 12 process terms, two with
// narrow uniform parts: P(in spec) and the worst drift; the least
// cpu-µs/op of four runs at -cpu 1, alternating with the code before, on
// a machine at load 2–7): 15.5 µs against 10.0 µs with the parts taken
// as normal (24.3 µs before, against 9.5: the series in powers of z, one
// Horner sweep per CDF instead of the Hermite recurrence, about 70 ns a
// CDF against 150; the pair's closed form; boxCuts's scan skipped where
// no box can be wide, Proc.tabulateWide; X's distribution read from the
// section's table, boxTab, in 27 ns instead of a set of 160 ns,
// BenchmarkBoxTab and BenchmarkBoxNormal). Per site P(in spec) takes some
// 60 windows of two CDFs each, every one an erfc, an exp and the sweep;
// the normal path takes the erfc alone.

// maxBoxes is the number of wide uniform parts boxNormal holds exactly
// by its corners.
const maxBoxes = 6

// boxNarrow bounds Σ(aⱼ/σ)² of the boxes taken by the series (see above).
const boxNarrow = 0.25

// boxSeries is the most terms of the series beyond the first: at
// Σ(aⱼ/σ)² = boxNarrow the bound of its term m, 0.43·√((2m−1)!)·
// (boxNarrow/6)ᵐ/m!, is 2.6e-17 at m = 14.
const boxSeries = 14

// boxSeriesTol is the bound of the first series term left out: 1e-14,
// a hundredth of TestBoxNormalCDF's tolerance and eight orders below the
// six decimals a yield is written with. At 1e-17 the series kept three
// or four terms more and BenchmarkSiteUniform took 80 µs against 55 µs.
const boxSeriesTol = 1e-14

// boxFar is where the CDF of X rounds to 0 or 1: N plus uniforms of total
// variance 1 is sub-Gaussian with variance proxy 1 (a uniform's moment
// generating function sinh(λa)/(λa) ≤ exp(λ²a²/6), termwise since
// (2n + 1)! ≥ 6ⁿ·n!), so P(X > x) ≤ exp(−x²/2) (Chernoff), and
// exp(−8.6²/2) = 8.7e-17 < 2⁻⁵³.
const boxFar = 8.6

// boxNormal is the distribution of X = N(0, sd²) + Σⱼ Uⱼ, Uⱼ uniform on
// [−aⱼ, aⱼ], symmetric about 0; a nil *boxNormal is the standard normal.
// The n wide boxes a[:n] enter by their corners, the narrow ones by the
// series c[:m+1].
type boxNormal struct {
	sd  float64
	n   int
	a   [maxBoxes]float64
	inv float64 // 1/Πⱼ 2aⱼ over the wide boxes
	m   int
	c   [boxSeries + 1]float64
	// q holds, when every box is narrow (n = 0, m > 0), the series in the
	// monomial basis (narrowPoly): Σₘ cₘ·G_{−2m}(y) = Φ(z) − φ(z)·z·Q(z²),
	// Q(u) = Σₖ q[k]·uᵏ, k < m.
	q [boxSeries]float64
	// sd0 and sumA are the normal part before any folding and the sum of
	// every half-width: the reach of the deviation (reach); sumA4 is the
	// sum of every half-width's fourth power (cornishFisher).
	sd0, sumA, sumA4 float64
}

// set fills d with the normal variance vn and the half-widths a (in any
// order; a is reordered), all divided by the scale √v: the narrowest
// boxes, while Σ(aⱼ/σ)² ≤ boxNarrow, into the series; beyond maxBoxes
// of the rest, the narrowest folded into the normal part.
func (d *boxNormal) set(vn float64, a []float64, v float64) { d.setOf(vn, a, v, true) }

// setOf is set; without series it stops once the boxes are split, the
// series left empty (d.m = 0): d then holds the wide boxes d.a[:d.n] and
// the normal part d.sd, all boxCuts reads, but not the distribution.
func (d *boxNormal) setOf(vn float64, a []float64, v float64, series bool) {
	sc := 1 / math.Sqrt(v)
	if !(vn > 0) {
		vn = 0
	}
	vn = vn * sc * sc
	if len(a) <= 8 {
		// Insertion sort: as slices.Sort, without its setup for the
		// one or two boxes of most jobs.
		for i := 1; i < len(a); i++ {
			for j := i; j > 0 && a[j] < a[j-1]; j-- {
				a[j], a[j-1] = a[j-1], a[j]
			}
		}
	} else {
		slices.Sort(a)
	}
	d.sd0, d.sumA, d.sumA4 = math.Sqrt(vn), 0, 0
	for _, w := range a {
		d.sumA += w * sc
		d.sumA4 += (w * sc) * (w * sc) * (w * sc) * (w * sc)
	}
	i := 0
	for i < len(a) && a[i] == 0 { // a term that moves nothing here
		i++
	}
	narrow := i
	var h2 float64
	if vn > 0 {
		for ; narrow < len(a); narrow++ {
			r := a[narrow] * sc * a[narrow] * sc / vn
			if h2+r > boxNarrow {
				break
			}
			h2 += r
		}
	}
	wide := narrow
	for ; len(a)-wide > maxBoxes; wide++ {
		w := a[wide] * sc
		vn += w * w / 3
	}
	d.sd, d.n, d.inv = math.Sqrt(vn), len(a)-wide, 1
	for j := range d.n {
		d.a[j] = a[wide+j] * sc
		d.inv /= 2 * d.a[j]
	}
	// The terms of the series to keep: while the bound of the term m,
	// 0.43·√((2m−1)!)·(H²/6)ᵐ/m! with H² = Σ(aⱼ/σ)² against the final
	// σ (folding widens it), exceeds boxSeriesTol.
	d.m, d.c[0] = 0, 1
	if !series {
		return
	}
	if h2 > 0 {
		if d.n == 0 && narrow-i <= 2 {
			d.pairSeries(a[i:narrow], sc)
			return
		}
		h2 *= d.sd0 * d.sd0 / vn
		for b := h2; d.m < boxSeries && seriesBound[d.m+1]*b >= boxSeriesTol; b *= h2 {
			d.m++
		}
	}
	for k, w := range a[i:narrow] {
		// Multiply by the box's sinh(w·u)/(w·u) = Σ w²ᵐ·u²ᵐ/(2m + 1)!.
		w2 := w * sc * w * sc
		// (The running product in a register: through d.c each step
		// waited for the last one's store.)
		if k == 0 {
			c := 1.0
			for m := 1; m <= d.m; m++ {
				c = c * w2 * sinhSeries[m]
				d.c[m] = c
			}
			continue
		}
		var t [boxSeries + 1]float64
		t[0] = 1
		c := 1.0
		for m := 1; m <= d.m; m++ {
			c = c * w2 * sinhSeries[m]
			t[m] = c
		}
		for m := d.m; m > 0; m-- {
			cm := d.c[m]
			for j := 0; j < m; j++ {
				cm += d.c[j] * t[m-j]
			}
			d.c[m] = cm
		}
	}
	if d.n == 0 && d.m > 0 {
		var e [boxSeries + 1]float64
		s2, p := 1/(d.sd*d.sd), 1.0
		for m := 1; m <= d.m; m++ {
			p *= s2
			e[m] = d.c[m] * p
		}
		d.narrowPoly(&e)
	}
}

// pairSeries fills the series of one or two narrow boxes (half-widths w,
// scaled by sc) and no wide one in closed form. In units of the normal
// part, bⱼ = aⱼ/σ, the product-to-sum identity
// sinh x·sinh y = [cosh(x + y) − cosh(x − y)]/2 (Abramowitz & Stegun
// 4.5.25, cosh(x ± y) = cosh x·cosh y ± sinh x·sinh y) gives
//
//	S(b₁u)·S(b₂u) = [cosh(Au) − cosh(Bu)]/(2b₁b₂u²),  A = b₁ + b₂, B = b₁ − b₂,
//
// whose coefficient of u²ᵐ (cosh's series, 4.5.63) is
// (A^{2m+2} − B^{2m+2})/(2b₁b₂·(2m + 2)!) = 2·Uₘ/(2m + 2)!, with
// A² − B² = 4b₁b₂ taken out of the difference of powers:
// Uₘ = Σ_{i ≤ m} A^{2i}·B^{2(m−i)} = A²·U_{m−1} + B^{2m}, U₀ = 1. Every
// term is positive, so eₘ carries the rounding of its m steps (no
// cancellation, whatever b₂/b₁), at a step per term instead of the
// product of two series; one box is b₂ = 0 (Uₘ = (m + 1)·A^{2m}, the
// coefficient A^{2m}/(2m + 1)! of S(Au)). Measured against the product
// in TestPairSeries. It fills d.q alone: with no wide box nothing reads
// d.c.
func (d *boxNormal) pairSeries(w []float64, sc float64) {
	r := sc / d.sd
	b1, b2 := w[0]*r, 0.0
	if len(w) == 2 {
		b2 = w[1] * r
	}
	var e [boxSeries + 1]float64
	d.m = pairCoeffs(b1, b2, &e)
	d.narrowPoly(&e)
}

// cramerBound[m] is 0.43·√((2m−1)!), the bound of |He_{2m−1}(z)|·φ(z)
// by Cramér's inequality (see boxNormal.set).
var cramerBound = func() (r [boxSeries + 1]float64) {
	f := 1.0 // (2m − 1)!
	for m := 1; m <= boxSeries; m++ {
		if m > 1 {
			f *= float64((2*m - 2) * (2*m - 1))
		}
		r[m] = 0.43 * math.Sqrt(f)
	}
	return r
}()

// pairCoeffs fills e with the coefficients of S(b₁u)·S(b₂u) in u²ᵐ
// (pairSeries) and returns the terms to keep beyond the first: up to the
// first whose bound 0.43·√((2m−1)!)·eₘ (Cramér's inequality, as set's
// rule) is below boxSeriesTol, at most boxSeries. The bound is taken on
// the coefficient itself rather than on set's majorant (H²/6)ᵐ/m!, which
// for two boxes of 0.3σ is 2e5 times e₁₀: the series stops two terms
// sooner, and what it leaves out is still below boxSeriesTol.
func pairCoeffs(b1, b2 float64, e *[boxSeries + 1]float64) int {
	return pairCoeffsTo(b1, b2, boxSeries, true, e)
}

// pairCoeffsTo is pairCoeffs up to m terms; without stop, exactly m.
func pairCoeffsTo(b1, b2 float64, m int, stop bool, e *[boxSeries + 1]float64) int {
	A2, B2 := (b1+b2)*(b1+b2), (b1-b2)*(b1-b2)
	e[0] = 1
	u, bp := 1.0, 1.0
	for k := 1; k <= m; k++ {
		bp *= B2
		u = A2*u + bp
		e[k] = 2 * u * invFact2[k]
		if stop && cramerBound[k]*e[k] < boxSeriesTol {
			return k - 1
		}
	}
	return m
}

// invFact2[m] is 1/(2m + 2)!.
var invFact2 = func() (r [boxSeries + 1]float64) {
	f := 2.0
	r[0] = 1 / f
	for m := 1; m <= boxSeries; m++ {
		f *= float64((2*m + 1) * (2*m + 2))
		r[m] = 1 / f
	}
	return r
}()

// narrowPoly fills d.q from the series' coefficients eₘ = cₘ/σ²ᵐ when
// every box is narrow (d.n = 0, d.m > 0). The corner sum is then the
// series alone, at one corner y = x:
//
//	F(x) = Φ(z) − φ(z)·Σₘ eₘ·He_{2m−1}(z),  eₘ = cₘ/σ²ᵐ, z = x/σ,
//
// (G_{−2m} of the notes above), and Σₘ eₘ·He_{2m−1}(z) = z·Q(z²) with
// qₖ = Σ_{m>k} eₘ·[z^{2k+1}]He_{2m−1}, the coefficients of the Hermite
// polynomials in powers of z (Abramowitz & Stegun 22.3.11; hermOdd): one
// Horner sweep of m − 1 steps in z² per CDF instead of the 2m-step
// Hermite recurrence, the conversion paid once per set for the two or
// more CDFs read from it. Rounding: the monomial terms of eₘ·He_{2m−1}
// cancel by at most the ratio of Σ|coefficients|·|z|ᵖ to |He_{2m−1}(z)|,
// and the eₘ fall as (H²/6)ᵐ/m!, so the terms that cancel much are the
// ones of size 1e-14 and below; measured against the recurrence in
// TestBoxNormalNarrowPoly.
func (d *boxNormal) narrowPoly(e *[boxSeries + 1]float64) {
	// By the term m, the m sums it adds to independent of each other (in
	// a local array: through d each step reloaded d).
	var q [boxSeries]float64
	for m := 1; m <= d.m; m++ {
		em := e[m]
		qs := q[:m]
		for k, h := range hermOdd[m][:m] {
			qs[k] += em * h
		}
	}
	d.q = q
}

// hermOdd[m][k] is the coefficient of z^{2k+1} in He_{2m−1}(z):
// (−1)ⁱ·n!/(i!·(n − 2i)!·2ⁱ), n = 2m − 1, i = m − 1 − k (Abramowitz &
// Stegun 22.3.11).
var hermOdd = func() (h [boxSeries + 1][boxSeries]float64) {
	for m := 1; m <= boxSeries; m++ {
		n := 2*m - 1
		for k := range m {
			i := m - 1 - k
			p := 2*k + 1
			c := 1.0 // n!/(i!·p!·2ⁱ), built as a product of ratios
			for j := p + 1; j <= n; j++ {
				c *= float64(j)
			}
			for j := 1; j <= i; j++ {
				c /= float64(2 * j)
			}
			if i%2 == 1 {
				c = -c
			}
			h[m][k] = c
		}
	}
	return h
}()

// seriesBound[m] is 0.43·√((2m−1)!)/(6ᵐ·m!), the bound of the series'
// term m per H²ᵐ (see boxNormal.set).
var seriesBound = func() (r [boxSeries + 1]float64) {
	b := 0.43
	for m := 1; m <= boxSeries; m++ {
		x := float64(m)
		b *= math.Sqrt(math.Max(1, (2*x-1)*(2*x-2))) / (6 * x)
		r[m] = b
	}
	return r
}()

// sinhSeries[m] is 1/((2m)·(2m + 1)), the ratio of consecutive terms
// of sinh(x)/x = Σ x²ᵐ/(2m + 1)! (Abramowitz & Stegun 4.5.62).
var sinhSeries = func() (r [boxSeries + 1]float64) {
	for m := 1; m <= boxSeries; m++ {
		r[m] = 1 / float64((2*m)*(2*m+1))
	}
	return r
}()

// far returns where the CDF rounds to 0 or 1.
func (d *boxNormal) far() float64 {
	if d == nil {
		return windowFar
	}
	return boxFar
}

// cdf returns P(X ≤ x).
func (d *boxNormal) cdf(x float64) float64 {
	switch {
	case d == nil:
		return normCDF(x)
	case x <= -boxFar:
		return 0
	case x >= boxFar:
		return 1
	case x > 0:
		p, _ := d.below(-x)
		return 1 - p
	}
	p, _ := d.below(x)
	return p
}

// below returns P(X ≤ x) and the density there by the corner sum, for
// x ≤ 0.
func (d *boxNormal) below(x float64) (p, dens float64) {
	if d.n == 0 {
		z := x / d.sd
		if d.m == 0 {
			return normCDF(z), math.Exp(-z*z/2) / (math.Sqrt(2*math.Pi) * d.sd)
		}
		return d.narrowBelow(z)
	}
	for c := range 1 << d.n {
		y, sign := x, 1.0
		for j := range d.n {
			if c>>j&1 == 1 {
				y -= d.a[j]
				sign = -sign
			} else {
				y += d.a[j]
			}
		}
		f, g := d.corner(y)
		p += sign * f
		dens += sign * g
	}
	return clampCDF(p*d.inv, dens*d.inv)
}

// clampCDF returns p within [0, 1] and dens at least 0, by comparisons:
// math.Min and math.Max are calls, for the NaN and signed zeros that do
// not arise here.
func clampCDF(p, dens float64) (float64, float64) {
	if p < 0 {
		p = 0
	} else if p > 1 {
		p = 1
	}
	if dens < 0 {
		dens = 0
	}
	return p, dens
}

// narrowBelow is below when every box is narrow (narrowPoly), at
// z = x/σ: F = Φ(z) − φ(z)·z·Q(z²) and its derivative in x,
// (φ(z)/σ)·[1 + (z² − 1)·Q(z²) − 2z²·Q′(z²)] (φ′(z) = −z·φ(z)), Q and Q′
// by one Horner sweep.
func (d *boxNormal) narrowBelow(z float64) (p, dens float64) {
	if z < -boxUnder {
		return 0, 0
	}
	P, ph := registration.NormalCDF(z), math.Exp(-z*z/2)/math.Sqrt(2*math.Pi)
	u := z * z
	var q, dq float64
	for k := d.m - 1; k >= 0; k-- {
		dq = dq*u + q
		q = q*u + d.q[k]
	}
	return clampCDF(P-ph*z*q, ph/d.sd*(1+(u-1)*q-2*u*dq))
}

// corner returns Σₘ cₘ·G_{n−2m}(y) and Σₘ cₘ·G_{n−2m−1}(y), n the wide
// boxes: G the repeated integrals of Φ(·/σ) from −∞ (see above) for
// orders ≥ 0, its derivatives below, G_{−j} = Dʲ Φ(y/σ) =
// (−1)^{j−1}·He_{j−1}(y/σ)·φ(y/σ)/σʲ (see above). The orders below 0 are
// summed as they come out of the Hermite recurrence, their common factor
// φ(y/σ) applied once: order −j belongs to f when n + j is even (m =
// (n + j)/2), to g when odd (m = (n + j − 1)/2).
func (d *boxNormal) corner(y float64) (f, g float64) {
	n, sd := d.n, d.sd
	var P, ph float64 // Φ(y/σ) and φ(y/σ)
	switch {
	case sd == 0: // no series: the orders n ≥ 1 and n − 1 only
		if y <= 0 {
			return 0, 0
		}
		P = 1
	default:
		z := y / sd
		if z < -boxUnder {
			return 0, 0
		}
		P, ph = registration.NormalCDF(z), math.Exp(-z*z/2)/math.Sqrt(2*math.Pi)
	}
	// Orders 0..n upward (the recurrence of the notes), taken by the
	// terms m with n − 2m ≥ 0 (f) and n − 2m − 1 ≥ 0 (g).
	var pos [maxBoxes + 1]float64
	pos[0] = P
	if n >= 1 {
		pos[1] = y*P + sd*ph
	}
	for k := 2; k <= n; k++ {
		pos[k] = (y*pos[k-1] + sd*sd*pos[k-2]) / float64(k)
	}
	for m := 0; m <= d.m && n-2*m >= 0; m++ {
		f += d.c[m] * pos[n-2*m]
		if n-2*m-1 >= 0 {
			g += d.c[m] * pos[n-2*m-1]
		}
	}
	// Orders below 0, as far as the series reaches (n − 2m − 1 ≥ −2m−1):
	// h_j = G_{−j}/φ(y/σ) = (−1)^{j−1}·He_{j−1}(z)/σʲ follows from the
	// Hermite recurrence as h_{j+1} = −(z/σ)·h_j − (j − 1)/σ²·h_{j−1},
	// h₁ = 1/σ; order −j goes to f or g by the parity of n + j, at the
	// term m = ⌊(n + j)/2⌋: taken in pairs, the odd j to one sum and the
	// even to the other.
	if low := 2*d.m + 1 - n; low >= 1 && sd > 0 {
		inv := 1 / sd
		zi, inv2 := y*inv*inv, inv*inv
		h0, h1 := 0.0, inv
		var odd, even float64
		for j := 1; j <= low; j += 2 {
			odd += d.c[uint(n+j)>>1] * h1
			h0, h1 = h1, -zi*h1-float64(j-1)*inv2*h0
			if j < low {
				even += d.c[uint(n+j+1)>>1] * h1
				h0, h1 = h1, -zi*h1-float64(j)*inv2*h0
			}
		}
		if n&1 == 0 { // n + j odd for odd j: g
			odd, even = even, odd
		}
		f += ph * odd
		g += ph * even
	}
	return f, g
}

// boxUnder is where φ underflows: exp(−37.5²/2) = 5e-306.
const boxUnder = 37.5

// upper returns P(X > z) and the density at z, z ≥ 0.
func (d *boxNormal) upper(z float64) (p, dens float64) {
	if z >= boxFar {
		return 0, 0
	}
	return d.below(-z)
}

// quantileSigmas returns z ≥ 0 with P(X > z) = Φ(−k): the point a normal
// deviation reaches at k standard deviations, at the same probability (a
// uniform alone reaches (2Φ(k) − 1) of its half-width, 0.9973 at k = 3).
// It lies between 0 and k·σ + Σ aⱼ, where P(X > z) ≤ P(N > k·σ); Newton's
// method from start (cornishFisher, or where a nearby offset's point
// lay), bisecting when a step leaves the bracket, until a step is below
// boxQuantileStep.
func (d *boxNormal) quantileSigmas(k, start float64) float64 {
	if d == nil {
		return k
	}
	if d.n == 0 && d.m == 0 {
		return k * d.sd
	}
	p := normTail3
	if k != 3 {
		p = normCDF(-k)
	}
	lo, hi := 0.0, k*d.sd+d.sumA
	z := math.Min(math.Max(start, lo), hi)
	for range procCrossIter {
		u, f := d.upper(z)
		if u > p {
			lo = z
		} else {
			hi = z
		}
		step := (u - p) / f
		if f > 0 && math.Abs(step) <= boxQuantileStep*(1+z) {
			return z + step
		}
		next := z + step
		if !(f > 0) || !(next > lo && next < hi) {
			next = (lo + hi) / 2
		}
		if hi-lo <= boxQuantileStep*(1+z) {
			return next
		}
		z = next
	}
	return z
}

// normTail3 is Φ(−3), the probability quantileSigmas matches for the
// worst drift's three standard deviations.
var normTail3 = normCDF(-3)

// boxQuantileStep is the Newton step, relative to the point, after which
// quantileSigmas stops. Newton's error after a step e is about
// |F″/(2F′)|·e² (F the CDF: the density's logarithmic derivative over
// two, z/2 for a normal X), so a last step of 1e-7 leaves about 2e-14
// of z at k = 3 — the probability Φ(−3) matched to 1e-16, and far below
// the curve's own errors and the digits the worst drift is written
// with. (At 1e-10 the loop took one evaluation of the CDF more.)
const boxQuantileStep = 1e-7

// cornishFisher returns the start of quantileSigmas: the Cornish–Fisher
// expansion of the point to the fourth cumulant (Abramowitz & Stegun
// 26.2.49), z ≈ k + κ₄·(k³ − 3k)/24, κ₄ = −(2/15)·Σ aⱼ⁴ the uniform parts'
// fourth cumulants (the fourth cumulant of a uniform on [−a, a] is
// −2a⁴/15; X has variance 1, and the normal part none). Near normal
// (narrow boxes) it errs by the order of κ₄², so that one Newton step
// settles the point.
func (d *boxNormal) cornishFisher(k float64) float64 {
	if d == nil {
		return k
	}
	return k - 2*d.sumA4/15*(k*k*k-3*k)/24
}

// reach returns how far the deviation reaches: k standard deviations of
// the normal part and the box edge of every uniform part (the whole
// half-width: a uniform never passes it, and its k·σ = k·a/√3 would).
func (d *boxNormal) reach(k float64) float64 {
	if d == nil {
		return k
	}
	return k*d.sd0 + d.sumA
}

// tabulateWide fills pr.wideCum. The split of the uniform parts into
// narrow and wide ones (boxNormal.set) depends on the offset alone, not
// on the site: the sensitivities sᵢ(δ), the terms' variances σᵢ² and
// half-widths wᵢ are the same at every site of the section, only the
// means differ. Every box is narrow where the boxes' Σ aⱼ² ≤ boxNarrow·vₙ
// (aⱼ = |sⱼ|·wⱼ, vₙ the normal part's variance; all prefixes of set's
// sorted sum then pass too), that is where
//
//	g(δ) = Σᵢ sᵢ(δ)²·kᵢ ≤ 0,  kᵢ = wᵢ² − boxNarrow·(σᵢ² − wᵢ²/3) for a
//	uniform part, −boxNarrow·σᵢ² otherwise;
//
// between two table rows sᵢ is linear in the weight f (Proc.rows), so g
// is a quadratic in f whose largest value over [0, 1] is exact. An
// interval counts as wide unless that value is below zero by a margin of
// 1e-9 of its terms' size, far beyond the rounding by which set's own
// sums could differ. boxCuts reads it to skip its scan where no box can
// be wide (it would find none).
func (pr *Proc) tabulateWide() {
	var row procRow
	pr.row(&row, panel.Vec{}) // the variances and half-widths: the same at every site
	if row.boxes == 0 {
		pr.wideCum = nil
		return
	}
	va, ws := row.vars(), row.halfWidths()
	k := make([]float64, len(va))
	for b := range k {
		k[b] = -boxNarrow * va[b]
		if w := ws[b]; w > 0 {
			k[b] = w*w - boxNarrow*(va[b]-w*w/3)
		}
	}
	nb := len(pr.Bind)
	n := max(1, pr.tabRows-1)
	pr.wideCum = make([]int32, n+1)
	for i := range n {
		r0 := pr.tab[i*nb : i*nb+nb]
		r1 := r0
		if i+1 < pr.tabRows {
			r1 = pr.tab[(i+1)*nb : (i+1)*nb+nb]
		}
		var g0, g1, g2, size float64 // g(f) = g0 + 2·g1·f + g2·f²
		for b, kb := range k {
			s0, ds := r0[b], r1[b]-r0[b]
			g0 += kb * s0 * s0
			g1 += kb * s0 * ds
			g2 += kb * ds * ds
			size += math.Abs(kb) * (math.Abs(s0) + math.Abs(ds)) * (math.Abs(s0) + math.Abs(ds))
		}
		top := math.Max(g0, g0+2*g1+g2)
		if f := -g1 / g2; g2 < 0 && f > 0 && f < 1 {
			top = math.Max(top, g0+g1*f)
		}
		wide := int32(0)
		if !(top < -1e-9*size) {
			wide = 1
		}
		pr.wideCum[i+1] = pr.wideCum[i] + wide
	}
}

// mayBeWide reports whether a uniform part may be wide at some offset in
// [a, b] (tabulateWide).
func (pr *Proc) mayBeWide(a, b float64) bool {
	if pr.wideCum == nil {
		return false
	}
	i0, _ := pr.rowAt(a)
	i1, _ := pr.rowAt(b)
	i1 = min(i1+1, len(pr.wideCum)-1)
	return pr.wideCum[i1] > pr.wideCum[i0]
}

// Sharing set between the sites of a section.
//
// X's distribution depends on the offset alone (tabulateWide): between
// two table rows on the row weight f ∈ [0, 1], through the sensitivities
// sᵢ(f), linear in f. Where the uniform parts are one or two, narrow, and
// of one sign of sᵢ over the interval, everything set returns there (the
// normal part σ, the reach Σ aⱼ, Σ aⱼ⁴ and the series in powers of z,
// qₖ) is an analytic function of f, and boxTab holds each as the
// polynomial of degree boxTabDeg through its values at the Chebyshev
// points of [0, 1] (built when the section's sites are many enough to
// pay for it, boxTabPays): a site then reads its distribution at a node by a
// few Horner sweeps in f instead of set. The series is kept to one term
// more than set takes at any of the points (its smooth part: a term that
// set would leave out, below boxSeriesTol, is kept). Interpolation at
// Chebyshev points errs by at most max|g⁽ⁿ⁾|/(2^{2n−1}·n!) over [0, 1],
// n = boxTabDeg + 1 (R. L. Burden, J. D. Faires, Numerical Analysis,
// the interpolation error theorem, with the Chebyshev points' bound on
// Π(f − fⱼ)); over one table interval the sensitivities move by a
// percent or less, so at degree 3 the error is at rounding (degree 1
// errs by 5e-10 in the reach, degree 2 by 1.6e-14), and what differs
// from set is the terms below boxSeriesTol that set leaves out: 4.9e-15
// in the CDF, measured in TestBoxTab.

// boxTabPays reports whether the table pays for the sites: it costs
// two sets per point and interval, a site some 80 (60 windows of
// P(in spec), 17 offsets of the worst drift).
func boxTabPays(sites, rows int) bool {
	return 80*sites > 2*(boxTabDeg+1)*max(1, rows-1)
}

// boxTabDeg is the degree of boxTab's polynomials in f (boxTab.fill's
// Horner sweep is written out for it).
const boxTabDeg = 3

// boxTabFields is the number of fields before the series: σ, Σ aⱼ, Σ aⱼ⁴.
const boxTabFields = 3

// boxTab is set's result tabulated per table interval (see above).
type boxTab struct {
	m      []int8 // per interval: the series' terms, −1 where not tabulated
	stride int    // floats per interval
	coef   []float64
}

// boxTabPoints are the Chebyshev points of [−1, 1] (t = 2f − 1), and
// boxTabInv the inverse of their Vandermonde matrix: the coefficients of
// the interpolating polynomial in powers of t are boxTabInv times the
// values.
var boxTabPoints, boxTabInv = func() (p [boxTabDeg + 1]float64, inv [boxTabDeg + 1][boxTabDeg + 1]float64) {
	const n = boxTabDeg + 1
	for j := range n {
		p[j] = -math.Cos(math.Pi * (float64(j) + 0.5) / n)
	}
	// Gauss–Jordan on [V | I], V[j][k] = p[j]ᵏ, with partial pivoting
	// (in t = 2f − 1 ∈ [−1, 1], where the powers are well conditioned).
	var a [n][2 * n]float64
	for j := range n {
		x := 1.0
		for k := range n {
			a[j][k] = x
			x *= p[j]
		}
		a[j][n+j] = 1
	}
	for c := range n {
		piv := c
		for r := c + 1; r < n; r++ {
			if math.Abs(a[r][c]) > math.Abs(a[piv][c]) {
				piv = r
			}
		}
		a[c], a[piv] = a[piv], a[c]
		for k := range 2 * n {
			if k != c {
				a[c][k] /= a[c][c]
			}
		}
		a[c][c] = 1
		for r := range n {
			if r != c && a[r][c] != 0 {
				f := a[r][c]
				for k := range 2 * n {
					a[r][k] -= f * a[c][k]
				}
			}
		}
	}
	for j := range n {
		for k := range n {
			inv[j][k] = a[j][n+k]
		}
	}
	return p, inv
}()

// tabulateBoxes fills pr.boxTab when the section has one or two
// uniform parts; nil otherwise, or where no interval qualifies.
func (pr *Proc) tabulateBoxes() {
	pr.boxTab = nil
	var row procRow
	pr.row(&row, panel.Vec{})
	if row.boxes == 0 || row.boxes > 2 {
		return
	}
	va, ws := row.vars(), row.halfWidths()
	nb := len(pr.Bind)
	n := max(1, pr.tabRows-1)
	const np = boxTabDeg + 1
	type node struct {
		d  boxNormal
		b  [2]float64
		nb int
	}
	var nodes [np]node
	// First pass: the intervals that qualify and the most terms.
	ms := make([]int8, n)
	most := 0
	at := func(i int, f float64, nd *node) bool {
		r0 := pr.tab[i*nb : i*nb+nb]
		r1 := r0
		if i+1 < pr.tabRows {
			r1 = pr.tab[(i+1)*nb : (i+1)*nb+nb]
		}
		var a [2]float64
		var v, vn float64
		k := 0
		for b := range nb {
			s := r0[b] + f*(r1[b]-r0[b])
			v += s * s * va[b]
			if w := ws[b]; w > 0 {
				if r0[b]*r1[b] <= 0 { // a sign change, or a box that vanishes
					return false
				}
				vn += s * s * (va[b] - w*w/3)
				a[k] = math.Abs(s) * w
				k++
			} else {
				vn += s * s * va[b]
			}
		}
		if !(v > 0) {
			return false
		}
		aa := a
		nd.d.set(vn, aa[:k], v)
		if nd.d.n != 0 || nd.d.m == 0 {
			return false
		}
		sc := 1 / math.Sqrt(v)
		r := sc / nd.d.sd
		nd.nb = k
		nd.b = [2]float64{}
		for j := range k {
			nd.b[j] = aa[j] * r
		}
		return true
	}
	for i := range n {
		ms[i] = -1
		ok := true
		m := 0
		for j := range np {
			if !at(i, (1+boxTabPoints[j])/2, &nodes[j]) {
				ok = false
				break
			}
			m = max(m, nodes[j].d.m)
		}
		if ok {
			// One term more than set takes at any point: between the
			// points set may keep one more.
			m = min(m+1, boxSeries)
			ms[i] = int8(m)
			most = max(most, m)
		}
	}
	if most == 0 {
		return
	}
	t := &boxTab{m: ms, stride: (boxTabFields + most) * np}
	t.coef = make([]float64, n*t.stride)
	for i := range n {
		m := int(ms[i])
		if m < 0 {
			continue
		}
		var vals [boxTabFields + boxSeries][np]float64
		for j := range np {
			nd := &nodes[j]
			at(i, (1+boxTabPoints[j])/2, nd)
			var e [boxSeries + 1]float64
			pairCoeffsTo(nd.b[0], nd.b[1], m, false, &e)
			nd.d.m = m
			nd.d.narrowPoly(&e)
			vals[0][j], vals[1][j], vals[2][j] = nd.d.sd, nd.d.sumA, nd.d.sumA4
			for k := range m {
				vals[boxTabFields+k][j] = nd.d.q[k]
			}
		}
		c := t.coef[i*t.stride : (i+1)*t.stride]
		for fld := range boxTabFields + m {
			for p := range np {
				var s float64
				for j := range np {
					s += boxTabInv[p][j] * vals[fld][j]
				}
				c[fld*np+p] = s
			}
		}
	}
	pr.boxTab = t
}

// has reports whether interval i is tabulated.
func (t *boxTab) has(i int) bool { return t != nil && t.m[i] >= 0 }

// fill sets d to X's distribution at weight f of interval i (has(i)).
func (t *boxTab) fill(i int, f float64, d *boxNormal) {
	const np = boxTabDeg + 1
	m := int(t.m[i])
	c := t.coef[i*t.stride : i*t.stride+(boxTabFields+m)*np]
	x := 2*f - 1
	var y [boxTabFields + boxSeries]float64
	for k := range boxTabFields + m {
		p := c[k*np : k*np+np]
		y[k] = ((p[3]*x+p[2])*x+p[1])*x + p[0] // boxTabDeg = 3
	}
	d.n, d.inv, d.m, d.c[0] = 0, 1, m, 1
	d.sd, d.sd0, d.sumA, d.sumA4 = y[0], y[0], y[1], y[2]
	copy(d.q[:m], y[boxTabFields:])
}
