package section

import (
	"errors"
	"fmt"
	"math"
)

// Physical constants, exact or CODATA 2018 SI values.
const (
	// SpeedOfLight is the speed of light in vacuum, m/s (exact, SI 2019).
	SpeedOfLight = 299792458.0
	// Mu0 is the vacuum permeability, H/m (CODATA 2018, 1.25663706212e-6).
	Mu0 = 1.25663706212e-6
	// Eps0 is the vacuum permittivity, F/m, 1/(μ0·c²).
	Eps0 = 1 / (Mu0 * SpeedOfLight * SpeedOfLight)
	// Eta0 is the impedance of free space, μ0·c, ohm (376.730313…).
	Eta0 = Mu0 * SpeedOfLight
)

const mil = 25.4e-6 // 1 mil = 25.4 µm exactly; used only in messages and defaults

// LayerKind says whether a stackup layer is copper or dielectric.
type LayerKind int

const (
	Copper LayerKind = iota
	Dielectric
)

func (k LayerKind) String() string {
	switch k {
	case Copper:
		return "copper"
	case Dielectric:
		return "dielectric"
	}
	return fmt.Sprintf("LayerKind(%d)", int(k))
}

// Layer is one entry of a stackup, listed top to bottom as on a fabrication drawing.
type Layer struct {
	Name      string    // copper layer name ("L3"); optional for dielectrics, unique when given
	Kind      LayerKind // Copper or Dielectric
	Thickness float64   // m, finished (copper: foil plus plating); a copper thickness of 0 is an ideal zero-thickness strip
	Er        float64   // relative permittivity (dielectrics only)
	Core      bool      // dielectric: true = core, false = prepreg
	// Copper only, optional: the base foil and each plating step, m. When
	// either is given, Thickness must be their sum (FinishedThickness); the
	// solver uses Thickness, these record how it was built so that a picture
	// or a variation term can address one step.
	Foil    float64
	Plating []float64
}

// Stackup is a list of layers, top to bottom, and an optional solder mask
// over the outer copper of a microstrip.
type Stackup struct {
	Layers []Layer
	Mask   *Mask // nil: no mask
}

// Mask is a solder-mask coat over the outer copper of a microstrip (the face
// of the stack away from its ground). Over the bare laminate it is a slab
// OverLaminate thick on the laminate face; over a trace it is OverCopper
// thick on the trace's far face and, measured horizontally, on its side walls
// (square outer corners); where the two overlap the coat is their union.
type Mask struct {
	OverLaminate float64 // m, > 0
	OverCopper   float64 // m, > 0
	Er           float64 // relative permittivity, >= 1
}

// Copper weight. A foil's weight in ounces per square foot converts to a
// thickness through the mass of the ounce and the area of the foot (both
// exact by definition: 28.349523125 g and 0.09290304 m², so 1 oz/ft² =
// 305.1517 g/m²) and the density of the copper.
const (
	// OunceMass is the avoirdupois ounce, kg (exact, 1959 international yard and pound).
	OunceMass = 28.349523125e-3
	// SquareFoot is 1 ft², m² (exact: 0.3048² m²).
	SquareFoot = 0.09290304
	// CopperDensity is the density of pure copper at 20 °C, kg/m³: the
	// handbook value 8.96 g/cm³ (CRC Handbook of Chemistry and Physics,
	// "Physical constants of inorganic compounds", copper). Rolled and
	// electrodeposited foil is within about 1 % of it.
	CopperDensity = 8960.0
	// OzThickness is the thickness of 1 oz/ft² of copper at CopperDensity:
	// 305.1517 g/m² / 8.96 g/cm³ = 34.057 µm = 1.3408 mil.
	OzThickness = OunceMass / SquareFoot / CopperDensity
)

// CopperWeightThickness returns the thickness, m, of a copper foil of weight
// oz ounces per square foot (OzThickness per ounce).
func CopperWeightThickness(oz float64) float64 { return oz * OzThickness }

