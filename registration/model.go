package registration

import (
	"errors"
	"fmt"
	"math"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
)

// TermKind names one of the six affine terms. The terms are listed once, in
// the table behind Info; everything that reads, writes or shows a term (the
// job loader, the fit output, the contributor writer) walks that table, and
// Basis gives each term's displacement.
type TermKind int

const (
	OffsetX  TermKind = iota // m
	OffsetY                  // m
	Rotation                 // rad, counter-clockwise
	ScaleX                   // strain
	ScaleY                   // strain
	Skew                     // strain: x displacement per unit y
	NumTerms = 6
)

// TermInfo describes a term: its name in files and outputs, the quantity it
// measures and the unit it is shown in.
type TermInfo struct {
	Key  string    // job-file key and output column, e.g. "scale_x"
	Kind unit.Kind // unit.Length, unit.Angle or unit.Strain
	// Unit is the unit in which tables and written files show the term. A
	// length term has none here: it follows the output length unit (see
	// TermKind.Unit).
	Unit string
}

// terms is the term table, one row per TermKind. A term added to the
// constants without a row here gets an empty one, which TestTermTable
// rejects, as it rejects a term without a Basis.
var terms = [NumTerms]TermInfo{
	OffsetX:  {"offset_x", unit.Length, ""},
	OffsetY:  {"offset_y", unit.Length, ""},
	Rotation: {"rotation", unit.Angle, "urad"},
	ScaleX:   {"scale_x", unit.Strain, "ppm"},
	ScaleY:   {"scale_y", unit.Strain, "ppm"},
	Skew:     {"skew", unit.Strain, "ppm"},
}

// Info returns the table entry of term k. It panics for a k outside
// [0, NumTerms), which is a programming error.
func (k TermKind) Info() TermInfo { return terms[k] }

// String returns the job-file key of the term, e.g. "scale_x".
func (k TermKind) String() string {
	if k >= 0 && int(k) < NumTerms {
		return terms[k].Key
	}
	return fmt.Sprintf("TermKind(%d)", int(k))
}

// Unit returns the unit term k is shown in under the output choice o: the
// output length unit for an offset, the table's unit otherwise.
func (k TermKind) Unit(o unit.Output) string {
	if terms[k].Kind == unit.Length {
		return o.Length()
	}
	return terms[k].Unit
}

// JSONKey returns the key of term k in JSON outputs, which are SI with the
// unit in the key: "offset_x_m", "rotation_rad", and "scale_x" for a strain.
func (k TermKind) JSONKey() string {
	switch terms[k].Kind {
	case unit.Length:
		return terms[k].Key + "_m"
	case unit.Angle:
		return terms[k].Key + "_rad"
	}
	return terms[k].Key
}

// TermByKey returns the term whose job-file key is key.
func TermByKey(key string) (TermKind, bool) {
	for k := range terms {
		if terms[k].Key == key {
			return TermKind(k), true
		}
	}
	return 0, false
}

// Dist is the distribution of a term across panels.
type Dist int

const (
	Fixed   Dist = iota // the mean, always
	Normal              // mean ± Spread as one standard deviation
	Uniform             // mean ± Spread as half-width
)

// Term is one affine term of a contributor. The zero value is a fixed zero.
type Term struct {
	Mean   float64
	Spread float64 // sigma for Normal, half-width for Uniform, unused for Fixed
	Dist   Dist
}

// Variance returns the term's variance across panels.
func (t Term) Variance() float64 {
	switch t.Dist {
	case Normal:
		return t.Spread * t.Spread
	case Uniform:
		return t.Spread * t.Spread / 3
	}
	return 0
}

// SD returns the term's standard deviation.
func (t Term) SD() float64 { return math.Sqrt(t.Variance()) }

// Contributor is one source of misregistration applied to the layers it names.
//
// A contributor moves each layer it names by the same realisation of its
// terms, scaled by the layer's weight: Weights, when not nil, holds one
// factor per entry of Layers (nil is a weight of 1 on each). Weights other
// than 1 let a set of contributors carry the joint distribution of several
// layers measured on the same panels (see LotContributors): a layer moved by
// w_A·t and another by w_B·t are offset by (w_A − w_B)·t.
type Contributor struct {
	Name      string
	Layers    []string
	Weights   []float64 // per layer of Layers; nil means 1 for each
	Terms     [NumTerms]Term
	SiteSigma float64 // isotropic per-site random displacement, one sigma per axis, m
	Residual  *Grid   // measured residual displacement, added to the mean; may be nil
}

