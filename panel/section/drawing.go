package section

import (
	"fmt"
	"math"
)

// Drawing is the cross-section as the field solver meshes it at one offset,
// for a picture a designer can check the input against (section.png). Every
// face comes from the solver's own geometry (the bands, trapezoids and mask
// it meshes), not from a second reading of the stackup. Lengths are metres;
// x is the section's lateral coordinate (the lower trace centred at
// Traces[1].X), y rises toward the first layer of the stackup as listed, with
// y = 0 at the inner face of the ground the solver's domain starts from (the
// lower ground of a stripline, the only ground of a microstrip).
type Drawing struct {
	Offset     float64 // upper minus lower trace centre, m
	Microstrip bool    // one ground; beyond the outer layer the mask (if any) and air
	// Bottom and Top bound the solved domain in y: the grounds' inner faces
	// of a stripline; for a microstrip the ground face and the outer face of
	// the stack (the air beyond reaches the solver's box).
	Bottom, Top float64
	// Layers are the layers inside the domain and the ground planes that
	// bound it, top to bottom; each layer's Y1 − Y0 is its thickness.
	Layers []DrawnLayer
	Traces [2]DrawnTrace
	Mask   *DrawnMask // nil without a solder mask
	// Omitted lists the stackup indices of the layers beyond the grounds,
	// which the solver does not see.
	Omitted []int
	// Walls are the lateral bounds of the solved domain at this offset:
	// a stripline's side walls (zero normal field), a microstrip's box.
	Walls [2]float64
}

// DrawnLayer is one stackup layer of a Drawing.
type DrawnLayer struct {
	Index  int     // stackup index (Stackup.Layers)
	Y0, Y1 float64 // lower and upper face, m
	Ground bool    // a ground plane outside the domain: its inner face is the boundary
	// Er is a dielectric's εr; in a copper slab with a trace, the εr of the
	// resin around the trace (the prepreg it is pressed into, 1 for air).
	Er        float64
	ResinFrom int // copper slab: the stackup index of that resin's dielectric, −1 for air
}

// DrawnTrace is one trapezoidal trace of a Drawing.
type DrawnTrace struct {
	Layer   string
	Centre  float64 // x of the centre, m
	Y0, Y1  float64 // lower and upper face, m (equal for a zero-thickness strip)
	Corners [4]XY   // counter-clockwise from the lower left
	Foot    float64 // foot width (on the dielectric it was etched on), m
	Far     float64 // width at the far face, m
	FootLow bool    // the foot is the lower face in the drawing
}

// XY is a point of a Drawing, m.
type XY struct{ X, Y float64 }

// DrawnMask is the solder mask of a Drawing: a coat over the laminate
// between Y0 and Top (Y0 < Top; the coat's outer face is Top above the
// ground, Y0 below it), and over each coated trace the polygon Coats[k] (nil
// when trace k is not coated), the trace's own copper inside it.
type DrawnMask struct {
	Er      float64
	Y0, Top float64
	Coats   [2][]XY // counter-clockwise outlines
	// The coat's thicknesses as given (Stackup.Mask).
	OverLaminate, OverCopper float64
}

// Drawing returns the cross-section at offset off (upper minus lower trace
// centre, design offset included) as the solver meshes it.
func (s *Section) Drawing(off float64) (*Drawing, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	if err := s.checkOffset(off, "offsets"); err != nil {
		return nil, err
	}
	g := s.buildGeometry()
	d := &Drawing{Offset: off, Microstrip: g.micro}
	fy := func(y float64) float64 { // domain to drawing
		if g.down {
			return -y
		}
		return y
	}
	span := func(y0, y1 float64) (float64, float64) {
		a, b := fy(y0), fy(y1)
		return math.Min(a, b), math.Max(a, b)
	}
	d.Bottom, d.Top = span(0, g.stackH)
	ls := s.Stackup.Layers
	in := make([]bool, len(ls))
	for _, b := range g.bands {
		l := DrawnLayer{Index: b.layer, Er: b.er, ResinFrom: -1}
		l.Y0, l.Y1 = span(b.y0, b.y1)
		if ls[b.layer].Kind == Copper && b.src >= 0 {
			l.ResinFrom = b.src
		}
		in[b.layer] = true
		d.Layers = append(d.Layers, l)
	}
	// Ground planes: the first on the domain's y = 0 side, a stripline's
	// second at y = stackH.
	for k, gname := range s.Grounds {
		i := s.layerIndex(gname)
		in[i] = true
		t := ls[i].Thickness
		y0, y1 := -t, 0.0
		if len(s.Grounds) == 2 && i < s.layerIndex(s.Grounds[1-k]) { // the upper ground
			y0, y1 = g.stackH, g.stackH+t
		}
		l := DrawnLayer{Index: i, Ground: true, ResinFrom: -1}
		l.Y0, l.Y1 = span(y0, y1)
		d.Layers = append(d.Layers, l)
	}
	sortLayers(d.Layers)
	for i := range ls {
		if !in[i] && ls[i].Thickness > 0 {
			d.Omitted = append(d.Omitted, i)
		}
	}
	centre := [2]float64{g.x1 + off, g.x1}
	for k := range 2 {
		t := g.tr[k]
		dt := DrawnTrace{Layer: s.Traces[k].Layer, Centre: centre[k], Foot: s.Traces[k].Width, Far: s.Traces[k].Width - 2*s.Traces[k].Etch}
		if ls[t.slab].Thickness == 0 {
			dt.Far = dt.Foot
		}
		// hwb, hwt are the half widths at the domain's lower and upper face.
		lo, hi := XY{0, fy(t.yb)}, XY{0, fy(t.yt)}
		hwLo, hwHi := t.hwb, t.hwt
		if g.down {
			lo, hi = hi, lo
			hwLo, hwHi = hwHi, hwLo
		}
		dt.Y0, dt.Y1 = lo.Y, hi.Y
		c := centre[k]
		dt.Corners = [4]XY{{c - hwLo, lo.Y}, {c + hwLo, lo.Y}, {c + hwHi, hi.Y}, {c - hwHi, hi.Y}}
		dt.FootLow = t.footLow != g.down
		d.Traces[k] = dt
	}
	if m := g.mask; m != nil {
		dm := &DrawnMask{Er: m.er, OverLaminate: s.Stackup.Mask.OverLaminate, OverCopper: s.Stackup.Mask.OverCopper}
		dm.Y0, dm.Top = span(m.y0, m.top)
		for k := range 2 {
			if !m.coated[k] {
				continue
			}
			// The coat as the mesh tags it (mesh.go, place): inside the
			// side-wall faces at hw(y) + tc up the trace, and tc over its far face.
			t := g.tr[k]
			c := centre[k]
			ytop := t.yt + m.tc
			pts := []XY{{c - t.hwb - m.tc, m.y0}, {c + t.hwb + m.tc, m.y0}, {c + t.hwt + m.tc, t.yt}, {c + t.hwt + m.tc, ytop}, {c - t.hwt - m.tc, ytop}, {c - t.hwt - m.tc, t.yt}}
			for q := range pts {
				pts[q].Y = fy(pts[q].Y)
			}
			if g.down { // keep the outline counter-clockwise
				for a, b := 0, len(pts)-1; a < b; a, b = a+1, b-1 {
					pts[a], pts[b] = pts[b], pts[a]
				}
			}
			dm.Coats[k] = pts
		}
		d.Mask = dm
	}
	d.Walls[0], d.Walls[1] = wallsAt(g.x1, maxFoot(s), g.wallMargin(s), off)
	return d, nil
}

