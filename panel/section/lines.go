package section

import (
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/mat"
)

// Lines are the per-unit-length parameters of the coupled pair and its modes.
type Lines struct {
	C, C0, L [2][2]float64 // F/m, F/m (vacuum), H/m
	KC, KL   float64       // kC = −C12/√(C11·C22), kL = L12/√(L11·L22)
	EpsEff   [2]float64    // effective permittivity of the two modes, ascending
	ZMode    [2]float64    // mode impedance Σ V_i² / Σ V_i·I_i of each mode, ohm
	ZLine    [2]float64    // each line's own impedance √(L_ii/C_ii), ohm
	// Symmetric reports whether C11 = C22 and C0_11 = C0_22 within symTol; then
	// the modes are the even and odd modes and ZEven, ZOdd are set.
	Symmetric   bool
	ZEven, ZOdd float64 // √((L11 ± L12)/(C11 ± C12)), ohm

	// Modal decomposition for SParams (Paul, Analysis of Multiconductor
	// Transmission Lines, 2nd ed., Wiley 2008, §7.2): V = T·Vm, I = M·Im with
	// M = L⁻¹·T·diag(√λ); λ_k = εeff_k/c².
	T, M  [2][2]float64
	SqrtL [2]float64 // √λ_k, s/m
}

// symTol is the relative tolerance for calling a pair symmetric: well above
// the rounding of a mirror-symmetric mesh (1e−12), well below any physical
// asymmetry worth reporting.
const symTol = 1e-9

// NewLines derives the line parameters from the Maxwell capacitance matrices
// with (C) and without (C0) the dielectrics: L = μ0·ε0·C0⁻¹ (Paul 2008, §3.2.4:
// the inductance of a lossless line does not depend on the dielectric).
func NewLines(C, C0 [2][2]float64) Lines {
	l := Lines{C: C, C0: C0}
	det0 := C0[0][0]*C0[1][1] - C0[0][1]*C0[1][0]
	k := Mu0 * Eps0 / det0
	l.L = [2][2]float64{{k * C0[1][1], -k * C0[0][1]}, {-k * C0[1][0], k * C0[0][0]}}
	l.KC = -C[0][1] / math.Sqrt(C[0][0]*C[1][1])
	l.KL = l.L[0][1] / math.Sqrt(l.L[0][0]*l.L[1][1])
	for i := range 2 {
		l.ZLine[i] = math.Sqrt(l.L[i][i] / C[i][i])
	}

	// Modes: eigenvectors of L·C. With L = Rᵀ·R (Cholesky), L·C·v = λ·v becomes
	// the symmetric problem (R·C·Rᵀ)·w = λ·w with v = Rᵀ·w, which stays
	// well conditioned when the two modes are nearly degenerate (homogeneous
	// dielectric).
	var ch mat.Cholesky
	Lm := mat.NewSymDense(2, []float64{l.L[0][0], l.L[0][1], l.L[0][1], l.L[1][1]})
	if !ch.Factorize(Lm) {
		panic("section: inductance matrix is not positive definite")
	}
	var R mat.TriDense
	ch.UTo(&R)
	Cm := mat.NewDense(2, 2, []float64{C[0][0], C[0][1], C[1][0], C[1][1]})
	var A mat.Dense
	A.Product(&R, Cm, R.T())
	As := mat.NewSymDense(2, []float64{A.At(0, 0), (A.At(0, 1) + A.At(1, 0)) / 2, (A.At(0, 1) + A.At(1, 0)) / 2, A.At(1, 1)})
	var es mat.EigenSym
	if !es.Factorize(As, true) {
		panic("section: eigen-decomposition of L·C failed")
	}
	vals := es.Values(nil) // ascending
	var W, V mat.Dense
	es.VectorsTo(&W)
	V.Mul(R.T(), &W)
	var Linv mat.Dense
	if err := Linv.Inverse(mat.NewDense(2, 2, []float64{l.L[0][0], l.L[0][1], l.L[1][0], l.L[1][1]})); err != nil {
		panic("section: singular inductance matrix")
	}
	for m := range 2 {
		lam := vals[m]
		l.EpsEff[m] = lam * SpeedOfLight * SpeedOfLight
		l.SqrtL[m] = math.Sqrt(lam)
		// Fix the sign: the larger component positive.
		t0, t1 := V.At(0, m), V.At(1, m)
		if math.Abs(t1) > math.Abs(t0) && t1 < 0 || math.Abs(t0) >= math.Abs(t1) && t0 < 0 {
			t0, t1 = -t0, -t1
		}
		l.T[0][m], l.T[1][m] = t0, t1
		i0 := (Linv.At(0, 0)*t0 + Linv.At(0, 1)*t1) * l.SqrtL[m]
		i1 := (Linv.At(1, 0)*t0 + Linv.At(1, 1)*t1) * l.SqrtL[m]
		l.M[0][m], l.M[1][m] = i0, i1
		l.ZMode[m] = (t0*t0 + t1*t1) / (t0*i0 + t1*i1)
	}
	l.Symmetric = math.Abs(C[0][0]-C[1][1]) <= symTol*C[0][0] && math.Abs(C0[0][0]-C0[1][1]) <= symTol*C0[0][0]
	if l.Symmetric {
		l.ZEven = math.Sqrt((l.L[0][0] + l.L[0][1]) / (C[0][0] + C[0][1]))
		l.ZOdd = math.Sqrt((l.L[0][0] - l.L[0][1]) / (C[0][0] - C[0][1]))
	}
	return l
}