// FinishedThickness returns a copper layer's finished thickness: the foil
// plus every plating step, m.
func FinishedThickness(foil float64, plating []float64) float64 {
	t := foil
	for _, p := range plating {
		t += p
	}
	return t
}

// Trace is one conductor of the coupled pair.
type Trace struct {
	Layer string  // copper layer name
	Width float64 // foot width (on the face of the dielectric the trace was etched on), m
	Etch  float64 // undercut per side at the far face, m (far-face width = Width - 2*Etch), >= 0
	X     float64 // lateral position of the centre, m (design position, before offset)
}

// Spec is the coupling specification of a section.
type Spec struct{ Coupling, Tolerance float64 } // dB; Coupling negative (e.g. -3.0), Tolerance > 0

// Section is a coupled pair of traces in a stackup.
//
// Offsets: the offset of a section is the lateral centre-to-centre offset of the
// upper trace (Traces[0]) relative to the lower one (Traces[1]), x_upper − x_lower.
// The nominal offset is Traces[0].X − Traces[1].X + DesignOffset (see NominalOffset).
// When the section is solved at an offset δ, the lower trace stays at Traces[1].X and
// the upper trace is placed at Traces[1].X + δ.
type Section struct {
	Name         string
	Stackup      Stackup
	Traces       [2]Trace // upper first
	Grounds      []string // copper layers that are planes (1 = microstrip, air above; 2 = stripline)
	Frequency    float64  // f0, Hz
	Length       float64  // coupled length, m; 0 = quarter wave at f0 for the mean εeff at the nominal offset
	ZRef         float64  // port reference impedance, ohm
	Spec         Spec
	DesignOffset float64 // intended lateral offset of the upper trace relative to the lower, m
}

// NominalOffset returns the design centre-to-centre offset of the upper trace
// relative to the lower: Traces[0].X − Traces[1].X + DesignOffset.
func (s *Section) NominalOffset() float64 {
	return s.Traces[0].X - s.Traces[1].X + s.DesignOffset
}

// FieldError reports a bad value in a section. Key names the field in the job
// file's terms ("traces[1].etch", "stackup.layers[4].er", "offsets") so that a
// loader can map it back to a file line.
type FieldError struct {
	Section string // section name
	Key     string // field key
	Err     error  // what is wrong
}

func (e *FieldError) Error() string {
	return fmt.Sprintf("section %q: %s: %v", e.Section, e.Key, e.Err)
}

func (e *FieldError) Unwrap() error { return e.Err }

// ErrRange is wrapped by every FieldError for a value outside its physical range.
var ErrRange = errors.New("out of range")

type rangeError string

func (r rangeError) Error() string        { return string(r) }
func (r rangeError) Is(target error) bool { return target == ErrRange }

