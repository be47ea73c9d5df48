package section

import (
	"math"
	"sync"
)

// Mesh construction. The mesh is a structured grid of quadrilaterals: every
// horizontal node line is at a fixed height (all band interfaces and trace faces
// are node lines), and column j of the grid runs from bottom to top with
// x-positions that vary from row to row. In the rows of a broadside trace's
// slab the columns at the trace's edges follow its sloped sides exactly; the
// rows at and above the upper trace use the upper trace's column pattern, the
// rows at and below the lower trace the lower trace's pattern (same column
// count), and the rows between blend the two linearly. The topology therefore
// never changes with offset, and the node positions are smooth functions of it.

// Mesh constants. They were tuned on the convergence study in doc.go.
const (
	gradeAlpha   = 0.9   // ln of the element size ratio toward a singular edge at level 1
	floorFrac    = 0.02  // h0 as a fraction of the smallest feature
	quietFrac    = 0.25  // largest element as a fraction of the ground spacing b (stripline), at level 1
	marginSpans  = 2.5   // side walls this many b beyond the traces (stripline): exp(−2π·2.5) ≈ 1.5e−7
	openSpans    = 160.0 // microstrip: Dirichlet box this many (stack height + widths) away
	minSegCount  = 1
	maxMeshNodes = 400000
)

// meshPlan fixes the topology of the mesh (element counts per segment) and the
// row heights for one section and refinement level; it is shared by every
// offset of a sweep.
type meshPlan struct {
	g        *geometry
	level    float64
	bands    []band    // geometry bands plus the air band for a microstrip
	ys       []float64 // node row heights, bottom to top
	rowBand  []int     // band of each element row
	xc       []int     // element counts per lateral segment
	nx, ny   int       // elements per row and per column
	gx       grading
	margin   float64 // distance from the outermost trace edge to a side wall
	wmax     float64 // widest foot
	hi, lo   int     // broadside: index of the trace in the higher / lower slab
	jub      int     // broadside: row of the lower face of the higher trace
	jlt      int     // broadside: row of the upper face of the lower trace
	feat     float64 // smallest feature (sets the gap of held edges)
	coatEdge []int   // per key, the copper edge of a coat face, or −1 (geometry.coatEdges)

	ndOnce sync.Once
	nd     *ndSymbolic // nested dissection of the grid (nd.go), built on first use

	pertMu sync.Mutex
	pert   map[int]*meshPlan // the plan moved along each length parameter (sensitivity.go)
}

// dissection returns the plan's nested dissection, building it from m (a
// realisation of p, whose free and fixed nodes do not depend on the offset)
// on first use.
func (p *meshPlan) dissection(m *mesh, idx []int32, nfree int) *ndSymbolic {
	p.ndOnce.Do(func() { p.nd = newNDSymbolic(m, idx, nfree) })
	return p.nd
}

func (p *meshPlan) unknownsEstimate() int { return (p.nx + 1) * (p.ny + 1) }

// features returns the smallest feature of the cross-section that the mesh
// must resolve: a trace thickness, a half width, the dielectric gap next to a
// trace, the gap between edge-coupled traces.
func (g *geometry) smallestFeature(s *Section) float64 {
	f := math.Inf(1)
	for k := range 2 {
		t := g.tr[k]
		if t.yt > t.yb {
			f = math.Min(f, t.yt-t.yb)
		}
		f = math.Min(f, math.Min(t.hwb, t.hwt))
		for _, b := range g.bands {
			if b.y1 == t.yb || b.y0 == t.yt {
				f = math.Min(f, b.y1-b.y0)
			}
		}
	}
	// The mask's coat is not a feature of its own: its corners are
	// dielectric corners, far weaker singularities than the copper's, and a
	// floor set by a thin coat would refine every conductor edge too (2.3×
	// the bare section's time for a 0.6 mil coat). Its faces are node lines
	// and the level's counts resolve it.
	coat := 0.0
	if m := g.mask; m != nil && (m.coated[0] || m.coated[1]) {
		coat = m.tc
	}
	if g.same {
		d := math.Abs((g.offLo + g.offHi) / 2)
		gap := d - (s.Traces[0].Width+s.Traces[1].Width)/2 - 2*coat
		if gap > 0 {
			f = math.Min(f, gap)
		}
	}
	return f
}

