package section

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// Nested-dissection Cholesky. The stiffness matrix lives on a structured
// (nx+1)×(ny+1) node grid with the 9-point coupling of Q1 elements, so a
// separator is one node line: the grid is cut recursively along its longer
// side by a column or row of nodes, down to small rectangles (George, Nested
// dissection of a regular finite element mesh, SIAM J. Numer. Anal. 10,
// 345–363, 1973). The factorisation is multifrontal (Duff & Reid, ACM TOMS 9,
// 302–325, 1983; Liu, SIAM Review 34, 82–109, 1992): each node of the
// dissection tree owns a dense front over the nodes it eliminates (its
// separator, or the whole rectangle at a leaf) and the ring of nodes just
// outside its rectangle, which lie on ancestor separators. On the fine meshes
// here (15,000 unknowns, half bandwidth 105) it does about a quarter of the
// arithmetic of the band factorisation, in dense blocks (gonum Potrf, then
// Dgemv row by row: schur). The dissection depends only on the mesh plan (free and fixed nodes),
// so it is built once per plan and reused for C and C0 and for every offset.

// ndLeafNodes is the largest rectangle (in grid nodes) that is not cut further.
const ndLeafNodes = 40

// ndFront is one node of the dissection tree, in post order.
type ndFront struct {
	vars   []int32 // free-node numbers: p eliminated, then the ring
	p      int     // eliminated count
	off    int     // start of the front's p rows (m wide) in ndFactor.rows
	kids   []int   // child fronts
	elems  []int32 // elements assembled into this front
	locals []int32 // per element, the 4 local positions (−1: fixed node)
	ext    []int32 // per child, its ring's local positions here, children in order
	// runEnd[c], parallel to ext, is the end (in the child's ring) of the
	// run of consecutive local positions that ext[c] starts or continues:
	// the extend-add copies runs rather than single entries.
	runEnd []int32
}

// ndSymbolic is the dissection of one mesh plan.
type ndSymbolic struct {
	fronts []ndFront
	size   int // length of the stored rows, Σ p·m
	maxM   int // largest front
	stack  int // largest total size of the update matrices waiting for their parent

	// Subtrees whose elements all have one permittivity ε: with dielectrics
	// their fronts are ε times the vacuum ones, so U = √ε·U0 and the update
	// matrix is ε times the vacuum one. uni[k] is that ε, 0 for a subtree
	// without elements (its update is zero), −1 for a mixed one; a uniform
	// front whose parent is mixed keeps its vacuum update at saved[k] (−1
	// otherwise).
	uni       []float64
	saved     []int
	savedSize int
}

