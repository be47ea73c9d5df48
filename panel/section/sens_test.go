package section

import (
	"context"
	"fmt"
	"math"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mathext"
)

// Tolerances of the published derivative checks. Cohn's thin-strip
// formulas are exact: ten times the largest error measured (9.9e−5). Against
// Hammerstad & Jensen the 1 % (their εeff fit is quoted to 0.2 %;
// measured 2.0e−3).
const (
	tolSensCohn = 1e-3
	tolSensHJ   = 1e-2
)

// solveSens solves s at offset off with the derivatives with respect to
// params (Section.Params when nil).
func solveSens(t *testing.T, s *Section, off float64, acc float64, params []Param) *Solution {
	t.Helper()
	set := &Settings{Accuracy: acc, Sensitivities: true}
	if err := s.Validate(); err != nil {
		t.Fatal(err)
	}
	sv, err := newSolver(s, set, off, off)
	if err != nil {
		t.Fatal(err)
	}
	if params != nil {
		sv.sens = params
	}
	sol, err := sv.solve(context.Background(), off, &femWork{})
	if err != nil {
		t.Fatal(err)
	}
	return sol
}

// sensOf returns the derivatives of a point of s at offset off (coupled
// length: a quarter wave at f0 for that point's mean εeff).
func sensOf(t *testing.T, s *Section, off, acc float64, params []Param) (Point, float64) {
	t.Helper()
	sol := solveSens(t, s, off, acc, params)
	length := NewLines(sol.C, sol.C0).QuarterWave(s.Frequency)
	return newPoint(off, sol, s.Frequency, length, s.ZRef), length
}

// paramByKey returns the parameter of s named key.
func paramByKey(t *testing.T, s *Section, key string) Param {
	t.Helper()
	for _, p := range s.Params() {
		if p.Key == key {
			return p
		}
	}
	t.Fatalf("section %q has no parameter %q (have %v)", s.Name, key, s.Params())
	return Param{}
}

// dK returns dK/dk of the complete elliptic integral of the first kind of
// modulus k: (E(k) − k'²·K(k))/(k·k'²) (DLMF 19.4.1).
func dK(k float64) float64 {
	m := k * k
	kp2 := 1 - m
	return (mathext.CompleteE(m) - kp2*mathext.CompleteK(m)) / (k * kp2)
}

// dRatio returns d/dk of K(k)/K(k') with k' = √(1 − k²) (dk'/dk = −k/k').
func dRatio(k float64) float64 {
	kp := math.Sqrt(1 - k*k)
	K, Kp := mathext.CompleteK(k*k), mathext.CompleteK(kp*kp)
	dKp := dK(kp) * (-k / kp)
	return (dK(k)*Kp - K*dKp) / (Kp * Kp)
}

// TestDK checks DLMF 19.4.1 against a central difference of gonum's K.
func TestDK(t *testing.T) {
	for _, k := range []float64{0.1, 0.5, 0.9} {
		h := 1e-5
		fd := (mathext.CompleteK((k+h)*(k+h)) - mathext.CompleteK((k-h)*(k-h))) / (2 * h)
		if e := relErr(dK(k), fd); math.Abs(e) > 1e-8 {
			t.Errorf("dK/dk(%g) = %.12g, central difference %.12g", k, dK(k), fd)
		}
	}
}

// TestSensHomogeneous: with one εr everywhere, C is εr·C0 and the field
// energies of all regions add up to dC/dεr = C/εr = C0 exactly (the mesh
// covers every region once).
func TestSensHomogeneous(t *testing.T) {
	s := demoSection()
	for i := range s.Stackup.Layers {
		s.Stackup.Layers[i].Er = 3.2
	}
	sol := solveSens(t, s, 3*testMil, 1e-3, nil)
	var sum [2][2]float64
	for k, p := range sol.Params {
		if p.Kind == ParamEr {
			for i := range 2 {
				for j := range 2 {
					sum[i][j] += sol.DC[k][i][j]
				}
			}
		}
	}
	for i := range 2 {
		for j := range 2 {
			want := sol.C[i][j] / 3.2
			// Rounding only: the sum and C are the same quadratic form.
			if e := math.Abs(sum[i][j]-want) / math.Sqrt(sol.C[i][i]*sol.C[j][j]/(3.2*3.2)); e > 1e-12 {
				t.Errorf("Σ dC%d%d/dεr = %.12g, C/εr = %.12g (%.1e)", i, j, sum[i][j], want, e)
			}
		}
	}
}