// newMeshPlan builds the plan with mult times the element counts of level
// lev in every segment, graded toward the singular edges down to a floor
// that shrinks as 1/floorLev.
func newMeshPlan(s *Section, g *geometry, lev float64, mult int, floorLev float64) *meshPlan {
	p := &meshPlan{g: g}
	feat := g.smallestFeature(s)
	h0 := floorFrac * feat / floorLev
	h0base := h0
	p.wmax = maxFoot(s)
	H := g.stackH
	hmax := quietFrac * H
	p.margin = g.wallMargin(s)
	p.bands = append([]band(nil), g.bands...)
	if g.micro {
		hmax = math.Inf(1)
		r := p.margin
		p.bands = append(p.bands, band{y0: H, y1: H + r, er: 1, trace: -1, src: srcAir, layer: -1})
	}
	p.bands = splitBands(p.bands, g.maskSplits())
	p.gx = grading{h0: h0, alpha: gradeAlpha, hmax: hmax}
	gy := grading{h0: h0, alpha: gradeAlpha, hmax: hmax}
	// Counts come from the base grading (floor h0base) at level lev.
	cx := grading{h0: h0base, alpha: gradeAlpha, hmax: hmax}
	count := func(phi float64) int {
		return mult * max(minSegCount, int(math.Ceil(lev*phi)))
	}

	// Rows: every trace face is a singular line.
	var sing []float64
	for k := range 2 {
		sing = append(sing, g.tr[k].yb, g.tr[k].yt)
	}
	p.ys = []float64{p.bands[0].y0}
	gr := grader{grading: gy}
	for bi, b := range p.bands {
		n := count(cx.phi(b.y0, b.y1, sing))
		row := make([]float64, n+1)
		gr.nodes(row, b.y0, b.y1, n, sing)
		p.ys = append(p.ys, row[1:]...)
		for range n {
			p.rowBand = append(p.rowBand, bi)
		}
	}
	p.ny = len(p.ys) - 1
	rowOf := func(y float64) int {
		for j, v := range p.ys {
			if v == y {
				return j
			}
		}
		panic("section: trace face is not a mesh row")
	}

	// Columns. The counts are the largest needed at the ends and the middle of
	// the offset range, so that a segment that grows across the range (the
	// gap between two edges that pass each other) is resolved at its widest.
	p.feat = feat
	if !g.same {
		p.hi, p.lo = 0, 1
		if g.tr[1].yb > g.tr[0].yb {
			p.hi, p.lo = 1, 0
		}
		p.jub = rowOf(g.tr[p.hi].yb)
		p.jlt = rowOf(g.tr[p.lo].yt)
	}
	p.coatEdge = g.coatEdges()
	var keys []float64
	for _, off := range []float64{g.offLo, (g.offLo + g.offHi) / 2, g.offHi} {
		// The patterns as realised: each trace's own rows with the other's
		// edges held (keysOrdered), at the trace's face next to the other.
		var pats [][]float64
		if g.same {
			pats = append(pats, p.keysOrdered(off, nil, [2]float64{g.tr[0].yb, g.tr[1].yb}, -1))
		} else {
			yh, yl := g.tr[p.hi].yb, g.tr[p.lo].yt
			pats = append(pats, p.keysOrdered(off, nil, [2]float64{yh, yh}, p.hi), p.keysOrdered(off, nil, [2]float64{yl, yl}, p.lo))
		}
		for _, keys = range pats {
			if p.xc == nil {
				p.xc = make([]int, len(keys)-1)
			}
			for i := range p.xc {
				if keys[i+1] > keys[i] {
					p.xc[i] = max(p.xc[i], count(cx.phi(keys[i], keys[i+1], p.segSing(keys, i))))
				} else {
					p.xc[i] = max(p.xc[i], minSegCount)
				}
			}
		}
	}
	// Mirror-paired counts, so that a mirror-symmetric layout meshes
	// mirror-symmetrically.
	for i := range len(p.xc) / 2 {
		m := max(p.xc[i], p.xc[len(p.xc)-1-i])
		p.xc[i], p.xc[len(p.xc)-1-i] = m, m
	}
	for _, c := range p.xc {
		p.nx += c
	}
	return p
}