// SParams are the scattering parameters of the coupled section with port 1
// the input (line 1 at z = 0), port 2 the through port (line 1 at z = ℓ),
// port 3 the coupled port (line 2 at z = 0, same side as port 1) and port 4
// the isolated port (line 2 at z = ℓ).
type SParams struct{ S11, S21, S31, S41 complex128 }

// SParams returns the scattering parameters at frequency freq (Hz) of a
// section of length length (m) with every port terminated in zref (ohm), by
// lossless multiconductor transmission-line theory, valid for an
// inhomogeneous, asymmetric pair (Paul 2008, §7.2; Pozar, Microwave
// Engineering, 4th ed., Wiley 2012, §4.3 for the S–Y relation).
//
// Each mode k is a scalar line of electrical length θ_k = ω·√λ_k·ℓ with unit
// modal admittance, whose admittance matrix is [[−j·cot θ, j·csc θ],
// [j·csc θ, −j·cot θ]] (Pozar 2012, table 4.2). With V = T·Vm and I = M·Im the
// 4-port admittance matrix on (line 1 @0, line 2 @0, line 1 @ℓ, line 2 @ℓ) is
// [[M·Y11·T⁻¹, M·Y12·T⁻¹], [M·Y12·T⁻¹, M·Y11·T⁻¹]], and
// S = (I − zref·Y)(I + zref·Y)⁻¹.
func (l Lines) SParams(freq, length, zref float64) SParams {
	w := 2 * math.Pi * freq
	det := l.T[0][0]*l.T[1][1] - l.T[0][1]*l.T[1][0]
	ti := [2][2]float64{{l.T[1][1] / det, -l.T[0][1] / det}, {-l.T[1][0] / det, l.T[0][0] / det}}
	var y11, y12 [2]complex128
	for k := range 2 {
		th := w * l.SqrtL[k] * length
		y11[k] = complex(0, -math.Cos(th)/math.Sin(th))
		y12[k] = complex(0, 1/math.Sin(th))
	}
	blk := func(y [2]complex128) (b [2][2]complex128) {
		for i := range 2 {
			for j := range 2 {
				var s complex128
				for k := range 2 {
					s += complex(l.M[i][k], 0) * y[k] * complex(ti[k][j], 0)
				}
				b[i][j] = s
			}
		}
		return b
	}
	a, b := blk(y11), blk(y12)
	var Y [4][4]complex128
	for i := range 2 {
		for j := range 2 {
			Y[i][j], Y[i][j+2] = a[i][j], b[i][j]
			Y[i+2][j], Y[i+2][j+2] = b[i][j], a[i][j]
		}
	}
	// S = (I + zY)⁻¹(I − zY) (the two factors commute). Solve (I + zY)·X = (I − zY)
	// for column 0 only: X = S[:,0].
	var P [4][5]complex128
	z := complex(zref, 0)
	for i := range 4 {
		for j := range 4 {
			P[i][j] = z * Y[i][j]
			if i == j {
				P[i][j] += 1
			}
		}
		P[i][4] = -z * Y[i][0]
		if i == 0 {
			P[i][4] += 1
		}
	}
	x := solve4(&P)
	// Node order: 0 = port 1, 1 = port 3, 2 = port 2, 3 = port 4.
	return SParams{S11: x[0], S31: x[1], S21: x[2], S41: x[3]}
}

