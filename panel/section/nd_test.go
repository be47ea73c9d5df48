package section

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// bandReference assembles the free-node system of w.m (with dielectrics
// unless vacuum) into LAPACK's symmetric band form and solves it for the two
// conductor right-hand sides with gonum's dpbtrf/dpbtrs, a general-purpose
// reference for the nested-dissection solve [gonum lapack64.Pbtrf, Pbtrs].
func bandReference(t *testing.T, w *femWork, vacuum bool) []float64 {
	t.Helper()
	m := &w.m
	nx, ny := m.nx, m.ny
	n, kb := w.nfree, w.kb
	stride := kb + 1
	band := make([]float64, n*stride)
	rhs := make([]float64, 2*n)
	for i := range nx {
		for j := range ny {
			e := i*ny + j
			if m.er[e] == 0 {
				continue
			}
			s := m.er[e]
			if vacuum {
				s = 1
			}
			ke := w.ke[16*e : 16*e+16]
			ns := elementNodes(i, j, ny)
			for a, na := range ns {
				p := w.idx[na]
				if p < 0 {
					continue
				}
				for b, nb := range ns {
					q := w.idx[nb]
					v := s * ke[a*4+b]
					if q >= p {
						band[int(p)*stride+int(q-p)] += v
					} else if q < 0 && m.tag[nb] >= tagTrace {
						rhs[2*int(p)+int(m.tag[nb]-tagTrace)] -= v
					}
				}
			}
		}
	}
	a := blas64.SymmetricBand{Uplo: blas.Upper, N: n, K: kb, Data: band, Stride: stride}
	f, ok := lapack64.Pbtrf(a)
	if !ok {
		t.Fatal("band reference: not positive definite")
	}
	lapack64.Pbtrs(f, blas64.General{Rows: n, Cols: 2, Data: rhs, Stride: 2})
	return rhs
}

// TestNestedDissectionMatchesBand checks the nested-dissection Cholesky
// against gonum's band Cholesky on the meshes of a broadside pair (inside and
// outside a transition window), an edge-coupled pair and a microstrip, with
// and without dielectrics, also where the dielectric factorisation reuses the
// vacuum one: the potentials agree to rounding.
func TestNestedDissectionMatchesBand(t *testing.T) {
	for _, tc := range []struct {
		name string
		s    *Section
		off  float64
		lev  float64
	}{
		{"demo centred (window)", demoSection(), 0, 0.8},
		{"demo 2 mil", demoSection(), 2 * testMil, 1.13},
		{"edge-coupled", edgeCoupled(2e-3, 1e-3, 0.3e-3, 2.2), 1.3e-3, 0.8},
		{"microstrip", microstripSec(0.5e-3, 1e-3, 4.4), 0, 0.8},
	} {
		t.Run(tc.name, func(t *testing.T) {
			off := tc.off
			if tc.s.Traces[0].Layer == tc.s.Traces[1].Layer {
				off = tc.s.NominalOffset()
			}
			sv, err := newSolver(tc.s, nil, off, off)
			if err != nil {
				t.Fatal(err)
			}
			k, _ := sv.locate(off)
			w := &femWork{}
			sv.plan(k, tc.lev).realize(off, &w.m)
			if err := w.prepare(); err != nil {
				t.Fatal(err)
			}
			// Dielectric alone, vacuum, then dielectric again (which scales
			// the uniform parts of the vacuum factorisation).
			for _, vacuum := range []bool{false, true, false} {
				if _, _, err := w.capacitance(vacuum); err != nil {
					t.Fatal(err)
				}
				ref := bandReference(t, w, vacuum)
				worst := 0.0
				for node, q := range w.idx {
					if q < 0 {
						continue
					}
					for c := range 2 {
						worst = math.Max(worst, math.Abs(w.phi[c][node]-ref[2*int(q)+c]))
					}
				}
				t.Logf("%d unknowns, vacuum %v: largest potential difference %.2e", w.nfree, vacuum, worst)
				if worst > 1e-11 {
					t.Errorf("vacuum %v: nested dissection differs from the band solve by %.2e (potentials in V)", vacuum, worst)
				}
			}
		})
	}
}

