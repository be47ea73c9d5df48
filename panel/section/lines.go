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
	// Degenerate reports whether the two modes have one εeff (within
	// degenerateTol: one εr everywhere). Then any pair of vectors is a mode
	// basis, and the modes reported are C's eigenvectors, the larger
	// eigenvalue first: for a symmetric pair the odd mode, then the even one,
	// so ZMode = (ZOdd, ZEven).
	Degenerate bool
	ZLine      [2]float64 // each line's own impedance √(L_ii/C_ii), ohm
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

// degenerateTol is the relative split of the modes' εeff below which they are
// taken as one: a homogeneous stack splits them by rounding, 1e−14 to 5e−14
// (measured on a broadside pair in εr 3 at four offsets), while the demo
// stack (εr 3.00 between the traces, 3.55 outside) splits them by 11 %.
const degenerateTol = 1e-9

// NewLines derives the line parameters from the Maxwell capacitance matrices
// with (C) and without (C0) the dielectrics: L = μ0·ε0·C0⁻¹ (Paul 2008, §3.2.4:
// the inductance of a lossless line does not depend on the dielectric).
// C and C0 must be Maxwell capacitance matrices, symmetric and positive
// definite, as Solve returns them; NewLines panics on others (a caller's
// mistake, like a shape mismatch in gonum, not a property of the data).
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
	l.Degenerate = vals[1]-vals[0] <= degenerateTol*(vals[0]+vals[1])/2
	if l.Degenerate {
		// One εr everywhere: L·C = λ·I, every vector is a mode and the
		// eigenvectors above are rounding noise. The stable basis is that of
		// C's eigenvectors (L = λ·C⁻¹ shares them; for a symmetric pair they
		// are the odd and even modes), the larger eigenvalue of C first (the
		// odd mode of a symmetric pair, which is mode 0 of the common
		// inhomogeneous stacks, where the odd mode sees less dielectric).
		var ec mat.EigenSym
		if !ec.Factorize(mat.NewSymDense(2, []float64{C[0][0], (C[0][1] + C[1][0]) / 2, (C[0][1] + C[1][0]) / 2, C[1][1]}), true) {
			panic("section: eigen-decomposition of C failed")
		}
		ec.VectorsTo(&V)
		V.Copy(mat.NewDense(2, 2, []float64{V.At(0, 1), V.At(0, 0), V.At(1, 1), V.At(1, 0)}))
		lam := (vals[0] + vals[1]) / 2
		vals[0], vals[1] = lam, lam
	}
	var Linv mat.Dense
	if err := Linv.Inverse(mat.NewDense(2, 2, []float64{l.L[0][0], l.L[0][1], l.L[1][0], l.L[1][1]})); err != nil {
		panic("section: singular inductance matrix")
	}
	for m := range 2 {
		lam := vals[m]
		l.EpsEff[m] = lam * SpeedOfLight * SpeedOfLight
		l.SqrtL[m] = math.Sqrt(lam)
		// Fix the sign: the first component positive, unless it is negligible
		// (a mode on line 2 alone), then the second. The larger-component rule
		// flips the odd mode of a symmetric pair with rounding.
		t0, t1 := V.At(0, m), V.At(1, m)
		if math.Abs(t0) > 1e-6*math.Abs(t1) && t0 < 0 || math.Abs(t0) <= 1e-6*math.Abs(t1) && t1 < 0 {
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

// c2 is a 2 × 2 complex matrix.
type c2 [2][2]complex128

func (a c2) mul(b c2) (p c2) {
	for i := range 2 {
		for j := range 2 {
			p[i][j] = a[i][0]*b[0][j] + a[i][1]*b[1][j]
		}
	}
	return p
}

func (a c2) vec(v [2]complex128) [2]complex128 {
	return [2]complex128{a[0][0]*v[0] + a[0][1]*v[1], a[1][0]*v[0] + a[1][1]*v[1]}
}

func real2(a [2][2]float64) (c c2) {
	for i := range 2 {
		for j := range 2 {
			c[i][j] = complex(a[i][j], 0)
		}
	}
	return c
}

func inv2(a [2][2]float64) [2][2]float64 {
	d := a[0][0]*a[1][1] - a[0][1]*a[1][0]
	return [2][2]float64{{a[1][1] / d, -a[0][1] / d}, {-a[1][0] / d, a[0][0] / d}}
}

// SParams returns the scattering parameters at frequency freq (Hz) of a
// section of length length (m) with every port terminated in zref > 0 (ohm), by
// lossless multiconductor transmission-line theory, valid for an
// inhomogeneous, asymmetric pair and exact at every length.
//
// The chain-parameter matrix relates the line voltages and currents at the
// two ends, [V(ℓ); I(ℓ)] = Φ·[V(0); I(0)] (Paul, Analysis of Multiconductor
// Transmission Lines, 2nd ed., Wiley 2008, §6.2 and §7.2). With V = T·Vm and
// I = M·Im each mode is a scalar line of unit modal impedance and electrical
// length θ_k = ω·√λ_k·ℓ, so
//
//	Φ11 = T·cos θ·T⁻¹        Φ12 = −j·T·sin θ·M⁻¹
//	Φ21 = −j·M·sin θ·T⁻¹     Φ22 = M·cos θ·M⁻¹
//
// and the four ports' terminal conditions (Paul 2008, §6.3: generalised
// Thévenin equivalents) are V(0) = Vs − zref·I(0) with Vs = (1, 0) at the
// near end and V(ℓ) = zref·I(ℓ) at the far end, which give one 2 × 2 system
// for I(0):
//
//	(Φ12 − zref·(Φ11 + Φ22) + zref²·Φ21)·I(0) = (zref·Φ21 − Φ11)·Vs.
//
// Unlike the admittance (or impedance) matrix, whose entries have poles where
// either mode's electrical length is a multiple of π (or an odd multiple of
// π/2), this system stays regular at every length: a lossless network
// between resistive terminations has a unique solution. The waves follow
// from the port voltages with equal real references (Pozar, Microwave
// Engineering, 4th ed., Wiley 2012, §4.3): S11 = 1 − 2·zref·I1(0),
// S31 = 2·V2(0), S21 = 2·V1(ℓ), S41 = 2·V2(ℓ).
func (l Lines) SParams(freq, length, zref float64) SParams {
	w := 2 * math.Pi * freq
	t, m := real2(l.T), real2(l.M)
	ti := real2(inv2(l.T))
	mi := real2(inv2(l.M))
	var cs, sn c2
	for k := range 2 {
		s, c := math.Sincos(w * l.SqrtL[k] * length)
		cs[k][k] = complex(c, 0)
		sn[k][k] = complex(0, -s) // −j·sin θ
	}
	p11 := t.mul(cs).mul(ti)
	p12 := t.mul(sn).mul(mi)
	p21 := m.mul(sn).mul(ti)
	p22 := m.mul(cs).mul(mi)
	z := complex(zref, 0)
	var a c2
	var b [2]complex128
	for i := range 2 {
		for j := range 2 {
			a[i][j] = p12[i][j] - z*(p11[i][j]+p22[i][j]) + z*z*p21[i][j]
		}
		b[i] = z*p21[i][0] - p11[i][0]
	}
	// Cramer's rule: a is regular (see above) and 2 × 2.
	det := a[0][0]*a[1][1] - a[0][1]*a[1][0]
	i0 := [2]complex128{(b[0]*a[1][1] - a[0][1]*b[1]) / det, (a[0][0]*b[1] - b[0]*a[1][0]) / det}
	v0 := [2]complex128{1 - z*i0[0], -z * i0[1]}
	vl := p11.vec(v0)
	vl2 := p12.vec(i0)
	vl[0] += vl2[0]
	vl[1] += vl2[1]
	return SParams{S11: 1 - 2*z*i0[0], S31: 2 * v0[1], S21: 2 * vl[0], S41: 2 * vl[1]}
}

// QuarterWave returns the length that is a quarter wavelength at freq for the
// mean effective permittivity of the two modes.
func (l Lines) QuarterWave(freq float64) float64 {
	e := (l.EpsEff[0] + l.EpsEff[1]) / 2
	return SpeedOfLight / (4 * freq * math.Sqrt(e))
}

// maxDirectivityDB caps the directivity of an ideal (homogeneous) section,
// where |S41| is rounding noise, both ways: ±200 dB.
const maxDirectivityDB = 200

// minCouplingDB floors the coupling: below −400 dB (|S31| = 1e−20, against
// the 1e−16 rounding of |S| entries of order 1) the figure is rounding noise,
// and an exact zero (a homogeneous pair at a half wave, or no coupling at
// all) would otherwise be −Inf, which no JSON can carry.
const minCouplingDB = -400

// couplingAt returns coupling and directivity in dB at freq.
func (l Lines) couplingAt(freq, length, zref float64) (c, d float64) {
	s := l.SParams(freq, length, zref)
	a31, a41 := cmplx.Abs(s.S31), cmplx.Abs(s.S41)
	c = math.Max(minCouplingDB, 20*math.Log10(a31))
	d = maxDirectivityDB
	if a41 > 0 {
		d = math.Max(-maxDirectivityDB, math.Min(d, 20*math.Log10(a31/a41)))
	}
	return c, d
}

// peakLimit bounds the search for the first maximum of the coupling: up to
// this multiple of the higher of the two modes' quarter-wave frequencies.
// For a homogeneous pair the first maximum is at the quarter wave itself
// (Pozar, Microwave Engineering, 4th ed., 2012, §7.6, eq. 7.35: |S31| is
// largest where θ = π/2); the modes' electrical lengths are both past π/2
// at the higher quarter-wave frequency and past π at twice it.
const peakLimit = 2.0

// peakSteps is the number of scan steps per lower quarter-wave frequency:
// |S31| changes on the scale of the quarter-wave frequency, so a step of a
// sixty-fourth of it cannot step over a maximum.
const peakSteps = 64

// quarterWaveFreqs returns the frequencies at which each mode's electrical
// length over length is π/2, ascending.
func (l Lines) quarterWaveFreqs(length float64) (lo, hi float64) {
	f := [2]float64{1 / (4 * length * l.SqrtL[0]), 1 / (4 * length * l.SqrtL[1])}
	return min(f[0], f[1]), max(f[0], f[1])
}

// peakFrequency returns the frequency of the first maximum of |S31| above
// zero frequency, or 0 if |S31| has no maximum below peakLimit times the
// higher of the modes' quarter-wave frequencies (no coupling at all). The
// scan steps from zero in steps of the lower quarter-wave frequency over
// peakSteps; the first step at which |S31| stops rising brackets the maximum,
// which golden-section search refines (Press et al., Numerical Recipes, 3rd
// ed., §10.2). The result does not depend on f0 (the argument only scales
// the stopping tolerance).
func (l Lines) peakFrequency(f0, length, zref float64) float64 {
	g := func(f float64) float64 { return cmplx.Abs(l.SParams(f, length, zref).S31) }
	flo, fhi := l.quarterWaveFreqs(length)
	step := flo / peakSteps
	n := int(math.Ceil(peakLimit * fhi / step))
	prev, cur := 0.0, g(step)
	a, b := 0.0, 0.0
	for i := 2; i <= n; i++ {
		next := g(float64(i) * step)
		if cur > prev && cur >= next {
			a, b = float64(i-2)*step, float64(i)*step
			break
		}
		prev, cur = cur, next
	}
	if b == 0 {
		return 0
	}
	const r = 0.6180339887498949 // (√5 − 1)/2
	x1, x2 := b-r*(b-a), a+r*(b-a)
	f1, f2 := g(x1), g(x2)
	for range 100 {
		if f1 > f2 {
			b, x2, f2 = x2, x1, f1
			x1 = b - r*(b-a)
			f1 = g(x1)
		} else {
			a, x1, f1 = x1, x2, f2
			x2 = a + r*(b-a)
			f2 = g(x2)
		}
		if b-a < 1e-9*math.Min(f0, flo) {
			break
		}
	}
	return (a + b) / 2
}