// newNDSymbolic dissects the grid of m (its free nodes numbered by idx).
func newNDSymbolic(m *mesh, idx []int32, nfree int) *ndSymbolic {
	nx, ny := m.nx, m.ny
	sym := &ndSymbolic{}
	node := func(i, j int) int { return i*(ny+1) + j }
	// owner[q] is the front that eliminates free node q.
	owner := make([]int32, nfree)
	var build func(i0, i1, j0, j1 int) int
	build = func(i0, i1, j0, j1 int) int {
		var f ndFront
		w, h := i1-i0+1, j1-j0+1
		addFree := func(i, j int) {
			if i < 0 || j < 0 || i > nx || j > ny {
				return
			}
			if q := idx[node(i, j)]; q >= 0 {
				f.vars = append(f.vars, q)
			}
		}
		if w*h <= ndLeafNodes || (w < 3 && h < 3) {
			for i := i0; i <= i1; i++ {
				for j := j0; j <= j1; j++ {
					addFree(i, j)
				}
			}
		} else if w >= h {
			im := (i0 + i1) / 2
			f.kids = append(f.kids, build(i0, im-1, j0, j1), build(im+1, i1, j0, j1))
			for j := j0; j <= j1; j++ {
				addFree(im, j)
			}
		} else {
			jm := (j0 + j1) / 2
			f.kids = append(f.kids, build(i0, i1, j0, jm-1), build(i0, i1, jm+1, j1))
			for i := i0; i <= i1; i++ {
				addFree(i, jm)
			}
		}
		f.p = len(f.vars)
		// The ring just outside the rectangle.
		for i := i0 - 1; i <= i1+1; i++ {
			addFree(i, j0-1)
			addFree(i, j1+1)
		}
		for j := j0; j <= j1; j++ {
			addFree(i0-1, j)
			addFree(i1+1, j)
		}
		k := len(sym.fronts)
		for _, q := range f.vars[:f.p] {
			owner[q] = int32(k)
		}
		sym.fronts = append(sym.fronts, f)
		return k
	}
	build(0, nx, 0, ny)
	// Each element goes to the front that eliminates the first of its free
	// nodes; its other free nodes are in that front (same separator or ring).
	for i := range nx {
		for j := range ny {
			e := i*ny + j
			if m.er[e] == 0 {
				continue
			}
			k := int32(-1)
			for _, n := range elementNodes(i, j, ny) {
				if q := idx[n]; q >= 0 && (k < 0 || owner[q] < k) {
					k = owner[q]
				}
			}
			if k >= 0 {
				sym.fronts[k].elems = append(sym.fronts[k].elems, int32(e))
			}
		}
	}
	sym.uni = make([]float64, len(sym.fronts))
	sym.saved = make([]int, len(sym.fronts))
	mixed := make([]bool, len(sym.fronts))
	for k, f := range sym.fronts { // post order: children first
		u := 0.0
		merge := func(v float64, mix bool) {
			switch {
			case mix:
				mixed[k] = true
			case v == 0:
			case u == 0:
				u = v
			case u != v:
				mixed[k] = true
			}
		}
		for _, c := range f.kids {
			merge(sym.uni[c], mixed[c])
		}
		for _, e := range f.elems {
			merge(m.er[e], false)
		}
		sym.uni[k] = u
		if mixed[k] {
			sym.uni[k] = -1
		}
	}
	for k := range sym.fronts {
		sym.saved[k] = -1
	}
	for k, f := range sym.fronts {
		for _, c := range f.kids {
			if sym.uni[c] >= 0 && sym.uni[k] < 0 {
				b := len(sym.fronts[c].vars) - sym.fronts[c].p
				sym.saved[c] = sym.savedSize
				sym.savedSize += b * b
			}
		}
	}
	// Each front's ring in the order of its positions in the parent (root
	// first, so that a parent's own order is final): the extend-add then
	// walks the parent's rows and columns in increasing order, with no test
	// for which triangle an entry falls in. Any order of the ring is an
	// equally valid elimination; the sums are the same.
	pos := make([]int32, nfree)
	for k := len(sym.fronts) - 1; k >= 0; k-- {
		f := &sym.fronts[k]
		for l, q := range f.vars {
			pos[q] = int32(l)
		}
		for _, ck := range f.kids {
			ring := sym.fronts[ck].vars[sym.fronts[ck].p:]
			slices.SortFunc(ring, func(a, b int32) int { return cmp.Compare(pos[a], pos[b]) })
		}
	}
	local := make([]int32, nfree)
	for k := range sym.fronts {
		f := &sym.fronts[k]
		f.off = sym.size
		sym.size += f.p * len(f.vars)
		sym.maxM = max(sym.maxM, len(f.vars))
		for l, q := range f.vars {
			local[q] = int32(l)
		}
		for _, ck := range f.kids {
			c := &sym.fronts[ck]
			ring := c.vars[c.p:]
			base := len(f.ext)
			for _, q := range ring {
				f.ext = append(f.ext, local[q])
			}
			f.runEnd = append(f.runEnd, make([]int32, len(ring))...)
			to, end := f.ext[base:], f.runEnd[base:]
			for r := len(ring) - 1; r >= 0; r-- {
				end[r] = int32(r + 1)
				if r+1 < len(ring) && to[r+1] == to[r]+1 {
					end[r] = end[r+1]
				}
			}
		}
		f.locals = make([]int32, 4*len(f.elems))
		for t, e := range f.elems {
			i, j := int(e)/ny, int(e)%ny
			for a, n := range elementNodes(i, j, ny) {
				f.locals[4*t+a] = -1
				if q := idx[n]; q >= 0 {
					f.locals[4*t+a] = local[q]
				}
			}
		}
	}
	// The update matrices wait on a stack: a front pops its children's and
	// pushes its own (post order).
	var depth []int
	used := 0
	for _, f := range sym.fronts {
		for range f.kids {
			used -= depth[len(depth)-1]
			depth = depth[:len(depth)-1]
		}
		b := len(f.vars) - f.p
		depth = append(depth, b*b)
		used += b * b
		sym.stack = max(sym.stack, used)
	}
	return sym
}

