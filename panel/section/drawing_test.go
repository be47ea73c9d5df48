package section

import (
	"math"
	"testing"
)

// drawTol is the tolerance of the drawing's lengths: they are sums of the
// stackup's thicknesses taken in another order, so they agree to rounding
// (1e-15 m is a billionth of a micrometre, about 40 ulps of a 60 mil stack).
const drawTol = 1e-15

// drawingCases are invented sections covering each kind of domain: a
// broadside stripline on one core, an offset broadside pair across two cores
// with a prepreg between, an edge-coupled microstrip with mask above its
// ground, and one below its ground (the domain runs down the stack).
func drawingCases() []struct {
	name string
	s    *Section
	off  float64
} {
	twoCore := demoSection()
	twoCore.Name = "two-core"
	twoCore.Stackup.Layers = []Layer{
		{Name: "L2", Kind: Copper, Thickness: 1.4 * testMil},
		{Name: "CA", Kind: Dielectric, Thickness: 26 * testMil, Er: 3.48, Core: true},
		{Name: "L3", Kind: Copper, Thickness: 1.4 * testMil},
		{Name: "P1", Kind: Dielectric, Thickness: 4 * testMil, Er: 3.00},
		{Name: "L4", Kind: Copper, Thickness: 1.4 * testMil, Foil: 0.6 * testMil, Plating: []float64{0.5 * testMil, 0.3 * testMil}},
		{Name: "CB", Kind: Dielectric, Thickness: 26 * testMil, Er: 3.48, Core: true},
		{Name: "L5", Kind: Copper, Thickness: 1.4 * testMil},
	}
	twoCore.Traces[0].Width = 22 * testMil
	twoCore.DesignOffset = 21 * testMil
	micro := withMask(edgeMicro(10*testMil, 12*testMil, 8*testMil, 1.9*testMil, 3.48), 0.8*testMil, 0.5*testMil, 3.8)
	micro.Traces[0].Etch, micro.Traces[1].Etch = 0.5*testMil, 0.5*testMil
	below := withMask(edgeMicro(10*testMil, 12*testMil, 8*testMil, 1.9*testMil, 3.48), 0.7*testMil, 0.4*testMil, 3.6)
	ls := below.Stackup.Layers
	below.Stackup.Layers = []Layer{ls[2], ls[1], ls[0]}
	below.Traces[0].Etch, below.Traces[1].Etch = 0.4*testMil, 0.4*testMil
	below.Name = "below"
	return []struct {
		name string
		s    *Section
		off  float64
	}{
		{"broadside", demoSection(), 2 * testMil},
		{"two-core offset", twoCore, twoCore.NominalOffset()},
		{"microstrip with mask", micro, micro.NominalOffset()},
		{"microstrip below ground", below, -below.NominalOffset()},
	}
}