// Names reports whether c names layer.
func (c *Contributor) Names(layer string) bool {
	for _, l := range c.Layers {
		if l == layer {
			return true
		}
	}
	return false
}

// Weight returns the factor c moves layer by: 0 for a layer it does not
// name, else its entry of Weights (1 when Weights is nil).
func (c *Contributor) Weight(layer string) float64 {
	for i, l := range c.Layers {
		if l == layer {
			if c.Weights == nil {
				return 1
			}
			return c.Weights[i]
		}
	}
	return 0
}

// MaxWeight bounds a contributor's layer weights. The weights written by
// LotContributors are at most 1 in magnitude; a larger bound leaves room for
// hand-written models without letting an absurd factor overflow the sums.
const MaxWeight = 1000

// Model is the registration error model of a panel.
type Model struct {
	Datum        panel.Vec
	Contributors []Contributor
}

// Validate checks that sigmas are non-negative and values finite; errors name
// the contributor and the term.
func (m *Model) Validate() error {
	for i, c := range m.Contributors {
		key := fmt.Sprintf("contributor[%d]", i)
		if len(c.Layers) == 0 {
			return &FieldError{key + ".layers", errors.New("a contributor names at least one layer")}
		}
		if c.Weights != nil && len(c.Weights) != len(c.Layers) {
			return &FieldError{key + ".weights", fmt.Errorf("want one weight per layer (%d), not %d", len(c.Layers), len(c.Weights))}
		}
		for _, w := range c.Weights {
			if math.IsNaN(w) || math.IsInf(w, 0) || math.Abs(w) > MaxWeight {
				return &FieldError{key + ".weights", fmt.Errorf("weights must be finite and within ±%g, not %g", float64(MaxWeight), w)}
			}
		}
		for k, t := range c.Terms {
			tk := key + "." + TermKind(k).String()
			if math.IsNaN(t.Mean) || math.IsInf(t.Mean, 0) || math.IsNaN(t.Spread) || math.IsInf(t.Spread, 0) {
				return &FieldError{tk, errors.New("values must be finite")}
			}
			if t.Spread < 0 {
				return &FieldError{tk, errors.New("sigma and half_width must be non-negative")}
			}
		}
		if !(c.SiteSigma >= 0) || math.IsInf(c.SiteSigma, 0) {
			return &FieldError{key + ".site_sigma", errors.New("site_sigma must be non-negative and finite")}
		}
	}
	return nil
}

// FieldError is an invalid model entry; Key names it as in the job file.
type FieldError struct {
	Key string
	Err error
}

func (e *FieldError) Error() string { return e.Key + ": " + e.Err.Error() }
func (e *FieldError) Unwrap() error { return e.Err }

// Basis returns the displacement per unit of each term at p for datum p0:
// d(p) = Σ_k term_k · Basis(p, p0)[k].
func Basis(p, p0 panel.Vec) [NumTerms]panel.Vec {
	r := p.Sub(p0)
	return [NumTerms]panel.Vec{
		OffsetX:  {X: 1},
		OffsetY:  {Y: 1},
		Rotation: {X: -r.Y, Y: r.X}, // θ·ẑ×r
		ScaleX:   {X: r.X},
		ScaleY:   {Y: r.Y},
		Skew:     {X: r.Y},
	}
}

// Displace returns the displacement at p of an affine field with terms v.
func Displace(v [NumTerms]float64, p, p0 panel.Vec) panel.Vec {
	b := Basis(p, p0)
	var d panel.Vec
	for k := range b {
		d.X += v[k] * b[k].X
		d.Y += v[k] * b[k].Y
	}
	return d
}

// MeanDisplacement returns the mean displacement of layer at p: the sum of the
// mean terms and residual grids of every contributor that names it.
func (m *Model) MeanDisplacement(layer string, p panel.Vec) panel.Vec {
	var d panel.Vec
	for i := range m.Contributors {
		c := &m.Contributors[i]
		w := c.Weight(layer)
		if w == 0 {
			continue
		}
		var v [NumTerms]float64
		for k := range v {
			v[k] = w * c.Terms[k].Mean
		}
		d = d.Add(Displace(v, p, m.Datum))
		if c.Residual != nil {
			r := c.Residual.At(p)
			d = d.Add(panel.Vec{X: w * r.X, Y: w * r.Y})
		}
	}
	return d
}
