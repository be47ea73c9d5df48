package section

import (
	"fmt"
	"math"
)

// Finite elements: bilinear (Q1) isoparametric quadrilaterals, 2×2 Gauss
// quadrature, Dirichlet conditions on the grounds and conductors, natural
// (zero normal field) on stripline side walls. Capacitance from the energy
// form C_mn = ε0·φ_mᵀ K φ_n, which is symmetric by construction and whose error
// is the square of the energy-norm error of the potential (second order in h
// for Q1 on a mesh graded to the singularities).
//
// The system is solved by a nested-dissection multifrontal Cholesky (nd.go).
// Nodes are numbered column by column along the short (vertical) direction;
// kb, the half bandwidth of that numbering (about ny+1), is reported but no
// longer shapes the solve.

// femWork holds the buffers of one solve; a worker reuses it across offsets.
type femWork struct {
	m      mesh
	charge [2][2]float64 // charge form of the last capacitance: Q_mn = Σ_{nodes of n} (K·φ_m), F/m
	ke     []float64     // 16 entries per element, geometric stiffness ∫∇Na·∇Nb
	idx    []int32       // free-node number or -1
	nfree  int
	kb     int       // half bandwidth of the column-by-column numbering
	rhs    []float64 // nfree × 2, row-major
	nd     ndFactor
	phi    [2][]float64 // potentials of the last solve
	phi0   [2][]float64 // vacuum potentials, kept when derivatives follow
	sens   sensWork
}

// gauss2 are the 2-point Gauss–Legendre abscissae ±1/√3 (weights 1).
var gauss2 = [2]float64{-1 / math.Sqrt(3), 1 / math.Sqrt(3)}

// Reference-square corner signs, counter-clockwise from (−1, −1).
var (
	cornerXi  = [4]float64{-1, 1, 1, -1}
	cornerEta = [4]float64{-1, -1, 1, 1}
)

// elementNodes returns the four node numbers of element (i, j), counter-clockwise.
func elementNodes(i, j, ny int) [4]int {
	n00 := i*(ny+1) + j
	n10 := (i+1)*(ny+1) + j
	return [4]int{n00, n10, n10 + 1, n00 + 1}
}

// stiffness computes the Q1 element matrix ∫ ∇Na·∇Nb dA of the quadrilateral
// with corners (x[a], y[a]) into k (row-major 4×4). Most elements are
// axis-aligned rectangles (every element outside the sloped trace sides and
// the blended rows between the traces); they take the closed form.
func stiffness(k []float64, x, y [4]float64) error {
	if x[0] == x[3] && x[1] == x[2] && y[0] == y[1] && y[2] == y[3] && x[1] > x[0] && y[3] > y[0] {
		rectStiffness(k, x[1]-x[0], y[3]-y[0])
		return nil
	}
	return quadStiffness(k, x, y)
}

// Closed-form Q1 stiffness of an a × b rectangle, corners counter-clockwise
// from the lower left: (b/6a)·kx + (a/6b)·ky, the x- and y-derivative parts
// (the standard bilinear rectangle, as in Zienkiewicz & Taylor, The Finite
// Element Method, vol. 1, 5th ed., 2000, from memory; TestRectStiffness
// checks it against the 2 × 2 Gauss quadrature, which is exact here).
var (
	rectKx = [16]float64{2, -2, -1, 1, -2, 2, 1, -1, -1, 1, 2, -2, 1, -1, -2, 2}
	rectKy = [16]float64{2, 1, -1, -2, 1, 2, -2, -1, -1, -2, 2, 1, -2, -1, 1, 2}
)

func rectStiffness(k []float64, a, b float64) {
	fx, fy := b/(6*a), a/(6*b)
	for i := range k[:16] {
		k[i] = fx*rectKx[i] + fy*rectKy[i]
	}
}

// quadStiffness is stiffness by 2 × 2 Gauss quadrature, for any convex
// quadrilateral.
func quadStiffness(k []float64, x, y [4]float64) error {
	for i := range k[:16] {
		k[i] = 0
	}
	for _, xi := range gauss2 {
		for _, eta := range gauss2 {
			var dxi, deta [4]float64
			var j11, j12, j21, j22 float64
			for a := range 4 {
				dxi[a] = cornerXi[a] * (1 + cornerEta[a]*eta) / 4
				deta[a] = cornerEta[a] * (1 + cornerXi[a]*xi) / 4
				j11 += dxi[a] * x[a]
				j12 += dxi[a] * y[a]
				j21 += deta[a] * x[a]
				j22 += deta[a] * y[a]
			}
			det := j11*j22 - j12*j21
			if !(det > 0) {
				return fmt.Errorf("section: degenerate mesh element (Jacobian %g)", det)
			}
			var gx, gy [4]float64
			for a := range 4 {
				gx[a] = (j22*dxi[a] - j12*deta[a]) / det
				gy[a] = (-j21*dxi[a] + j11*deta[a]) / det
			}
			for a := range 4 {
				for b := a; b < 4; b++ {
					k[a*4+b] += (gx[a]*gx[b] + gy[a]*gy[b]) * det
				}
			}
		}
	}
	for a := range 4 {
		for b := range a {
			k[a*4+b] = k[b*4+a]
		}
	}
	return nil
}