// TestDrawingGeometry checks the drawing against the section it draws: the
// layers inside the domain are contiguous, each as thick as its stackup
// layer, and together as high as the stackup between the grounds; the
// grounds bound them; each trace has the job's foot and far-face widths on
// its own copper layer's faces, and the centres are the offset apart; the
// mask's coat is as thick as given over the laminate and the copper.
func TestDrawingGeometry(t *testing.T) {
	for _, tc := range drawingCases() {
		t.Run(tc.name, func(t *testing.T) {
			s := tc.s
			d, err := s.Drawing(tc.off)
			if err != nil {
				t.Fatal(err)
			}
			ls := s.Stackup.Layers
			// The stack height between the grounds (or from the ground to the
			// outer face), straight from the stackup.
			gi := []int{s.layerIndex(s.Grounds[0])}
			if len(s.Grounds) == 2 {
				gi = append(gi, s.layerIndex(s.Grounds[1]))
			} else if ti := s.layerIndex(s.Traces[0].Layer); ti < gi[0] {
				gi = append(gi, -1)
			} else {
				gi = append(gi, len(ls))
			}
			lo, hi := min(gi[0], gi[1]), max(gi[0], gi[1])
			want := 0.0
			for i := lo + 1; i < hi; i++ {
				want += ls[i].Thickness
			}
			if got := d.Top - d.Bottom; math.Abs(got-want) > drawTol {
				t.Errorf("domain height %g, stackup between the grounds %g", got, want)
			}
			sum, grounds := 0.0, 0
			for k, l := range d.Layers {
				if got, w := l.Y1-l.Y0, ls[l.Index].Thickness; math.Abs(got-w) > drawTol {
					t.Errorf("layer %d drawn %g thick, stackup %g", l.Index, got, w)
				}
				if k > 0 && math.Abs(d.Layers[k-1].Y0-l.Y1) > drawTol {
					t.Errorf("layers %d and %d do not meet", d.Layers[k-1].Index, l.Index)
				}
				if k > 0 && d.Layers[k-1].Index > l.Index {
					t.Errorf("layer %d drawn above layer %d: not in stackup order", d.Layers[k-1].Index, l.Index)
				}
				if l.Ground {
					grounds++
					if l.Y1 > d.Bottom+drawTol && l.Y0 < d.Top-drawTol {
						t.Errorf("ground %d inside the domain", l.Index)
					}
					continue
				}
				sum += l.Y1 - l.Y0
			}
			if math.Abs(sum-want) > drawTol || grounds != len(s.Grounds) {
				t.Errorf("layers sum to %g (want %g), %d grounds (want %d)", sum, want, grounds, len(s.Grounds))
			}
			if got := d.Traces[0].Centre - d.Traces[1].Centre; math.Abs(got-tc.off) > drawTol {
				t.Errorf("centres %g apart, offset %g", got, tc.off)
			}
			for k, tr := range d.Traces {
				job := s.Traces[k]
				c := tr.Corners
				lowW, highW := c[1].X-c[0].X, c[2].X-c[3].X
				foot, far := lowW, highW
				if !tr.FootLow {
					foot, far = highW, lowW
				}
				if math.Abs(foot-job.Width) > drawTol || math.Abs(far-(job.Width-2*job.Etch)) > drawTol ||
					tr.Foot != job.Width || math.Abs(tr.Far-(job.Width-2*job.Etch)) > drawTol {
					t.Errorf("trace %d: foot %g far %g, job width %g etch %g", k, foot, far, job.Width, job.Etch)
				}
				var slab DrawnLayer
				for _, l := range d.Layers {
					if ls[l.Index].Name == job.Layer {
						slab = l
					}
				}
				if tr.Y0 != slab.Y0 || tr.Y1 != slab.Y1 || c[0].Y != tr.Y0 || c[2].Y != tr.Y1 {
					t.Errorf("trace %d spans %g..%g, its layer %g..%g", k, tr.Y0, tr.Y1, slab.Y0, slab.Y1)
				}
				if math.Abs((c[0].X+c[1].X)/2-tr.Centre) > drawTol {
					t.Errorf("trace %d not centred on %g", k, tr.Centre)
				}
			}
			if m := s.Stackup.Mask; m != nil {
				dm := d.Mask
				if dm == nil || math.Abs(math.Abs(dm.Top-dm.Y0)-m.OverLaminate) > drawTol {
					t.Fatalf("mask %+v, want %g over the laminate", dm, m.OverLaminate)
				}
				// The coat's outer face is the one away from the ground: up
				// the page for a stack above its ground, down for one below.
				dir := 1.0
				if d.Bottom < 0 {
					dir = -1
				}
				for k, coat := range dm.Coats {
					tr := d.Traces[k]
					face := tr.Y1
					if dir < 0 {
						face = tr.Y0
					}
					outer := math.Inf(-1)
					var xl, xr float64
					for _, p := range coat {
						if v := dir * p.Y; v > outer {
							outer, xl, xr = v, p.X, p.X
						} else if v == outer {
							xl, xr = math.Min(xl, p.X), math.Max(xr, p.X)
						}
					}
					if got := outer - dir*face; math.Abs(got-m.OverCopper) > drawTol || math.Abs(xr-xl-(tr.Far+2*m.OverCopper)) > drawTol {
						t.Errorf("coat %d: %g over the trace, %g wide; want %g and %g", k, got, xr-xl, m.OverCopper, tr.Far+2*m.OverCopper)
					}
					if area := shoelace(coat); !(area > 0) {
						t.Errorf("coat %d outline not counter-clockwise (area %g)", k, area)
					}
				}
			}
			if d.Walls[0] >= d.Traces[1].Corners[0].X || d.Walls[1] <= d.Traces[0].Corners[1].X {
				t.Errorf("walls %v do not enclose the traces", d.Walls)
			}
		})
	}
}