// ndFactor is a numeric factorisation over an ndSymbolic: the rows of U
// that each front eliminates. Fronts are assembled in one reused buffer and
// the update matrices wait on a stack, so the working set stays small.
type ndFactor struct {
	sym   *ndSymbolic
	rows  []float64   // per front, its p rows of U, m wide (the upper part is used)
	work  []float64   // the current front, m×m, upper triangle
	stack []float64   // update matrices waiting for their parent, b×b each
	saved []float64   // vacuum updates of the uniform subtrees (ndSymbolic.saved)
	vacOf *ndSymbolic // rows hold the vacuum factorisation of this dissection
	// scale[k] is √ε of a uniform front k whose rows are still the vacuum
	// ones (the dielectric rows are √ε times those; the solve applies it), 1
	// for a front factored as it stands.
	scale []float64
	y     []float64
}

// factor assembles s·ke per element (s from eps, 1 everywhere when vacuum)
// and factors, and runs the forward half of the solve for the two
// right-hand sides interleaved in rhs (rhs[2q], rhs[2q+1]; see forward):
// each front eliminates from rhs right after it is factored, while its rows
// are still in cache, so that only the backward half (backward) reads the
// stored rows from memory. Right after the vacuum factorisation of the same
// dissection, the fronts of uniform subtrees are scaled from it rather than
// recomputed. It reports false if the matrix is not positive definite.
func (nf *ndFactor) factor(sym *ndSymbolic, ke []float64, eps func(e int) float64, vacuum bool, rhs []float64) bool {
	reuse := !vacuum && nf.vacOf == sym
	nf.vacOf = nil
	nf.sym = sym
	nf.rows = resize(nf.rows, sym.size)
	nf.work = resize(nf.work, sym.maxM*sym.maxM)
	nf.stack = resize(nf.stack, sym.stack)
	if vacuum {
		nf.saved = resize(nf.saved, sym.savedSize)
	}
	nf.scale = resize(nf.scale, len(sym.fronts))
	top := 0 // stack length
	for k := range sym.fronts {
		f := &sym.fronts[k]
		m := len(f.vars)
		p, b := f.p, m-f.p
		nf.scale[k] = 1
		if e := sym.uni[k]; reuse && e >= 0 {
			// The rows stay the vacuum ones; the solve scales by √ε (a pass
			// over the rows here cost a twentieth of the factorisation).
			nf.scale[k] = math.Sqrt(e)
			nf.forward(f, nf.rows[f.off:f.off+p*m], nf.scale[k], rhs)
			if o := sym.saved[k]; o >= 0 { // the subtree's update, for a mixed parent
				U := nf.stack[top : top+b*b]
				for i, v := range nf.saved[o : o+b*b] {
					U[i] = e * v
				}
				top += b * b
			}
			continue
		}
		F := nf.work[:m*m]
		for r := range m { // the upper triangle only: the lower one is never read
			clear(F[r*m+r : r*m+m])
		}
		// Elements, into the upper triangle.
		for t, e := range f.elems {
			s := eps(int(e))
			el := ke[16*int(e) : 16*int(e)+16]
			loc := f.locals[4*t : 4*t+4]
			for a := range 4 {
				la := loc[a]
				if la < 0 {
					continue
				}
				F[int(la)*m+int(la)] += s * el[a*4+a]
				for b := a + 1; b < 4; b++ {
					lb := loc[b]
					if lb < 0 {
						continue
					}
					r, c := min(la, lb), max(la, lb)
					F[int(r)*m+int(c)] += s * el[a*4+b]
				}
			}
		}
		// Children's update matrices (extend-add), from the top of the
		// stack: the last child's is on top.
		base := top
		for _, ck := range f.kids {
			c := &sym.fronts[ck]
			cb := len(c.vars) - c.p
			base -= cb * cb
		}
		ext, runEnd, at := f.ext, f.runEnd, base
		for _, ck := range f.kids {
			c := &sym.fronts[ck]
			cb := len(c.vars) - c.p
			to, end := ext[:cb], runEnd[:cb]
			ext, runEnd = ext[cb:], runEnd[cb:]
			U := nf.stack[at : at+cb*cb]
			at += cb * cb
			for r, lr := range to { // to is increasing (newNDSymbolic)
				row := U[r*cb : r*cb+cb]
				dst := F[int(lr)*m : int(lr)*m+m]
				for cc := r; cc < cb; {
					e := int(end[cc])
					d, src := dst[to[cc]:][:e-cc], row[cc:e]
					for k, v := range src {
						d[k] += v
					}
					cc = e
				}
			}
		}
		top = base
		if p > 0 {
			if _, ok := lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: p, Data: F, Stride: m}); !ok {
				return false
			}
			if b > 0 {
				schur(F, m, p)
			}
			dst := nf.rows[f.off : f.off+p*m]
			for r := range p {
				copy(dst[r*m+r:r*m+m], F[r*m+r:r*m+m])
			}
			nf.forward(f, F[:p*m], 1, rhs)
		}
		// Push the update matrix.
		U := nf.stack[top : top+b*b]
		for r := range b {
			copy(U[r*b+r:r*b+b], F[(p+r)*m+p+r:(p+r)*m+m])
		}
		if o := sym.saved[k]; vacuum && o >= 0 {
			copy(nf.saved[o:o+b*b], U)
		}
		top += b * b
	}
	if vacuum {
		nf.vacOf = sym
	}
	return true
}