// TestSensParallelPlate: a zero-thickness strip w = 20b wide centred between
// grounds b apart is two parallel plates plus the fringing of its edges
// (Cohn 1954 for w/b → ∞: C/ε = 4w/b + 8·ln2/π). The fringing does not
// depend on w, and by the up-down symmetry not on the strip's height
// either, to first order; so dC/dw = ε·(1/h1 + 1/h2) = 4ε/b and
// dC/dh1 = −ε·w/h1² (−C_plate/h1).
func TestSensParallelPlate(t *testing.T) {
	b := 20 * testMil
	w := 20 * b
	er := 2.0
	s := edgeCoupled(b, w, 6*b, er)
	sol := solveSens(t, s, s.NominalOffset(), 2e-4, nil)
	eps := Eps0 * er
	h1 := b / 2
	for k, p := range sol.Params {
		var want float64
		switch {
		case p.Kind == ParamWidth:
			want = 4 * eps / b
		case p.Kind == ParamThickness && p.Layer == 1:
			want = -eps * w / (h1 * h1)
		default:
			continue
		}
		got := sol.DC[k][1][1]
		t.Logf("%s: dC11 %.6g, parallel plate %.6g (%+.1e)", p.Key, got, want, relErr(got, want))
		// Measured: 3e-5 (width) and 1e-5 (height); the edges' own
		// corrections are e^(−πw/b) small. Ten times that.
		if e := relErr(got, want); math.Abs(e) > 3e-4 {
			t.Errorf("%s: dC11 = %.6g, parallel plate %.6g (error %.2e)", p.Key, got, want, e)
		}
	}
}

// TestSensCohn1954 differentiates Cohn's centred thin stripline,
// Z0·√εr = (η0/4)·K(k)/K(k'), k = sech(πw/2b) (Cohn, IRE Trans. MTT-2,
// pp. 52–57, 1954), analytically with dK/dk from DLMF 19.4.1:
// dk/dw = −k·tanh(πw/2b)·π/(2b), dk/db = k·tanh(πw/2b)·πw/(2b²). A
// thickness of one half of the stack moves b and, at first order, nothing
// else (the impedance is even in the strip's height about the centre).
func TestSensCohn1954(t *testing.T) {
	b := 40 * testMil
	wbs := []float64{0.3, 1, 2.5}
	if testing.Short() {
		wbs = []float64{1}
	}
	for _, wb := range wbs {
		w := wb * b
		er := 3.0
		s := edgeCoupled(b, w, 6*b, er)
		pt, _ := sensOf(t, s, s.NominalOffset(), 2e-4, nil)
		k := 1 / math.Cosh(math.Pi*wb/2)
		th := math.Tanh(math.Pi * wb / 2)
		zk := Eta0 / 4 / math.Sqrt(er) * dRatio(k)
		want := map[ParamKind]float64{
			ParamWidth:     zk * (-k * th * math.Pi / (2 * b)),
			ParamThickness: zk * (k * th * math.Pi * w / (2 * b * b)),
		}
		checkZLine(t, fmt.Sprintf("w/b %g", wb), "Cohn 1954", pt, want, tolSensCohn)
	}
}

// checkZLine compares the derivatives of line 1's impedance with respect to
// the parameters of the kinds in want against want, within tol.
func checkZLine(t *testing.T, label, source string, pt Point, want map[ParamKind]float64, tol float64) {
	t.Helper()
	for _, sv := range pt.Sens {
		wnt, ok := want[sv.Param.Kind]
		if !ok {
			continue
		}
		got := sv.ZLine[1]
		msg := fmt.Sprintf("%s %s: dZ0 %.6g Ω/mil, %s %.6g (%+.1e)", label, sv.Param.Key, got*testMil, source, wnt*testMil, relErr(got, wnt))
		if math.Abs(relErr(got, wnt)) > tol {
			t.Error(msg)
		} else {
			t.Log(msg)
		}
	}
}