// solve4 solves the 4×4 complex system in the augmented matrix p by Gaussian
// elimination with partial pivoting.
func solve4(p *[4][5]complex128) (x [4]complex128) {
	for c := range 4 {
		piv := c
		for r := c + 1; r < 4; r++ {
			if cmplx.Abs(p[r][c]) > cmplx.Abs(p[piv][c]) {
				piv = r
			}
		}
		p[c], p[piv] = p[piv], p[c]
		for r := c + 1; r < 4; r++ {
			f := p[r][c] / p[c][c]
			for k := c; k < 5; k++ {
				p[r][k] -= f * p[c][k]
			}
		}
	}
	for r := 3; r >= 0; r-- {
		s := p[r][4]
		for k := r + 1; k < 4; k++ {
			s -= p[r][k] * x[k]
		}
		x[r] = s / p[r][r]
	}
	return x
}

// QuarterWave returns the length that is a quarter wavelength at freq for the
// mean effective permittivity of the two modes.
func (l Lines) QuarterWave(freq float64) float64 {
	e := (l.EpsEff[0] + l.EpsEff[1]) / 2
	return SpeedOfLight / (4 * freq * math.Sqrt(e))
}

// maxDirectivityDB caps the directivity of an ideal (homogeneous) section,
// where |S41| is rounding noise.
const maxDirectivityDB = 200

// couplingAt returns coupling and directivity in dB at freq.
func (l Lines) couplingAt(freq, length, zref float64) (c, d float64) {
	s := l.SParams(freq, length, zref)
	a31, a41 := cmplx.Abs(s.S31), cmplx.Abs(s.S41)
	c = 20 * math.Log10(a31)
	d = maxDirectivityDB
	if a41 > 0 {
		d = math.Min(d, 20*math.Log10(a31/a41))
	}
	return c, d
}

// peakFrequency returns the frequency of largest |S31| near f0 by a coarse
// scan over [f0/3, 5·f0/3] then golden-section refinement (Press et al.,
// Numerical Recipes, 3rd ed., §10.2).
func (l Lines) peakFrequency(f0, length, zref float64) float64 {
	g := func(f float64) float64 { c, _ := l.couplingAt(f, length, zref); return c }
	const n = 40
	lo, hi := f0/3, 5*f0/3
	best, bf := math.Inf(-1), f0
	step := (hi - lo) / n
	for i := 0; i <= n; i++ {
		f := lo + float64(i)*step
		if v := g(f); v > best {
			best, bf = v, f
		}
	}
	a, b := bf-step, bf+step
	const r = 0.6180339887498949 // (√5 − 1)/2
	x1, x2 := b-r*(b-a), a+r*(b-a)
	f1, f2 := g(x1), g(x2)
	for range 60 {
		if f1 > f2 {
			b, x2, f2 = x2, x1, f1
			x1 = b - r*(b-a)
			f1 = g(x1)
		} else {
			a, x1, f1 = x1, x2, f2
			x2 = a + r*(b-a)
			f2 = g(x2)
		}
		if b-a < 1e-9*f0 {
			break
		}
	}
	return (a + b) / 2
}
