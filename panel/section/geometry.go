package section

import "math"

// band is one horizontal slab of the solution domain, in domain coordinates:
// y is measured from the (lower) ground's inner face outward, through the stack.
type band struct {
	y0, y1 float64
	er     float64 // permittivity of the band (resin of the neighbouring prepreg in a trace slab)
	trace  int     // index of the trace in this slab, or -1; both traces: 2
	src    int     // stackup index of the dielectric whose εr fills the band; srcAir outside the stack
	layer  int     // stackup index of the layer the band is (a copper slab's own index); -1 outside the stack
}

// Permittivity sources of an element that are not a stackup layer.
const (
	srcAir  = -1
	srcMask = -2
)

// maskGeom is the solder mask in domain coordinates (see Mask).
type maskGeom struct {
	y0     float64 // laminate face under the outer copper slab
	top    float64 // y0 + OverLaminate
	tc     float64 // coat over the copper
	er     float64
	coated [2]bool // trace k stands in the outer slab and is coated
}

// traceGeom is one trapezoidal trace in domain coordinates.
type traceGeom struct {
	yb, yt   float64 // lower and upper face (equal for an ideal zero-thickness strip)
	hwb, hwt float64 // half widths at the lower and upper face
	slab     int     // index of the copper layer in the stackup
	footLow  bool    // the foot (the etched-from face) is the lower face
}

// halfWidth returns the half width of the trace at height y inside its slab.
func (t *traceGeom) halfWidth(y float64) float64 {
	if t.yt <= t.yb {
		return t.hwb
	}
	u := (y - t.yb) / (t.yt - t.yb)
	u = math.Max(0, math.Min(1, u))
	return t.hwb + u*(t.hwt-t.hwb)
}

// geometry is the cross-section reduced to what the field solver needs.
type geometry struct {
	micro  bool    // one ground, open (air) above the stack
	bands  []band  // bottom to top, contiguous
	stackH float64 // stripline: b, the ground-to-ground distance; microstrip: height of the stack above the ground
	tr     [2]traceGeom
	same   bool    // both traces in one copper slab (edge-coupled)
	x1     float64 // centre of the lower trace (Traces[1].X); Traces[0] is placed at x1 + offset
	// openSpans places a microstrip's Dirichlet box this many (stack height +
	// 2·widest trace + nominal offset) away (openSpans; tests vary it).
	openSpans float64
	// Column topology (see topology.go): the x order of the four trace edges
	// and the offsets over which plans of this topology count elements.
	order [4]edgeRef
	offLo float64
	offHi float64
	mask  *maskGeom // nil without a solder mask
	// down: domain-up is stackup-down (a microstrip below its ground);
	// the picture turns it back (drawing.go).
	down bool
}

// edgeRef names one side of one trace.
type edgeRef struct {
	trace int
	right bool
}