// TestSensCohn1955 differentiates Cohn's edge-coupled thin striplines
// (Cohn, IRE Trans. MTT-3, pp. 29–38, 1955): Z·√εr = (η0/4)·K(k')/K(k),
// ke = tanh(πw/2b)·tanh(π(w+s)/2b), ko = tanh(πw/2b)·coth(π(w+s)/2b),
// with respect to the gap s at fixed w (the solver's offset w + s).
func TestSensCohn1955(t *testing.T) {
	b := 40 * testMil
	cases := []struct{ wb, sb float64 }{{0.5, 0.2}, {1, 0.1}, {0.3, 0.5}}
	if testing.Short() {
		cases = cases[:1]
	}
	for _, c := range cases {
		er := 2.2
		w := c.wb * b
		s := edgeCoupled(b, w, c.sb*b, er)
		pt, _ := sensOf(t, s, s.NominalOffset(), 2e-4, []Param{{Kind: ParamOffset, Layer: -1, Key: "offset"}})
		ta := math.Tanh(math.Pi * c.wb / 2)
		u := math.Pi * (c.wb + c.sb) / 2
		dke := ta / (math.Cosh(u) * math.Cosh(u)) * math.Pi / (2 * b)
		dko := -ta / (math.Sinh(u) * math.Sinh(u)) * math.Pi / (2 * b)
		ke, ko := ta*math.Tanh(u), ta/math.Tanh(u)
		// Z = (η0/4√εr)/r(k) with r = K(k)/K(k'): dZ/ds = −(η0/4√εr)·r'(k)/r(k)²·dk/ds.
		z := func(k, dk float64) float64 {
			r := ellipticRatio(k)
			return -Eta0 / 4 / math.Sqrt(er) * dRatio(k) / (r * r) * dk
		}
		wantE, wantO := z(ke, dke), z(ko, dko)
		sv := pt.Sens[0]
		t.Logf("w/b %g s/b %g: dZe/ds %.6g Ω/mil (Cohn %.6g, %+.1e), dZo/ds %.6g (Cohn %.6g, %+.1e)", c.wb, c.sb,
			sv.ZEven*testMil, wantE*testMil, relErr(sv.ZEven, wantE), sv.ZOdd*testMil, wantO*testMil, relErr(sv.ZOdd, wantO))
		if e := relErr(sv.ZEven, wantE); math.Abs(e) > tolSensCohn {
			t.Errorf("w/b %g s/b %g: dZe/ds %.6g, Cohn 1955 %.6g (error %.2e)", c.wb, c.sb, sv.ZEven, wantE, e)
		}
		if e := relErr(sv.ZOdd, wantO); math.Abs(e) > tolSensCohn {
			t.Errorf("w/b %g s/b %g: dZo/ds %.6g, Cohn 1955 %.6g (error %.2e)", c.wb, c.sb, sv.ZOdd, wantO, e)
		}
	}
}

// TestSensHammerstadJensen compares the microstrip impedance's derivatives
// with respect to w and h against those of Hammerstad & Jensen's closed
// form (IEEE MTT-S Digest 1980, pp. 407–409; see hammerstadJensen),
// differentiated by central differences of the formula (u = w/h:
// dZ/dw = Z'(u)/h, dZ/dh = −u·Z'(u)/h).
func TestSensHammerstadJensen(t *testing.T) {
	h := 10 * testMil
	us := []float64{0.5, 1, 2, 4}
	if testing.Short() {
		us = []float64{1}
	}
	er := 4.5
	for _, u := range us {
		s := microstripSec(h, u*h, er)
		pt, _ := sensOf(t, s, s.NominalOffset(), 5e-4, nil)
		du := 1e-5 * u
		zp, _ := hammerstadJensen(u+du, er)
		zm, _ := hammerstadJensen(u-du, er)
		dz := (zp - zm) / (2 * du)
		want := map[ParamKind]float64{ParamWidth: dz / h, ParamThickness: -u * dz / h}
		checkZLine(t, fmt.Sprintf("w/h %g", u), "H&J", pt, want, tolSensHJ)
	}
}

// TestSensTrends: the odd-mode capacitance of an edge-coupled pair rises
// with the finished copper thickness (the facing side walls form a parallel
// plate across the gap; common practice), by the sensitivity and by two
// solves; a mask of εr = 1 is air, so moving its faces changes nothing.
func TestSensTrends(t *testing.T) {
	s := edgeMicro(10*testMil, 18*testMil, 6*testMil, 1.4*testMil, 3.48)
	par := paramByKey(t, s, "T.copper")
	sol := solveSens(t, s, s.NominalOffset(), 1e-3, []Param{par})
	dodd := sol.DC[0][0][0] - sol.DC[0][0][1]
	thick, err := Solve(s.Perturbed(par, 1.4*testMil), s.NominalOffset(), nil)
	if err != nil {
		t.Fatal(err)
	}
	odd := func(c [2][2]float64) float64 { return c[0][0] - c[0][1] }
	t.Logf("C_odd %.5g pF/m at 1.4 mil, %.5g at 2.8 mil; d/dt %.4g pF/m per mil", odd(sol.C)*1e12, odd(thick.C)*1e12, dodd*1e12*testMil)
	if !(dodd > 0) || !(odd(thick.C) > odd(sol.C)) {
		t.Errorf("odd-mode capacitance must rise with copper thickness: d/dt %.4g, %.5g → %.5g", dodd, odd(sol.C), odd(thick.C))
	}
	air := withMask(s, 1.0*testMil, 0.6*testMil, 1)
	as := solveSens(t, air, air.NominalOffset(), 1e-3, nil)
	for k, p := range as.Params {
		if p.Kind != ParamMaskLaminate && p.Kind != ParamMaskCopper {
			continue
		}
		// Relative change of C per mil of coat: mesh motion only. Measured
		// 1e−6; the bound is the accuracy asked for per mil.
		for i := range 2 {
			for j := range 2 {
				r := math.Abs(as.DC[k][i][j]) * testMil / math.Sqrt(as.C[i][i]*as.C[j][j])
				if r > 1e-3 {
					t.Errorf("mask εr 1: %s moves C%d%d by %.2e per mil", p.Key, i, j, r)
				}
			}
		}
	}
}