func (s *Section) fieldErr(key, format string, args ...any) error {
	return &FieldError{Section: s.Name, Key: key, Err: rangeError(fmt.Sprintf(format, args...))}
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// mils formats a length in mil for messages (users think in mil).
func mils(v float64) string { return fmt.Sprintf("%.4g mil", v/mil) }

// copperIndex returns the stackup index of the copper layer named name, or -1.
func (s *Section) copperIndex(name string) (int, bool) {
	for i, l := range s.Stackup.Layers {
		if l.Name == name {
			return i, l.Kind == Copper
		}
	}
	return -1, false
}

// Validate checks that the section is physically meaningful. The error is a
// *FieldError naming the section and the offending key.
func (s *Section) Validate() error {
	if err := s.checkPlausible(); err != nil { // limits.go
		return err
	}
	ls := s.Stackup.Layers
	if len(ls) == 0 {
		return s.fieldErr("stackup.layers", "empty stackup")
	}
	names := map[string]int{}
	for i, l := range ls {
		key := fmt.Sprintf("stackup.layers[%d]", i)
		if !finite(l.Thickness) || l.Thickness < 0 || (l.Kind == Dielectric && l.Thickness == 0) {
			return s.fieldErr(key+".thickness", "thickness %s must be positive", mils(l.Thickness))
		}
		if l.Name != "" {
			if j, dup := names[l.Name]; dup {
				return s.fieldErr(key+".name", "layer name %q repeats layer %d", l.Name, j)
			}
			names[l.Name] = i
		}
		if l.Kind != Copper && (l.Foil != 0 || len(l.Plating) > 0) {
			return s.fieldErr(key+".foil", "a dielectric has no foil or plating")
		}
		switch l.Kind {
		case Dielectric:
			if !finite(l.Er) || l.Er < 1 {
				return s.fieldErr(key+".er", "relative permittivity %g must be at least 1", l.Er)
			}
		case Copper:
			if l.Name == "" {
				return s.fieldErr(key+".name", "copper layer has no name")
			}
			if err := s.checkBuild(key, l); err != nil {
				return err
			}
			if i > 0 && ls[i-1].Kind == Copper {
				return s.fieldErr(key, "copper layer %q touches copper layer %q: a dielectric must separate them", l.Name, ls[i-1].Name)
			}
		default:
			return s.fieldErr(key, "unknown layer kind %d", int(l.Kind))
		}
	}
	switch len(s.Grounds) {
	case 1, 2:
	default:
		return s.fieldErr("grounds", "need 1 ground (microstrip) or 2 (stripline), have %d", len(s.Grounds))
	}
	var gi [2]int
	for k, g := range s.Grounds {
		key := fmt.Sprintf("grounds[%d]", k)
		i, cu := s.copperIndex(g)
		if i < 0 {
			return s.fieldErr(key, "layer %q is not in the stackup", g)
		}
		if !cu {
			return s.fieldErr(key, "layer %q is not copper", g)
		}
		gi[k] = i
	}
	if len(s.Grounds) == 2 && gi[0] == gi[1] {
		return s.fieldErr("grounds[1]", "ground %q is listed twice", s.Grounds[1])
	}
	var ti [2]int
	for k, t := range s.Traces {
		key := fmt.Sprintf("traces[%d]", k)
		i, cu := s.copperIndex(t.Layer)
		if i < 0 {
			return s.fieldErr(key+".layer", "layer %q is not in the stackup", t.Layer)
		}
		if !cu {
			return s.fieldErr(key+".layer", "layer %q is not copper", t.Layer)
		}
		for _, g := range s.Grounds {
			if g == t.Layer {
				return s.fieldErr(key+".layer", "layer %q is a ground plane", t.Layer)
			}
		}
		ti[k] = i
		if !finite(t.Width) || t.Width <= 0 {
			return s.fieldErr(key+".width", "width %s must be positive", mils(t.Width))
		}
		if !finite(t.Etch) || t.Etch < 0 {
			return s.fieldErr(key+".etch", "etch %s must not be negative", mils(t.Etch))
		}
		if t.Width-2*t.Etch <= 0 {
			return s.fieldErr(key+".etch", "etch %s per side leaves no top width", mils(t.Etch))
		}
		// Even isotropic etching undercuts no more than it etches deep (etch
		// factor ≥ 1; 2 to 4 is typical [common practice]); an undercut of more
		// than twice the copper thickness is almost surely a unit slip.
		if th := ls[i].Thickness; t.Etch > maxUndercut*th {
			return s.fieldErr(key+".etch", "etch %s per side is more than %g times the copper thickness %s (etch factor below %g)", mils(t.Etch), maxUndercut, mils(th), 1/maxUndercut)
		}
		if !finite(t.X) || math.Abs(t.X) > 1 {
			return s.fieldErr(key+".x", "position %s is not a lateral position in a cross-section", mils(t.X))
		}
	}
	if err := s.checkMask(ti); err != nil {
		return err
	}
	if ti[0] > ti[1] {
		return s.fieldErr("traces[0].layer", "upper trace %q lies below trace %q: list the upper trace first", s.Traces[0].Layer, s.Traces[1].Layer)
	}
	if len(s.Grounds) == 2 {
		lo, hi := min(gi[0], gi[1]), max(gi[0], gi[1])
		for k := range 2 {
			if ti[k] < lo || ti[k] > hi {
				return s.fieldErr(fmt.Sprintf("traces[%d].layer", k), "layer %q is not between the grounds %q and %q", s.Traces[k].Layer, s.Grounds[0], s.Grounds[1])
			}
		}
		for i := lo + 1; i < hi; i++ {
			if _, isG := s.groundAt(i); isG {
				return s.fieldErr("grounds", "a ground lies between the two grounds")
			}
		}
	} else if (ti[0] < gi[0]) != (ti[1] < gi[0]) {
		return s.fieldErr("traces[1].layer", "microstrip traces %q and %q lie on opposite sides of ground %q", s.Traces[0].Layer, s.Traces[1].Layer, s.Grounds[0])
	}
	if !finite(s.DesignOffset) || math.Abs(s.DesignOffset) > 1 {
		return s.fieldErr("design_offset", "offset %s is not a lateral offset in a cross-section", mils(s.DesignOffset))
	}
	if ti[0] == ti[1] {
		if err := s.checkOffset(s.NominalOffset(), "traces[1].x"); err != nil {
			return err
		}
	}
	if !finite(s.Frequency) || s.Frequency <= 0 {
		return s.fieldErr("frequency", "frequency %g Hz must be positive", s.Frequency)
	}
	if !finite(s.Length) || s.Length < 0 {
		return s.fieldErr("length", "length %s must be positive (0 = quarter wave)", mils(s.Length))
	}
	if !finite(s.ZRef) || s.ZRef <= 0 {
		return s.fieldErr("z_ref", "reference impedance %g ohm must be positive", s.ZRef)
	}
	if !finite(s.Spec.Coupling) || s.Spec.Coupling >= 0 {
		return s.fieldErr("spec.coupling", "coupling %g dB must be negative", s.Spec.Coupling)
	}
	if !finite(s.Spec.Tolerance) || s.Spec.Tolerance <= 0 {
		return s.fieldErr("spec.tolerance", "tolerance %g dB must be positive", s.Spec.Tolerance)
	}
	return nil
}

func (s *Section) groundAt(i int) (string, bool) {
	for _, g := range s.Grounds {
		if s.Stackup.Layers[i].Name == g {
			return g, true
		}
	}
	return "", false
}

// checkOffset reports whether the section can be solved at offset off: traces on
// one layer must not touch, and the offset must stay within maxOffsetSpans domain
// heights plus the trace widths (further out the coupling is nil and the value
// is almost surely a unit slip).
func (s *Section) checkOffset(off float64, key string) error {
	if !finite(off) {
		return s.fieldErr(key, "offset %v is not a number", off)
	}
	i0, _ := s.copperIndex(s.Traces[0].Layer)
	i1, _ := s.copperIndex(s.Traces[1].Layer)
	t0, t1 := s.Traces[0], s.Traces[1]
	if i0 == i1 {
		// Same slab: the wider of foot and far face decides contact.
		gap := math.Abs(off) - (t0.Width+t1.Width)/2
		if gap <= 0 {
			return s.fieldErr(key, "traces on layer %q overlap at offset %s", t0.Layer, mils(off))
		}
		if m := s.Stackup.Mask; m != nil && s.maskCoats(i0) && gap <= 2*m.OverCopper*(1+maskGapMargin) {
			return s.fieldErr(key, "the solder mask on the side walls of the traces on layer %q fills their gap at offset %s (gap %s, mask %s per wall); the solver needs a gap between the coats", t0.Layer, mils(off), mils(gap), mils(m.OverCopper))
		}
	}
	h := s.domainHeight()
	if lim := maxOffsetSpans*h + t0.Width + t1.Width; math.Abs(off) > lim {
		return s.fieldErr(key, "offset %s is wider than the section's domain (±%s: %d domain heights of %s plus the trace widths)", mils(off), mils(lim), maxOffsetSpans, mils(h))
	}
	return nil
}

// maxUndercut is the largest undercut per side, in copper thicknesses.
const maxUndercut = 2.0

// maxOffsetSpans bounds offsets to this many domain heights: beyond about 5
// heights a stripline's coupling is below −100 dB.
const maxOffsetSpans = 20

// maskGapMargin is the least gap left between the side-wall coats of an
// edge-coupled pair, as a fraction of the coat: below it the mesh would need
// elements much thinner than the coat.
const maskGapMargin = 0.1

// checkBuild checks a copper layer's foil and plating against its finished thickness.
func (s *Section) checkBuild(key string, l Layer) error {
	if l.Foil == 0 && len(l.Plating) == 0 {
		return nil
	}
	if !finite(l.Foil) || l.Foil < 0 {
		return s.fieldErr(key+".foil", "foil %s must not be negative", mils(l.Foil))
	}
	for k, p := range l.Plating {
		if !finite(p) || p <= 0 {
			return s.fieldErr(fmt.Sprintf("%s.plating[%d]", key, k), "plating step %s must be positive", mils(p))
		}
	}
	if t := FinishedThickness(l.Foil, l.Plating); math.Abs(t-l.Thickness) > 1e-9*t {
		return s.fieldErr(key+".thickness", "finished thickness %s is not foil plus plating (%s)", mils(l.Thickness), mils(t))
	}
	return nil
}

// outerSlab returns the stackup index of the outermost layer of a
// microstrip's domain (the face away from its ground), or -1 for a stripline.
func (s *Section) outerSlab() int {
	if len(s.Grounds) != 1 {
		return -1
	}
	gi, _ := s.copperIndex(s.Grounds[0])
	ti, _ := s.copperIndex(s.Traces[0].Layer)
	if ti < gi {
		return 0
	}
	return len(s.Stackup.Layers) - 1
}

// layerIndex returns the stackup index of the layer named name (-1 if none).
func (s *Section) layerIndex(name string) int {
	i, _ := s.copperIndex(name)
	return i
}

// maskCoats reports whether the mask coats traces on stackup layer i: a
// mask is present and i is the outer copper layer of a microstrip.
func (s *Section) maskCoats(i int) bool {
	o := s.outerSlab()
	return s.Stackup.Mask != nil && o >= 0 && o == i && s.Stackup.Layers[i].Kind == Copper
}

// checkMask validates the solder mask; ti are the traces' stackup indices.
func (s *Section) checkMask(ti [2]int) error {
	m := s.Stackup.Mask
	if m == nil {
		return nil
	}
	if len(s.Grounds) != 1 {
		return s.fieldErr("stackup.mask", "a solder mask needs a microstrip (one ground, air above the outer copper); this section is a stripline")
	}
	if !finite(m.OverLaminate) || m.OverLaminate <= 0 {
		return s.fieldErr("stackup.mask.thickness", "mask thickness over the laminate %s must be positive", mils(m.OverLaminate))
	}
	if !finite(m.OverCopper) || m.OverCopper <= 0 {
		return s.fieldErr("stackup.mask.over_copper", "mask thickness over the copper %s must be positive", mils(m.OverCopper))
	}
	if !finite(m.Er) || m.Er < 1 {
		return s.fieldErr("stackup.mask.er", "mask relative permittivity %g must be at least 1", m.Er)
	}
	if ti[0] != ti[1] && (s.maskCoats(ti[0]) || s.maskCoats(ti[1])) {
		return s.fieldErr("stackup.mask", "a solder mask over a broadside pair with a trace on the outer layer is not modelled (only over an edge-coupled pair, or over an outer layer without traces)")
	}
	return nil
}