// edgeSing returns the singular ends of segment i of a key list: every key
// except the two walls.
func edgeSing(keys []float64, i int) []float64 {
	var s []float64
	if i > 0 {
		s = append(s, keys[i])
	}
	if i+1 < len(keys)-1 {
		s = append(s, keys[i+1])
	}
	return s
}

// segSing returns the singular points that grade segment i of the plan's
// key list: its ends that are conductor edges, and for an end that is the
// outer face of a mask's side-wall coat the copper edge behind it (a
// dielectric face has a kink in the field, not a singularity, and the column
// line resolves it; grading toward it as toward copper doubled the unknowns
// of a coated pair, so the grading runs on from the copper across it).
func (p *meshPlan) segSing(keys []float64, i int) []float64 {
	if p.coatEdge == nil {
		return edgeSing(keys, i)
	}
	var s []float64
	for _, q := range []int{i, i + 1} {
		switch {
		case q == 0 || q == len(keys)-1: // a wall
		case p.coatEdge[q] >= 0:
			s = append(s, keys[p.coatEdge[q]])
		default:
			s = append(s, keys[q])
		}
	}
	return s
}

// coatEdges returns, for each key of keysOrdered, the key of the copper edge
// whose coat face it is, or −1 (nil without coated traces).
func (g *geometry) coatEdges() []int {
	_, coated := g.coat()
	if !coated[0] && !coated[1] {
		return nil
	}
	out := []int{-1}
	for _, e := range g.order {
		c := coated[e.trace]
		if !e.right && c {
			out = append(out, len(out)+1)
		}
		out = append(out, -1)
		if e.right && c {
			out = append(out, len(out)-1)
		}
	}
	return append(out, -1)
}

// walls returns the side walls at offset off.
func (p *meshPlan) walls(off float64) (lo, hi float64) {
	return wallsAt(p.g.x1, p.wmax, p.margin, off)
}

// wallsAt returns the side walls at offset off for a lower trace centred
// at x1, the wider foot wmax and a margin beyond the traces. The half extent
// wmax/2 + √((δ/2)² + (wmax/2)²) bounds both traces and is smooth in δ.
func wallsAt(x1, wmax, margin, off float64) (lo, hi float64) {
	xm := (x1 + off + x1) / 2
	e := wmax/2 + math.Hypot(off/2, wmax/2) + margin
	return xm - e, xm + e
}

// maxFoot returns the wider of the two traces' foot widths.
func maxFoot(s *Section) float64 { return math.Max(s.Traces[0].Width, s.Traces[1].Width) }

// wallMargin returns the distance from the outermost trace edge to a side
// wall: marginSpans domain heights (stripline), or for a microstrip the
// Dirichlet box's distance, openSpans·(stack height + 2·widest foot +
// |nominal offset|), also the height of the air band.
func (g *geometry) wallMargin(s *Section) float64 {
	if g.micro {
		return g.openSpans * (g.stackH + 2*maxFoot(s) + math.Abs(s.NominalOffset()))
	}
	return marginSpans * g.stackH
}