// TestSweepSensitivities: a sweep with sensitivities carries them at every
// offset, equal at ±δ (the mirror), cached with the curve; its first-order
// prediction of a perturbed section's coupling is good to second order.
func TestSweepSensitivities(t *testing.T) {
	s := demoSection()
	offs := []float64{-2 * testMil, -testMil, 0, testMil, 2 * testMil}
	set := &Settings{Sensitivities: true}
	dir := t.TempDir()
	c, hit, err := CachedSweep(context.Background(), s, offs, set, dir, false)
	if err != nil || hit {
		t.Fatalf("sweep: %v (hit %v)", err, hit)
	}
	params := c.Params()
	if len(params) != 12 {
		t.Fatalf("%d parameters, want 12 (3 dielectrics × 2, 2 copper layers × 3): %v", len(params), params)
	}
	for k := range params {
		a, b := c.Points[0].Sens[k], c.Points[4].Sens[k]
		if a.CouplingDB != b.CouplingDB || a.C != b.C {
			t.Errorf("%s: sensitivity at −2 mil %v, at +2 mil %v: the mirror makes them equal", params[k].Key, a.CouplingDB, b.CouplingDB)
		}
		if got := c.CouplingSensitivity(k, testMil); got != c.Points[3].Sens[k].CouplingDB {
			t.Errorf("%s: interpolant %v at a solved offset, point %v", params[k].Key, got, c.Points[3].Sens[k].CouplingDB)
		}
	}
	cached, hit, err := CachedSweep(context.Background(), s, offs, set, dir, false)
	if err != nil || !hit {
		t.Fatalf("cached sweep: %v (hit %v)", err, hit)
	}
	if got, want := cached.CouplingSensitivity(3, 0.5*testMil), c.CouplingSensitivity(3, 0.5*testMil); got != want {
		t.Errorf("cached sensitivity %v, solved %v", got, want)
	}
	plain, hit, err := CachedSweep(context.Background(), s, offs, nil, dir, false)
	if err != nil || hit || plain.Params() != nil {
		t.Errorf("a plain sweep must not reuse the sensitivity entry (hit %v, %d params, %v)", hit, len(plain.Params()), err)
	}
	// First order: the core 5 → 5.25 mil. The change is about 0.1 dB; the
	// second-order remainder a few percent of it.
	core := paramByKey(t, s, "layers[3].thickness")
	dp := 0.25 * testMil
	moved := s.Perturbed(core, dp)
	moved.Length = c.Length
	mc, err := Sweep(context.Background(), moved, offs, nil)
	if err != nil {
		t.Fatal(err)
	}
	k := slices.Index(params, core)
	for _, o := range []float64{0, 1.5 * testMil} {
		pred := c.Coupling(o) + c.CouplingSensitivity(k, o)*dp
		got := mc.Coupling(o)
		change := got - c.Coupling(o)
		t.Logf("offset %g mil: coupling %.5f → %.5f dB, first order %.5f (remainder %.1e dB)", o/testMil, c.Coupling(o), got, pred, got-pred)
		if math.Abs(got-pred) > 0.05*math.Abs(change) {
			t.Errorf("offset %g mil: first-order coupling %.5f, solved %.5f (change %.4f dB)", o/testMil, pred, got, change)
		}
	}
}

func TestFindParam(t *testing.T) {
	s := withMask(edgeMicro(10*testMil, 18*testMil, 6*testMil, 1.4*testMil, 3.48), testMil, 0.5*testMil, 3.8)
	for _, c := range []struct {
		layer string
		kind  ParamKind
		key   string
		ok    bool
	}{
		{"K1", ParamThickness, "K1.thickness", true},
		{"K1", ParamEr, "K1.er", true},
		{"T", ParamWidth, "T.width", true},
		{"T", ParamCopper, "T.copper", true},
		{"", ParamMaskCopper, "mask.over_copper", true},
		{"G", ParamCopper, "", false}, // the ground is outside the domain
		{"K1", ParamWidth, "", false},
	} {
		p, ok := s.FindParam(c.layer, c.kind)
		if ok != c.ok || p.Key != c.key {
			t.Errorf("FindParam(%q, %v) = %q, %v; want %q, %v", c.layer, c.kind, p.Key, ok, c.key, c.ok)
		}
	}
}