// buildGeometry converts the stackup convention (package doc, Conventions)
// into domain bands.
// s must be valid.
func (s *Section) buildGeometry() *geometry {
	ls := s.Stackup.Layers
	g := &geometry{x1: s.Traces[1].X, openSpans: openSpans}
	gi0, _ := s.copperIndex(s.Grounds[0])
	ti0, _ := s.copperIndex(s.Traces[0].Layer)
	ti1, _ := s.copperIndex(s.Traces[1].Layer)
	g.same = ti0 == ti1
	// order lists stackup indices from the ground outward (stripline: from the
	// lower ground upward); up tells whether domain-up is stackup-up.
	var order []int
	up := true
	if len(s.Grounds) == 2 {
		gi1, _ := s.copperIndex(s.Grounds[1])
		lo, hi := min(gi0, gi1), max(gi0, gi1)
		for i := hi - 1; i > lo; i-- {
			order = append(order, i)
		}
	} else {
		g.micro = true
		if ti0 < gi0 {
			for i := gi0 - 1; i >= 0; i-- {
				order = append(order, i)
			}
		} else {
			up = false
			for i := gi0 + 1; i < len(ls); i++ {
				order = append(order, i)
			}
		}
	}
	er := func(i int) float64 { // permittivity of stackup layer i, air outside the stack
		if i < 0 || i >= len(ls) {
			return 1
		}
		return ls[i].Er
	}
	src := func(i int) int {
		if i < 0 || i >= len(ls) {
			return srcAir
		}
		return i
	}
	isCore := func(i int) bool { return i >= 0 && i < len(ls) && ls[i].Kind == Dielectric && ls[i].Core }
	isDiel := func(i int) bool { return i >= 0 && i < len(ls) && ls[i].Kind == Dielectric }
	y := 0.0
	for _, i := range order {
		l := ls[i]
		b := band{y0: y, y1: y + l.Thickness, er: l.Er, trace: -1, src: i, layer: i}
		if l.Kind == Copper {
			// A copper slab: the trace stands on the face of the dielectric it was
			// etched on, a core face if the slab touches exactly one core, else the
			// dielectric below (package doc, Conventions); the rest of the slab is
			// resin of the dielectric on the far side (air for an outer layer).
			footBelow := true // in stackup orientation
			switch {
			case isCore(i+1) && !isCore(i-1):
				footBelow = true
			case isCore(i-1) && !isCore(i+1):
				footBelow = false
			default:
				footBelow = isDiel(i + 1)
			}
			resin, rs := er(i-1), src(i-1)
			if !footBelow {
				resin, rs = er(i+1), src(i+1)
			}
			b.er, b.src = resin, rs
			for k := range 2 {
				if ls[i].Name != s.Traces[k].Layer {
					continue
				}
				t := s.Traces[k]
				foot, far := t.Width/2, t.Width/2-t.Etch
				if l.Thickness == 0 {
					far = foot
				}
				// footLow: the foot is at the lower face in domain coordinates.
				footLow := footBelow == up
				tg := traceGeom{yb: b.y0, yt: b.y1, slab: i, footLow: footLow}
				if footLow {
					tg.hwb, tg.hwt = foot, far
				} else {
					tg.hwb, tg.hwt = far, foot
				}
				g.tr[k] = tg
				if b.trace == -1 {
					b.trace = k
				} else {
					b.trace = 2
				}
			}
		}
		if b.y1 > b.y0 {
			g.bands = append(g.bands, b)
		}
		y = b.y1
	}
	g.stackH = y
	g.down = !up
	if m := s.Stackup.Mask; m != nil && g.micro {
		mg := &maskGeom{y0: y, tc: m.OverCopper, er: m.Er}
		if o := order[len(order)-1]; ls[o].Kind == Copper {
			mg.y0 = y - ls[o].Thickness
			for k := range 2 {
				mg.coated[k] = g.tr[k].slab == o && ls[o].Name == s.Traces[k].Layer
			}
		}
		mg.top = mg.y0 + m.OverLaminate
		g.mask = mg
	}
	return g
}

// splitTol is the least distance, m, between a mask face and another row:
// 1 nm (4e−5 mil), far below any coat and far above rounding. Faces closer
// than that are one row; so is a face moved by the step of a shape
// derivative (shapeStep·feature, 1e−11 m for a 0.4 mil feature), so that
// the derivative keeps the band structure where a coat's top meets another
// face (there the coat's surface has a kink and the derivative is that of
// one side).
const splitTol = 1e-9

// maskSplits returns the heights at which the mask adds node rows.
func (g *geometry) maskSplits() []float64 {
	m := g.mask
	if m == nil {
		return nil
	}
	out := []float64{m.top}
	for k := range 2 {
		if m.coated[k] {
			out = append(out, g.tr[k].yt+m.tc)
		}
	}
	return out
}

// splitBands splits bands at every height in at that lies inside one, more
// than splitTol from its faces (a coat whose top meets another face within
// rounding adds no row).
func splitBands(bands []band, at []float64) []band {
	for _, y := range at {
		for i := 0; i < len(bands); i++ {
			b := bands[i]
			if y > b.y0+splitTol && y < b.y1-splitTol {
				lo, hi := b, b
				lo.y1, hi.y0 = y, y
				bands = append(bands[:i], append([]band{lo, hi}, bands[i+1:]...)...)
				break
			}
		}
	}
	return bands
}

// domainHeight returns the ground-to-ground distance (stripline) or the height
// of the stack above the ground (microstrip).
func (s *Section) domainHeight() float64 { return s.buildGeometry().stackH }