// schur completes the partial factorisation of the front F (m×m, upper
// triangle, stride m) whose leading p×p block already holds U11: it solves
// U11ᵀ·U12 = A12 for the p rows of U12 and subtracts U12ᵀ·U12 from the
// trailing block A22. These are gonum's Trsm(Left, Trans) and Syrk(Trans)
// done a row at a time as matrix-vector products: row i of U12 is A12's row
// i less U[0:i, i]ᵀ·U12[0:i, :] over U[i][i], and row j of the update is
// U12[:, j]ᵀ·U12[:, j:]. Each is one gonum Dgemv (its assembly kernel takes
// four rows of the matrix per pass over the vector) instead of one axpy call
// per pair of rows; on the fronts here (m ≤ 200) that is 1.4 to 2 times
// faster, and the sums are taken in the same order, so the factors are the
// same to the bit (BenchmarkFront).
func schur(F []float64, m, p int) {
	b := m - p
	for i := range p {
		row := blas64.Vector{N: b, Data: F[i*m+p:], Inc: 1}
		if i > 0 {
			blas64.Gemv(blas.Trans, -1, blas64.General{Rows: i, Cols: b, Data: F[p:], Stride: m},
				blas64.Vector{N: i, Data: F[i:], Inc: m}, 1, row)
		}
		blas64.Scal(1/F[i*m+i], row)
	}
	for j := range b {
		blas64.Gemv(blas.Trans, -1, blas64.General{Rows: p, Cols: b - j, Data: F[p+j:], Stride: m},
			blas64.Vector{N: p, Data: F[p+j:], Inc: m}, 1, blas64.Vector{N: b - j, Data: F[(p+j)*m+p+j:], Inc: 1})
	}
}

// gather copies the two right-hand sides of vars into nf.y, as two vectors.
func (nf *ndFactor) gather(vars []int32, rhs []float64) (y0, y1 []float64) {
	n := len(vars)
	nf.y = resize(nf.y, 2*n)
	y0, y1 = nf.y[:n], nf.y[n:2*n]
	for i, q := range vars {
		y0[i], y1[i] = rhs[2*q], rhs[2*q+1]
	}
	return y0, y1
}

