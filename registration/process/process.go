// Package process models the manufacturing variation of a panel beyond
// registration: the thickness and εr of a dielectric, the finished copper
// of a layer or one plating step, the etched width and etch factor of the
// traces on a layer, and the solder-mask coat, each varying from panel to
// panel, across the panel and from site to site.
//
// A Term moves one quantity of the stackup by
//
//	Δp(site) = panel + shape(x, y) + site
//
// where panel is drawn once per panel (fixed, normal or uniform, as the
// terms of a registration contributor), shape is a deterministic field over
// the panel with its own amplitude (Shape: a dome, an edge profile, a tilt or
// a measured grid) and site is an independent normal part of standard
// deviation SiteSigma at every site. So at a site the term's mean is
// Panel.Mean + Shape.At(p) and its variance Panel.Variance() + SiteSigma².
//
// Bind maps a term onto the parameters of a cross-section
// (section.Section.Params), whose coupling sensitivities the solver gives:
// the coupling of a site is then c(δ) + Σᵢ sᵢ(δ)·Δpᵢ, first order in the
// process terms (package drift evaluates it). Nothing here solves a field.
//
// The shapes follow common practice for where each process varies: pressed
// dielectric is thicker where the resin cannot flow out (the middle of the
// panel), electroplated copper is thicker toward the edges where the current
// crowds, etching drifts along the conveyor. Their amplitudes are the user's
// process data.
package process

import (
	"fmt"
	"math"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
)

// Quantity is what a term varies.
type Quantity int

const (
	Thickness Quantity = iota // a dielectric's thickness, m (on the mask: the coat, as Mask)
	Er                        // a dielectric's or the mask's relative permittivity
	Width                     // the foot width of the traces on a copper layer, m
	Etch                      // the undercut per side of the traces on a copper layer, m
	Copper                    // the finished thickness of a copper layer or one plating step, m
	Mask                      // the solder-mask coat, over the laminate and over the copper alike, m
)

var quantityNames = [...]string{"thickness", "er", "width", "etch", "copper", "mask"}

func (q Quantity) String() string {
	if q >= 0 && int(q) < len(quantityNames) {
		return quantityNames[q]
	}
	return fmt.Sprintf("Quantity(%d)", int(q))
}

// ParseQuantity returns the quantity named s, as a job file writes it.
func ParseQuantity(s string) (Quantity, bool) {
	for i, n := range quantityNames {
		if n == s {
			return Quantity(i), true
		}
	}
	return 0, false
}

// IsLength reports whether the quantity is a length (m); otherwise it is a
// relative permittivity (dimensionless).
func (q Quantity) IsLength() bool { return q != Er }

// ShapeKind is the form of a term's variation across the panel.
type ShapeKind int

const (
	Flat ShapeKind = iota // no variation across the panel
	Dome                  // paraboloid, Amplitude higher at the centre than at the middle of each edge
	Edge                  // Amplitude at the panel edge, decaying inward as exp(−d/Decay)
	Tilt                  // linear, Amplitude from one end to the other along x (or y)
	Grid                  // measured values at the nodes of a grid, bilinear between them
)

var shapeNames = [...]string{"flat", "dome", "edge", "tilt", "grid"}

func (k ShapeKind) String() string {
	if k >= 0 && int(k) < len(shapeNames) {
		return shapeNames[k]
	}
	return fmt.Sprintf("ShapeKind(%d)", int(k))
}

// ParseShapeKind returns the shape kind named s (not "flat", which a job
// file writes by giving no shape).
func ParseShapeKind(s string) (ShapeKind, bool) {
	for i, n := range shapeNames[1:] {
		if n == s {
			return ShapeKind(i + 1), true
		}
	}
	return 0, false
}

// Shape is the deterministic part of a term across the panel, in the
// panel frame (origin at the panel centre). The zero value is Flat: zero
// everywhere.
type Shape struct {
	Kind ShapeKind
	// Amplitude is the dome's centre minus the middle of an edge, the edge
	// profile's value at the edge, the tilt's change from end to end (m, or
	// units of εr); unused by a grid.
	Amplitude float64
	// Decay is the edge profile's 1/e length, m, > 0.
	Decay float64
	// AlongY tilts along y instead of x.
	AlongY bool
	// Values is the grid's field: its DX holds the value at each node (DY is
	// unused), interpolated bilinearly and held at the edges
	// (registration.Grid.At).
	Values *registration.Grid
}

// At returns the shape's value at p on a panel of size size (x, y).
//
//	dome: A·(1 − (2x/W)² − (2y/H)²): A at the centre, 0 at the middle of
//	      each edge, −A at the corners; radially symmetric on a square panel
//	edge: A·exp(−d/L), d = min(W/2 − |x|, H/2 − |y|) the distance to the
//	      nearest edge: A at the edge, A/e at d = L
//	tilt: A·x/W (or A·y/H): 0 at the centre, ±A/2 at the ends
//	grid: bilinear between the nodes
func (s *Shape) At(p, size panel.Vec) float64 {
	switch s.Kind {
	case Dome:
		u, v := 2*p.X/size.X, 2*p.Y/size.Y
		return s.Amplitude * (1 - u*u - v*v)
	case Edge:
		d := math.Max(0, math.Min(size.X/2-math.Abs(p.X), size.Y/2-math.Abs(p.Y)))
		return s.Amplitude * math.Exp(-d/s.Decay)
	case Tilt:
		if s.AlongY {
			return s.Amplitude * p.Y / size.Y
		}
		return s.Amplitude * p.X / size.X
	case Grid:
		return s.Values.At(p).X
	}
	return 0
}