// keysOrdered returns the walls and all four trace edges in the order
// g.order, trace k's edges taken at height y[k]. With own ≥ 0 (the rows of
// trace own in a broadside pair) the other trace's edges are held at least a
// small gap from the order's neighbours by a smooth clamp, so that the order
// holds even where edges pass each other; own's edges stay exact.
func (p *meshPlan) keysOrdered(off float64, dst []float64, y [2]float64, own int) []float64 {
	g := p.g
	wl, wr := p.walls(off)
	dst = append(dst[:0], wl)
	centre := [2]float64{g.x1 + off, g.x1}
	tc, coated := g.coat()
	for _, e := range g.order {
		hw := g.tr[e.trace].halfWidth(y[e.trace])
		if e.right {
			dst = append(dst, centre[e.trace]+hw)
			if coated[e.trace] {
				dst = append(dst, centre[e.trace]+hw+tc)
			}
		} else {
			if coated[e.trace] {
				dst = append(dst, centre[e.trace]-hw-tc)
			}
			dst = append(dst, centre[e.trace]-hw)
		}
	}
	dst = append(dst, wr)
	if own < 0 {
		return dst
	}
	// Each run of the other trace's edges lies between two fixed keys (own
	// edges or walls) A < B; a smooth increasing map into (A+gap, B−gap), the
	// identity away from the ends, keeps the run in order and inside.
	gap := heldGap * p.feat
	for i := 1; i <= 4; {
		if g.order[i-1].trace == own {
			i++
			continue
		}
		j := i
		for j <= 4 && g.order[j-1].trace != own {
			j++
		}
		lo, hi := dst[i-1]+gap, dst[j]-gap // run is dst[i:j]
		m := math.Min(heldSoft*p.feat, (hi-lo)/4)
		mid := (lo + hi) / 2
		for k := i; k < j; k++ {
			if dst[k] < mid {
				dst[k] = softAbove(dst[k], lo, m)
			} else {
				dst[k] = softBelow(dst[k], hi, m)
			}
		}
		i = j
	}
	return dst
}

// coat returns the side-wall coat of the mask and which traces carry it
// (their rows get a column line at each coat's outer face; only an
// edge-coupled pair can be coated, Section.checkMask).
func (g *geometry) coat() (tc float64, coated [2]bool) {
	if g.mask == nil {
		return 0, coated
	}
	return g.mask.tc, g.mask.coated
}

// keyColumns returns, per trace, the column lines of its left and right edge
// and of the outer faces of its side-wall coats (equal to the edges when it
// is not coated), in the key order of keysOrdered.
func (p *meshPlan) keyColumns() (colL, colR, coatL, coatR [2]int) {
	_, coated := p.g.coat()
	q, col := 0, 0 // key index, column of key q
	next := func() { col += p.xc[q]; q++ }
	for _, e := range p.g.order {
		k := e.trace
		if e.right {
			next()
			colR[k] = col
			coatR[k] = col
			if coated[k] {
				next()
				coatR[k] = col
			}
		} else {
			if coated[k] {
				next()
				coatL[k] = col
			}
			next()
			colL[k] = col
			if !coated[k] {
				coatL[k] = col
			}
		}
	}
	return
}

// Held edges: an edge of the other trace stays at least heldGap·feature from
// its neighbour, and is moved only within heldSoft·feature of that limit.
const (
	heldGap  = 0.1
	heldSoft = 0.5
)

// softAbove returns x, or for x < b + m a value that approaches b smoothly
// (C¹) and only algebraically, b + m/(1 + (b + m − x)/m), so that points far
// below the limit keep distinct, ordered images. It is always above b.
func softAbove(x, b, m float64) float64 {
	if x >= b+m {
		return x
	}
	return b + m/(1+(b+m-x)/m)
}

// softBelow mirrors softAbove: always below b.
func softBelow(x, b, m float64) float64 {
	if x <= b-m {
		return x
	}
	return b - m/(1+(x-b+m)/m)
}

// mesh is one realisation of a plan at one offset.
type mesh struct {
	p      *meshPlan
	nx, ny int
	x, y   []float64 // node coordinates, node (i, j) at i*(ny+1)+j
	tag    []int8    // tagFree, tagGround, or tagTrace+k
	er     []float64 // element permittivity, 0 inside a conductor; element (i, j) at i*ny+j
	src    []int16   // where each element's permittivity comes from: a stackup index, srcAir or srcMask
}

const (
	tagFree   int8 = -1
	tagGround int8 = 0
	tagTrace  int8 = 1 // tagTrace + k for trace k
)

// realize places the nodes of plan p for offset off.
func (p *meshPlan) realize(off float64, m *mesh) { p.place(off, m, true) }

