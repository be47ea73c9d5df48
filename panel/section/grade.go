package section

import (
	"math"
	"slices"
)

// grading describes the target element size along one direction of the mesh:
//
//	h(x) = min(hmax, min over singular points s of h0 + alpha·|x − s|)
//
// i.e. geometric grading with ratio about e^alpha between neighbouring
// elements toward every conductor edge or face (where the field is singular),
// floored at h0 right at the singular point and capped at hmax where the field
// is quiet. Nodes are placed at equal steps of Φ(x) = ∫ dx/h(x), so that
// doubling the element count of a segment adds one node between each pair
// (nested meshes for Richardson extrapolation), and moving a segment end moves
// every node continuously (no mesh noise along an offset sweep).
type grading struct {
	h0, alpha, hmax float64
}

// piece is a sub-interval of a segment on which h is linear.
type piece struct {
	a, b   float64 // ends
	ha, hb float64 // h at the ends
	phi    float64 // ∫ dx/h over the piece
}

func (g grading) h(x float64, sing []float64) float64 {
	h := g.hmax
	for _, s := range sing {
		h = math.Min(h, g.h0+g.alpha*math.Abs(x-s))
	}
	return h
}

// pieces splits [a, b] at every kink of h and returns the pieces, appended to dst.
func (g grading) pieces(dst []piece, a, b float64, sing []float64, bp []float64) ([]piece, []float64) {
	bp = append(bp[:0], a, b)
	c := (g.hmax - g.h0) / g.alpha
	add := func(x float64) {
		if x > a && x < b {
			bp = append(bp, x)
		}
	}
	for i, s := range sing {
		add(s)
		if !math.IsInf(c, 1) {
			add(s - c)
			add(s + c)
		}
		for _, t := range sing[i+1:] {
			add((s + t) / 2)
		}
	}
	slices.Sort(bp)
	bp = slices.Compact(bp)
	for i := 0; i+1 < len(bp); i++ {
		p := piece{a: bp[i], b: bp[i+1]}
		p.ha, p.hb = g.h(p.a, sing), g.h(p.b, sing)
		d := p.b - p.a
		if math.Abs(p.hb-p.ha) < 1e-12*p.ha {
			p.phi = d / p.ha
		} else {
			p.phi = d * math.Log(p.hb/p.ha) / (p.hb - p.ha)
		}
		dst = append(dst, p)
	}
	return dst, bp
}

// phi returns ∫ dx/h over [a, b].
func (g grading) phi(a, b float64, sing []float64) float64 {
	ps, _ := g.pieces(nil, a, b, sing, nil)
	t := 0.0
	for _, p := range ps {
		t += p.phi
	}
	return t
}

// grader places nodes; it keeps scratch space so that a mesh can be built
// without allocating per row.
type grader struct {
	grading
	ps []piece
	bp []float64
}

// nodes writes n+1 nodes on [a, b] into dst (dst[0] = a, dst[n] = b).
func (gr *grader) nodes(dst []float64, a, b float64, n int, sing []float64) {
	if !(b > a) { // a degenerate segment; the element check reports it
		for i := range dst[:n+1] {
			dst[i] = a
		}
		return
	}
	gr.ps, gr.bp = gr.pieces(gr.ps[:0], a, b, sing, gr.bp)
	total := 0.0
	for _, p := range gr.ps {
		total += p.phi
	}
	dst[0], dst[n] = a, b
	k, acc := 0, 0.0 // current piece and Φ at its start
	for i := 1; i < n; i++ {
		target := total * float64(i) / float64(n)
		for k < len(gr.ps)-1 && acc+gr.ps[k].phi < target {
			acc += gr.ps[k].phi
			k++
		}
		p := gr.ps[k]
		f := target - acc // Φ within the piece
		// On a piece h = ha + s·(x − a), Φ = ln(1 + s(x−a)/ha)/s, so
		// x = a + ha·(e^{sΦ} − 1)/s.
		s := (p.hb - p.ha) / (p.b - p.a)
		var x float64
		if math.Abs(s*f) < 1e-9 {
			x = p.a + p.ha*f*(1+s*f/2)
		} else {
			x = p.a + p.ha*math.Expm1(s*f)/s
		}
		dst[i] = math.Max(p.a, math.Min(p.b, x))
	}
}