// sortLayers orders layers top to bottom (insertion sort: a stack has a few dozen).
func sortLayers(ls []DrawnLayer) {
	for i := 1; i < len(ls); i++ {
		for j := i; j > 0 && ls[j].Y1 > ls[j-1].Y1; j-- {
			ls[j], ls[j-1] = ls[j-1], ls[j]
		}
	}
}

// DrawnMesh is a mesh the solver solves, in a Drawing's frame: a structured
// grid of quadrilaterals, node (i, j) at X[i*(Ny+1)+j], Y[…], element (i, j)
// with corners (i, j), (i+1, j), (i+1, j+1), (i, j+1).
type DrawnMesh struct {
	Level    float64 // refinement level
	Unknowns int     // free nodes
	Nx, Ny   int     // elements per row and per column
	X, Y     []float64
	// Conductor marks the elements inside a trace (element (i, j) at i*Ny+j):
	// the solver fixes their nodes and assembles nothing there.
	Conductor []bool
	// Blend is the weight of a second topology at an offset inside a
	// transition window (topology.go), whose capacitances the solver mixes
	// with this mesh's; 0 outside a window. The mesh shown is the one with
	// the larger weight.
	Blend float64
}

// SweepMesh returns the mesh that Sweep(s, offsets) solves at offset off
// (one of the offsets, or the nominal one) at refinement level lev (the
// Coarse level of its points' Convergence; the Fine mesh halves every element
// of it). The sweep solves |δ| (the mirror, solvedOffsets); a negative
// offset's mesh is the mirror image of its positive twin's, as solved.
func (s *Section) SweepMesh(offsets []float64, off, lev float64) (*DrawnMesh, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	if len(offsets) == 0 {
		return nil, s.fieldErr("offsets", "no offsets")
	}
	if !(lev > 0) || math.IsInf(lev, 0) {
		return nil, fmt.Errorf("section %q: mesh level %g must be positive", s.Name, lev)
	}
	for _, o := range append([]float64{off}, offsets...) {
		if err := s.checkOffset(o, "offsets"); err != nil {
			return nil, err
		}
	}
	todo := s.solvedOffsets(append(offsets, off))
	sv, err := newSolver(s, nil, todo[0], todo[len(todo)-1])
	if err != nil {
		return nil, err
	}
	a := math.Abs(off)
	k, t := sv.locate(a)
	dm := &DrawnMesh{Level: lev, Blend: t}
	if t > 0.5 {
		k, dm.Blend = k+1, 1-t
	}
	p := sv.plan(k, lev)
	if n := p.unknownsEstimate(); n > maxMeshNodes {
		return nil, &ConvergenceError{Section: s.Name, Offset: off, Iterations: 1, Unknowns: n, Level: lev, Limit: maxMeshNodes, Finest: sv.finestAccuracy(), Residual: math.NaN()}
	}
	var w femWork
	p.realize(a, &w.m)
	if err := w.prepare(); err != nil {
		return nil, err
	}
	m := &w.m
	dm.Unknowns, dm.Nx, dm.Ny = w.nfree, m.nx, m.ny
	dm.X, dm.Y = m.x, m.y
	dm.Conductor = make([]bool, len(m.er))
	for e, er := range m.er {
		dm.Conductor[e] = er == 0
	}
	for n := range dm.X {
		if off < 0 {
			dm.X[n] = 2*sv.g.x1 - dm.X[n]
		}
		if sv.g.down {
			dm.Y[n] = -dm.Y[n]
		}
	}
	return dm, nil
}