// Range returns the smallest and largest value of the shape over the
// rectangle |x| ≤ half.X, |y| ≤ half.Y about the centre of a panel of size
// size (the usable area inside the border).
func (s *Shape) Range(half, size panel.Vec) (lo, hi float64) {
	switch s.Kind {
	case Dome, Tilt:
		// Extremes at the centre (the dome's top), the middles of the
		// sides and the corners.
		lo, hi = math.Inf(1), math.Inf(-1)
		for _, p := range []panel.Vec{{}, {X: half.X}, {Y: half.Y}, half} {
			for _, sg := range [][2]float64{{1, 1}, {-1, 1}, {1, -1}, {-1, -1}} {
				v := s.At(panel.Vec{X: sg[0] * p.X, Y: sg[1] * p.Y}, size)
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
		return lo, hi
	case Edge:
		// Monotone in the distance to the edge: at the border and at the
		// centre of the usable area.
		a := s.At(half, size)
		b := s.At(panel.Vec{}, size)
		return math.Min(a, b), math.Max(a, b)
	case Grid:
		lo, hi = math.Inf(1), math.Inf(-1)
		for _, row := range s.Values.DX {
			for _, v := range row {
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
		return lo, hi
	}
	return 0, 0
}

// Term is one process variation term.
type Term struct {
	Name string
	// On is what the term acts on, as written: a dielectric's name, a copper
	// layer's name, a plating step "L1/2" (1-based) or "mask".
	On string
	// Layer is the stackup layer's name ("" for the mask) and Step the
	// plating step, 1-based (0: the whole layer).
	Layer    string
	Step     int
	Quantity Quantity
	// Panel is the panel-to-panel part: fixed, normal or uniform.
	Panel registration.Term
	// Shape is the across-panel part.
	Shape Shape
	// SiteSigma is the standard deviation of the independent per-site part.
	SiteSigma float64
	// File is the included file the term was read from, as messages name
	// it; "" for a term of the job file itself (or one built in code).
	File string
}

// Mean returns the term's mean at p on a panel of size size.
func (t *Term) Mean(p, size panel.Vec) float64 { return t.Panel.Mean + t.Shape.At(p, size) }

// Variance returns the term's variance at a site: the panel part's and the
// site part's.
func (t *Term) Variance() float64 { return t.Panel.Variance() + t.SiteSigma*t.SiteSigma }

// Kinds returns the section parameters the term moves, each by Δp: a
// coat of mask moves both of its thicknesses.
func (t *Term) Kinds() []section.ParamKind {
	switch t.Quantity {
	case Thickness:
		if t.Layer == "" {
			return []section.ParamKind{section.ParamMaskLaminate, section.ParamMaskCopper}
		}
		return []section.ParamKind{section.ParamThickness}
	case Er:
		if t.Layer == "" {
			return []section.ParamKind{section.ParamMaskEr}
		}
		return []section.ParamKind{section.ParamEr}
	case Width:
		return []section.ParamKind{section.ParamWidth}
	case Etch:
		return []section.ParamKind{section.ParamEtch}
	case Copper:
		return []section.ParamKind{section.ParamCopper}
	case Mask:
		return []section.ParamKind{section.ParamMaskLaminate, section.ParamMaskCopper}
	}
	return nil
}

// Model is the process variation of a panel: its terms and the panel size
// their shapes are drawn over.
type Model struct {
	Size  panel.Vec // panel size, m
	Terms []Term
}

// Binding is one term's effect on one section: the indices, into the
// parameters of the section's curve (section.Curve.Params), whose coupling
// sensitivities add up to the term's.
type Binding struct {
	Term   int // index into Model.Terms
	Params []int
}

// Bind returns the bindings of the terms that move a parameter of sec,
// whose curve's sensitivities are listed by params (section.Curve.Params).
// A term on a layer outside the section's domain (beyond its grounds) does
// not bind. It reports false with the name of the first term whose
// parameter sec has but params lacks (a curve solved without
// sensitivities, or for another section).
func (m *Model) Bind(sec *section.Section, params []section.Param) ([]Binding, string, bool) {
	if m == nil {
		return nil, "", true
	}
	var out []Binding
	for i := range m.Terms {
		t := &m.Terms[i]
		b := Binding{Term: i}
		for _, k := range t.Kinds() {
			p, ok := sec.FindParam(t.Layer, k)
			if !ok {
				continue
			}
			idx := -1
			for j := range params {
				if params[j].Key == p.Key && params[j].Kind == p.Kind {
					idx = j
				}
			}
			if idx < 0 {
				return nil, t.Name, false
			}
			b.Params = append(b.Params, idx)
		}
		if len(b.Params) > 0 {
			out = append(out, b)
		}
	}
	return out, "", true
}

// Empty reports whether m has no terms (m may be nil).
func (m *Model) Empty() bool { return m == nil || len(m.Terms) == 0 }