// TestSweepMesh checks the exported mesh against the drawing: every trace
// corner is a mesh node (the mesh follows the conductors), the conductor
// elements lie inside the traces, the outer nodes are on the walls, and a
// negative offset's mesh is the mirror image of its positive twin's.
func TestSweepMesh(t *testing.T) {
	for _, tc := range drawingCases() {
		t.Run(tc.name, func(t *testing.T) {
			s := tc.s
			offs := []float64{tc.off - testMil, tc.off, tc.off + testMil}
			m, err := s.SweepMesh(offs, tc.off, 1)
			if err != nil {
				t.Fatal(err)
			}
			d, err := s.Drawing(tc.off)
			if err != nil {
				t.Fatal(err)
			}
			if len(m.X) != (m.Nx+1)*(m.Ny+1) || len(m.Conductor) != m.Nx*m.Ny || m.Unknowns <= 0 {
				t.Fatalf("mesh %d×%d with %d nodes, %d elements", m.Nx, m.Ny, len(m.X), len(m.Conductor))
			}
			// A corner is a node to within the rounding of the grading.
			const nodeTol = 1e-12
			for k, tr := range d.Traces {
				for _, c := range tr.Corners {
					best := math.Inf(1)
					for n := range m.X {
						best = math.Min(best, math.Hypot(m.X[n]-c.X, m.Y[n]-c.Y))
					}
					if best > nodeTol {
						t.Errorf("trace %d corner %v is %g from the nearest node", k, c, best)
					}
				}
			}
			nc := 0
			for i := range m.Nx {
				for j := range m.Ny {
					if !m.Conductor[i*m.Ny+j] {
						continue
					}
					nc++
					n := i*(m.Ny+1) + j
					x := (m.X[n] + m.X[n+m.Ny+1] + m.X[n+m.Ny+2] + m.X[n+1]) / 4
					y := (m.Y[n] + m.Y[n+1]) / 2
					in := false
					for _, tr := range d.Traces {
						c := tr.Corners
						if y > tr.Y0 && y < tr.Y1 && x > math.Min(c[0].X, c[3].X) && x < math.Max(c[1].X, c[2].X) {
							in = true
						}
					}
					if !in {
						t.Fatalf("conductor element (%d, %d) at (%g, %g) outside the traces", i, j, x, y)
					}
				}
			}
			if nc == 0 && s.Stackup.Layers[s.layerIndex(s.Traces[0].Layer)].Thickness > 0 {
				t.Error("no conductor elements")
			}
			w0, w1 := math.Inf(1), math.Inf(-1)
			for _, x := range m.X {
				w0, w1 = math.Min(w0, x), math.Max(w1, x)
			}
			if math.Abs(w0-d.Walls[0]) > nodeTol || math.Abs(w1-d.Walls[1]) > nodeTol {
				t.Errorf("mesh spans %g..%g, walls %v", w0, w1, d.Walls)
			}
			neg, err := s.SweepMesh(offs, -tc.off, 1)
			if tc.s.Traces[0].Layer == tc.s.Traces[1].Layer {
				return // an edge-coupled pair's −δ is the traces swapped; same mesh family
			}
			if err != nil {
				t.Fatal(err)
			}
			x1 := s.Traces[1].X
			for n := range m.X {
				if math.Abs(neg.X[n]-(2*x1-m.X[n])) > nodeTol || neg.Y[n] != m.Y[n] {
					t.Fatalf("node %d: mirror (%g, %g) of (%g, %g)", n, neg.X[n], neg.Y[n], m.X[n], m.Y[n])
				}
			}
		})
	}
}

// TestDrawingBadInput checks that the drawing refuses what the solver refuses.
func TestDrawingBadInput(t *testing.T) {
	s := edgeMicro(10*testMil, 12*testMil, 8*testMil, 1.9*testMil, 3.48)
	if _, err := s.Drawing(5 * testMil); err == nil {
		t.Error("overlapping edge-coupled traces drawn")
	}
	b := demoSection()
	b.Traces[0].Width = -1
	if _, err := b.Drawing(0); err == nil {
		t.Error("negative width drawn")
	}
	if _, err := demoSection().SweepMesh([]float64{0, testMil}, 0, 0); err == nil {
		t.Error("level 0 meshed")
	}
}

// shoelace returns the signed area of a polygon, positive counter-clockwise
// (the surveyor's formula).
func shoelace(p []XY) float64 {
	a := 0.0
	for i := range p {
		q := p[(i+1)%len(p)]
		a += p[i].X*q.Y - q.X*p[i].Y
	}
	return a / 2
}