// TestRectStiffness checks the closed-form rectangle stiffness against the
// 2 × 2 Gauss quadrature of the general element, which is exact on a
// rectangle (the integrands are quadratic in each coordinate), and that its
// rows sum to zero (a constant potential carries no energy).
func TestRectStiffness(t *testing.T) {
	for _, d := range [][2]float64{{1, 1}, {3e-5, 2e-7}, {1e-7, 4e-4}} {
		a, b := d[0], d[1]
		x, y := [4]float64{0, a, a, 0}, [4]float64{0, 0, b, b}
		var kr, kq [16]float64
		rectStiffness(kr[:], a, b)
		if err := quadStiffness(kq[:], x, y); err != nil {
			t.Fatal(err)
		}
		scale := b/a + a/b
		for i := range kr {
			if math.Abs(kr[i]-kq[i]) > 1e-14*scale {
				t.Errorf("%g × %g: entry %d: closed form %g, quadrature %g", a, b, i, kr[i], kq[i])
			}
		}
		for r := range 4 {
			sum := kr[4*r] + kr[4*r+1] + kr[4*r+2] + kr[4*r+3]
			if math.Abs(sum) > 1e-14*scale {
				t.Errorf("%g × %g: row %d sums to %g", a, b, r, sum)
			}
		}
	}
}

// randomFront returns an m×m symmetric positive definite matrix (row-major,
// both triangles): AᵀA plus m on the diagonal, A uniform in ±0.5.
func randomFront(m int, seed uint64) []float64 {
	r := rand.New(rand.NewPCG(seed, 1))
	a := make([]float64, m*m)
	for i := range a {
		a[i] = r.Float64() - 0.5
	}
	f := make([]float64, m*m)
	for i := range m {
		for j := range m {
			s := 0.0
			for k := range m {
				s += a[k*m+i] * a[k*m+j]
			}
			f[i*m+j] = s
		}
		f[i*m+i] += float64(m)
	}
	return f
}

// gonumFront is the partial factorisation that schur finishes, done with
// gonum's Potrf, Trsm and Syrk [gonum lapack64.Potrf, blas64.Trsm,
// blas64.Syrk], the general-purpose reference.
func gonumFront(F []float64, m, p int) {
	lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: p, Data: F, Stride: m})
	if b := m - p; b > 0 {
		u11 := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: p, Data: F, Stride: m}
		u12 := blas64.General{Rows: p, Cols: b, Data: F[p:], Stride: m}
		blas64.Trsm(blas.Left, blas.Trans, 1, u11, u12)
		blas64.Syrk(blas.Trans, -1, u12, 1, blas64.Symmetric{Uplo: blas.Upper, N: b, Data: F[p*m+p:], Stride: m})
	}
}

// frontSizes are (eliminated, ring) sizes of fronts like those of the fine
// meshes: leaves, separators, the root (no ring), and odd sizes for the
// Dgemv kernel's tails.
var frontSizes = [][2]int{{1, 1}, {7, 3}, {15, 25}, {40, 30}, {60, 120}, {100, 150}, {169, 0}}

// TestSchurMatchesGonum checks the row-by-row completion of a front against
// gonum's Trsm and Syrk: the sums are taken in the same order, so the
// factor and the update matrix agree to the bit.
func TestSchurMatchesGonum(t *testing.T) {
	for _, sz := range frontSizes {
		p, m := sz[0], sz[0]+sz[1]
		want, got := randomFront(m, uint64(m)), randomFront(m, uint64(m))
		gonumFront(want, m, p)
		lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: p, Data: got, Stride: m})
		if m > p {
			schur(got, m, p)
		}
		for i := range m {
			for j := i; j < m; j++ {
				if got[i*m+j] != want[i*m+j] {
					t.Fatalf("front %d+%d: entry (%d, %d) = %v, gonum %v", p, m-p, i, j, got[i*m+j], want[i*m+j])
				}
			}
		}
	}
}