// prepare computes the element matrices and the free-node numbering of w.m.
func (w *femWork) prepare() error {
	m := &w.m
	nx, ny := m.nx, m.ny
	w.ke = resize(w.ke, 16*nx*ny)
	for i := range nx {
		for j := range ny {
			e := i*ny + j
			if m.er[e] == 0 {
				continue
			}
			ns := elementNodes(i, j, ny)
			var x, y [4]float64
			for a, n := range ns {
				x[a], y[a] = m.x[n], m.y[n]
			}
			if err := stiffness(w.ke[16*e:16*e+16], x, y); err != nil {
				return err
			}
		}
	}
	nn := len(m.tag)
	if cap(w.idx) < nn {
		w.idx = make([]int32, nn)
	}
	w.idx = w.idx[:nn]
	w.nfree = 0
	for n, t := range m.tag {
		if t == tagFree {
			w.idx[n] = int32(w.nfree)
			w.nfree++
		} else {
			w.idx[n] = -1
		}
	}
	w.kb = 0
	for i := range nx {
		for j := range ny {
			if m.er[i*ny+j] == 0 {
				continue
			}
			lo, hi := int32(math.MaxInt32), int32(-1)
			for _, n := range elementNodes(i, j, ny) {
				if q := w.idx[n]; q >= 0 {
					lo, hi = min(lo, q), max(hi, q)
				}
			}
			if hi >= 0 {
				w.kb = max(w.kb, int(hi-lo))
			}
		}
	}
	return nil
}

// capacitance solves for the two conductor potentials with permittivity
// er (vacuum: every element 1) and returns the Maxwell capacitance matrix
// and the largest relative residual ‖K_ff u − b‖/‖b‖ of the two solves.
func (w *femWork) capacitance(vacuum bool) (c [2][2]float64, resid float64, err error) {
	m := &w.m
	nx, ny := m.nx, m.ny
	n := w.nfree
	if n == 0 {
		return c, 0, fmt.Errorf("section: mesh has no free nodes")
	}
	w.rhs = resize(w.rhs, 2*n)
	clear(w.rhs)
	epsOf := func(e int) float64 {
		if vacuum {
			return 1
		}
		return m.er[e]
	}
	// Right-hand sides: the couplings of free nodes to the conductors.
	for i := range nx {
		for j := range ny {
			e := i*ny + j
			if m.er[e] == 0 {
				continue
			}
			ns := elementNodes(i, j, ny)
			// Only an element with a trace node couples a free node to a
			// trace; most have none.
			if max(m.tag[ns[0]], m.tag[ns[1]], m.tag[ns[2]], m.tag[ns[3]]) < tagTrace {
				continue
			}
			s := epsOf(e)
			ke := w.ke[16*e : 16*e+16]
			for a, na := range ns {
				p := w.idx[na]
				if p < 0 {
					continue
				}
				for b, nb := range ns {
					if t := m.tag[nb]; t >= tagTrace {
						w.rhs[2*int(p)+int(t-tagTrace)] -= s * ke[a*4+b]
					}
				}
			}
		}
	}
	bnorm := [2]float64{}
	for p := range n {
		bnorm[0] += w.rhs[2*p] * w.rhs[2*p]
		bnorm[1] += w.rhs[2*p+1] * w.rhs[2*p+1]
	}
	sym := m.p.dissection(m, w.idx, n)
	if !w.nd.factor(sym, w.ke, epsOf, vacuum, w.rhs) { // and the forward half of the solve
		return c, 0, errNotPD(n)
	}
	w.nd.backward(w.rhs)
	// Full potentials.
	nn := len(m.tag)
	for k := range 2 {
		w.phi[k] = resize(w.phi[k], nn)
		for q, t := range m.tag {
			switch {
			case t == tagFree:
				w.phi[k][q] = w.rhs[2*int(w.idx[q])+k]
			case t == tagTrace+int8(k):
				w.phi[k][q] = 1
			default:
				w.phi[k][q] = 0
			}
		}
	}
	var q [2][2]float64
	// Energy form and residual (K φ restricted to free nodes must vanish).
	// The residual reuses rhs as scratch: the solution was copied into phi.
	clear(w.rhs)
	for i := range nx {
		for j := range ny {
			e := i*ny + j
			if m.er[e] == 0 {
				continue
			}
			s := epsOf(e)
			ke := w.ke[16*e : 16*e+16]
			ns := elementNodes(i, j, ny)
			var p0, p1 [4]float64
			for a, na := range ns {
				p0[a], p1[a] = w.phi[0][na], w.phi[1][na]
			}
			for a, na := range ns {
				var k0, k1 float64
				for b := range 4 {
					k0 += ke[a*4+b] * p0[b]
					k1 += ke[a*4+b] * p1[b]
				}
				k0 *= s
				k1 *= s
				c[0][0] += p0[a] * k0
				c[0][1] += p0[a] * k1
				c[1][1] += p1[a] * k1
				if f := w.idx[na]; f >= 0 {
					w.rhs[2*f] += k0
					w.rhs[2*f+1] += k1
				} else if t := m.tag[na]; t >= tagTrace {
					q[0][t-tagTrace] += k0
					q[1][t-tagTrace] += k1
				}
			}
		}
	}
	var rn [2]float64
	for p := range n {
		rn[0] += w.rhs[2*p] * w.rhs[2*p]
		rn[1] += w.rhs[2*p+1] * w.rhs[2*p+1]
	}
	for k := range 2 {
		if bnorm[k] > 0 {
			resid = math.Max(resid, math.Sqrt(rn[k]/bnorm[k]))
		}
	}
	c[1][0] = c[0][1]
	for i := range 2 {
		for j := range 2 {
			c[i][j] *= Eps0
			w.charge[i][j] = q[i][j] * Eps0
		}
	}
	return c, resid, nil
}