// place places the nodes of plan p for offset off and, with full, tags them
// and sets the element permittivities; without, only the coordinates (a
// moved copy of a mesh whose tags and permittivities are known).
func (p *meshPlan) place(off float64, m *mesh, full bool) {
	g := p.g
	nx, ny := p.nx, p.ny
	nn := (nx + 1) * (ny + 1)
	m.p, m.nx, m.ny = p, nx, ny
	m.x = resize(m.x, nn)
	m.y = resize(m.y, nn)
	m.er = resize(m.er, nx*ny)
	if cap(m.src) < nx*ny {
		m.src = make([]int16, nx*ny)
	}
	m.src = m.src[:nx*ny]
	if cap(m.tag) < nn {
		m.tag = make([]int8, nn)
	}
	m.tag = m.tag[:nn]
	gr := grader{grading: p.gx}
	row := make([]float64, nx+1)
	rowLo := make([]float64, nx+1)
	rowHi := make([]float64, nx+1)
	var keys []float64
	fill := func(dst []float64, y float64, k int) {
		keys = p.keysOrdered(off, keys, [2]float64{y, y}, k)
		i0 := 0
		for s, c := range p.xc {
			gr.nodes(dst[i0:i0+c+1], keys[s], keys[s+1], c, p.segSing(keys, s))
			i0 += c
		}
	}
	if !g.same {
		fill(rowLo, p.ys[p.jlt], p.lo)
		fill(rowHi, p.ys[p.jub], p.hi)
	}
	// Trace column ranges [iL, iR] in the pattern of each row.
	colL, colR, coatL, coatR := p.keyColumns()
	for j, y := range p.ys {
		switch {
		case g.same:
			fill(row, y, -1)
		case j >= p.jub:
			if j == p.jub {
				copy(row, rowHi)
			} else {
				fill(row, y, p.hi)
			}
		case j <= p.jlt:
			if j == p.jlt {
				copy(row, rowLo)
			} else {
				fill(row, y, p.lo)
			}
		default:
			// Linear blend. (A smoothstep, which leaves the faces with
			// vertical columns, converged worse: it doubles the shear in the
			// middle of the gap.)
			t := (y - p.ys[p.jlt]) / (p.ys[p.jub] - p.ys[p.jlt])
			for i := range row {
				row[i] = (1-t)*rowLo[i] + t*rowHi[i]
			}
		}
		for i := 0; i <= nx; i++ {
			n := i*(ny+1) + j
			m.x[n], m.y[n] = row[i], y
			if !full {
				continue
			}
			tag := tagFree
			if j == 0 || (j == ny && !g.micro) || (g.micro && (j == ny || i == 0 || i == nx)) {
				tag = tagGround
			}
			for k := range 2 {
				if g.same || (k == p.hi && j >= p.jub) || (k == p.lo && j <= p.jlt) {
					if y >= g.tr[k].yb && y <= g.tr[k].yt && i >= colL[k] && i <= colR[k] {
						tag = tagTrace + int8(k)
					}
				}
			}
			m.tag[n] = tag
		}
	}
	if !full {
		return
	}
	mg := g.mask
	for i := range nx {
		for j := range ny {
			b := p.bands[p.rowBand[j]]
			er, src := b.er, b.src
			for k := range 2 {
				if (b.trace == k || b.trace == 2) && g.tr[k].yt > g.tr[k].yb && i >= colL[k] && i < colR[k] {
					if g.same || (k == p.hi && j >= p.jub) || (k == p.lo && j < p.jlt) {
						er = 0
					}
				}
			}
			if er != 0 && mg != nil {
				// Rows and columns follow the mask's faces, so the element
				// centre decides.
				yc := (p.ys[j] + p.ys[j+1]) / 2
				in := yc > mg.y0 && yc < mg.top
				for k := range 2 {
					if mg.coated[k] && yc > mg.y0 && yc < g.tr[k].yt+mg.tc && i >= coatL[k] && i < coatR[k] {
						in = true
					}
				}
				if in {
					er, src = mg.er, srcMask
				}
			}
			m.er[i*ny+j] = er
			m.src[i*ny+j] = int16(src)
		}
	}
}

func resize(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}