// scatter copies the first len(vars) entries of the two vectors in nf.y back.
func (nf *ndFactor) scatter(vars []int32, rhs []float64) {
	n := len(nf.y) / 2
	y0, y1 := nf.y[:n], nf.y[n:]
	for i, q := range vars {
		rhs[2*q], rhs[2*q+1] = y0[i], y1[i]
	}
}

// errNotPD is the message of a failed factorisation.
func errNotPD(n int) error {
	return fmt.Errorf("section: stiffness matrix is not positive definite (%d unknowns)", n)
}

// forward eliminates front f from the two right-hand sides interleaved in
// rhs, with U its p rows (m wide, the upper part used) times σ: the front's
// part of Uᵀ·y = b. It gathers the front's variables into two contiguous
// vectors, solves the triangle row by row of U11 with both right-hand sides
// in one pass over each row, and updates the ring with one gonum Dgemv per
// right-hand side (y2 −= U12ᵀ·y1; the sums in the same order as row by row).
func (nf *ndFactor) forward(f *ndFront, U []float64, sc float64, rhs []float64) {
	m, p := len(f.vars), f.p
	if p == 0 {
		return
	}
	y0, y1 := nf.gather(f.vars, rhs)
	for i := range p {
		row := U[i*m+i : i*m+p]
		a0, a1 := y0[i]/row[0], y1[i]/row[0]
		y0[i], y1[i] = a0, a1
		r := row[1:]
		t0, t1 := y0[i+1:p], y1[i+1:p]
		t0, t1 = t0[:len(r)], t1[:len(r)]
		for c, v := range r {
			t0[c] -= a0 * v
			t1[c] -= a1 * v
		}
	}
	if b := m - p; b > 0 {
		u12 := blas64.General{Rows: p, Cols: b, Data: U[p:], Stride: m}
		for _, y := range [2][]float64{y0, y1} {
			blas64.Gemv(blas.Trans, -1, u12, blas64.Vector{N: p, Data: y, Inc: 1}, 1, blas64.Vector{N: b, Data: y[p:], Inc: 1})
		}
	}
	// Rows σ·U give the ring the same updates as U does, and the front's
	// own unknowns 1/σ times U's.
	if sc != 1 {
		for i := range p {
			y0[i] /= sc
			y1[i] /= sc
		}
	}
	nf.scatter(f.vars, rhs)
}

// backward completes the solve of K·x = rhs that factor began, in place:
// U·x = y, fronts in reverse post order, row by row of U with both
// right-hand sides in one pass over each row (10 % faster than two gonum
// axpy or dot calls per row on the fine meshes; this half reads U from
// memory, so one pass for both matters more than the Dgemv kernel).
func (nf *ndFactor) backward(rhs []float64) {
	sym := nf.sym
	for k := len(sym.fronts) - 1; k >= 0; k-- {
		f := &sym.fronts[k]
		m, p := len(f.vars), f.p
		if p == 0 {
			continue
		}
		F := nf.rows[f.off : f.off+p*m]
		y0, y1 := nf.gather(f.vars, rhs)
		// σ·U x = y is U x = y/σ.
		if sc := nf.scale[k]; sc != 1 {
			for i := range p {
				y0[i] /= sc
				y1[i] /= sc
			}
		}
		for i := p - 1; i >= 0; i-- {
			row := F[i*m+i : i*m+m]
			r := row[1:]
			t0, t1 := y0[i+1:m], y1[i+1:m]
			t0, t1 = t0[:len(r)], t1[:len(r)]
			var s0, s1 float64
			for c, v := range r {
				s0 += v * t0[c]
				s1 += v * t1[c]
			}
			y0[i] = (y0[i] - s0) / row[0]
			y1[i] = (y1[i] - s1) / row[0]
		}
		nf.scatter(f.vars[:p], rhs)
	}
}
