// Package unit parses and formats the dimensional values of regdrift's job files,
// measurement files and command-line flags, reads the units in CSV headers
// ("x [in]", see ParseHeader) and holds the choice of output units (Output).
//
// Every dimensional value in a file or flag carries its unit ("20 mil", "0.5 mm",
// "+150 ppm", "35 urad", "2.45 GHz", "-3.0 dB", "50 ohm"); inside the program every
// value is SI in float64 (metres, radians, plain strain, hertz, ohms), and dB stays dB.
// A bare number where a unit is needed is an error that names the units accepted.
//
// Length units use the international inch of 1959: 1 in = 25.4 mm exactly and
// 1 mil = 0.001 in = 25.4 µm exactly.
package unit

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"unicode"
)

// Kind is the physical quantity a value measures.
type Kind int

const (
	Length    Kind = iota // metres
	Strain                // plain number (scale, skew): 1 ppm = 1e-6
	Angle                 // radians
	Frequency             // hertz
	Decibel               // dB, kept as dB
	Impedance             // ohms
)

var kindNames = [...]string{"length", "strain", "angle", "frequency", "level", "impedance"}

func (k Kind) String() string {
	if int(k) < len(kindNames) {
		return kindNames[k]
	}
	return fmt.Sprintf("Kind(%d)", int(k))
}

// Length units in metres.
const (
	Metre      = 1.0
	Centimetre = 1e-2
	Millimetre = 1e-3
	Micrometre = 1e-6
	Inch       = 25.4e-3 // exact by the 1959 international yard and pound agreement
	Mil        = 25.4e-6 // 0.001 in
)

// Strain, angle and frequency units in SI.
const (
	PPM         = 1e-6
	MilPerIn    = 1e-3 // 1 mil/in = 1000 ppm
	Radian      = 1.0
	Milliradian = 1e-3
	Microradian = 1e-6
	Degree      = math.Pi / 180
	Arcminute   = Degree / 60
	Arcsecond   = Degree / 3600
	Hertz       = 1.0
	Kilohertz   = 1e3
	Megahertz   = 1e6
	Gigahertz   = 1e9
)

// factors maps each kind's unit names to the size of one unit in SI.
// Names are matched exactly, except that the "µ" (micro sign U+00B5) and
// "μ" (Greek mu U+03BC) spellings are both accepted for "u".
var factors = [...]map[string]float64{
	Length: {
		"m": Metre, "cm": Centimetre, "mm": Millimetre, "um": Micrometre,
		"in": Inch, "mil": Mil, "mils": Mil, "thou": Mil,
	},
	Strain: {
		"ppm": PPM, "mil/in": MilPerIn, "um/m": PPM, "mm/m": 1e-3, "%": 1e-2,
	},
	Angle: {
		"rad": Radian, "mrad": Milliradian, "urad": Microradian,
		"deg": Degree, "arcmin": Arcminute, "arcsec": Arcsecond,
	},
	Frequency: {
		"Hz": Hertz, "kHz": Kilohertz, "MHz": Megahertz, "GHz": Gigahertz,
	},
	Decibel: {
		"dB": 1,
	},
	Impedance: {
		"ohm": 1, "ohms": 1, "Ohm": 1, "Ω": 1,
	},
}

// preferred lists, per kind, the unit names shown in messages, in order.
var preferred = [...][]string{
	Length:    {"in", "mil", "mm", "um", "m"},
	Strain:    {"ppm", "mil/in"},
	Angle:     {"rad", "mrad", "urad", "deg", "arcsec"},
	Frequency: {"Hz", "kHz", "MHz", "GHz"},
	Decibel:   {"dB"},
	Impedance: {"ohm"},
}

// Error kinds, for errors.Is.
var (
	ErrNoUnit      = errors.New("missing unit")
	ErrUnknownUnit = errors.New("unknown unit")
	ErrNumber      = errors.New("not a number")
	ErrNotFinite   = errors.New("not finite")
)

// Error is a value that could not be parsed.
type Error struct {
	Value string
	Kind  Kind
	Err   error
}

func (e *Error) Error() string {
	switch {
	case errors.Is(e.Err, ErrNoUnit):
		return fmt.Sprintf("%q: a %s needs a unit (%s)", e.Value, e.Kind, Accepted(e.Kind))
	case errors.Is(e.Err, ErrUnknownUnit):
		return fmt.Sprintf("%q: unknown %s unit (want %s)", e.Value, e.Kind, Accepted(e.Kind))
	case errors.Is(e.Err, ErrNotFinite):
		return fmt.Sprintf("%q: %s must be finite", e.Value, e.Kind)
	}
	return fmt.Sprintf("%q: %v (want a number and a %s unit such as %s)", e.Value, e.Err, e.Kind, Accepted(e.Kind))
}

func (e *Error) Unwrap() error { return e.Err }

// Accepted returns the unit names of kind k for messages, e.g. "in, mil, mm, um, m".
func Accepted(k Kind) string {
	if int(k) >= len(preferred) {
		return ""
	}
	return strings.Join(preferred[k], ", ")
}

// Factor returns the size in SI of one unit named name of kind k.
func Factor(k Kind, name string) (float64, bool) {
	if int(k) >= len(factors) || k < 0 {
		return 0, false
	}
	f, ok := factors[k][normalizeName(name)]
	return f, ok
}

func normalizeName(name string) string {
	name = strings.TrimSpace(name)
	name = strings.ReplaceAll(name, "µ", "u")
	name = strings.ReplaceAll(name, "μ", "u")
	return name
}

// Parse reads a number followed by a unit of kind k, with or without a space
// between them, and returns the value in SI (dB for Decibel).
func Parse(s string, k Kind) (float64, error) {
	num, name := split(s)
	if num == "" {
		return 0, &Error{s, k, ErrNumber}
	}
	v, err := strconv.ParseFloat(num, 64)
	if err != nil {
		return 0, &Error{s, k, ErrNumber}
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, &Error{s, k, ErrNotFinite}
	}
	if name == "" {
		return 0, &Error{s, k, ErrNoUnit}
	}
	f, ok := Factor(k, name)
	if !ok {
		return 0, &Error{s, k, ErrUnknownUnit}
	}
	v *= f
	if math.IsInf(v, 0) {
		return 0, &Error{s, k, ErrNotFinite}
	}
	return v, nil
}

// split separates the leading number of s from the unit that follows it.
func split(s string) (num, name string) {
	s = strings.TrimSpace(s)
	i := 0
	if i < len(s) && (s[i] == '+' || s[i] == '-') {
		i++
	}
	digits := false
	for i < len(s) && (s[i] >= '0' && s[i] <= '9' || s[i] == '.') {
		digits = true
		i++
	}
	if digits && i < len(s) && (s[i] == 'e' || s[i] == 'E') {
		j := i + 1
		if j < len(s) && (s[j] == '+' || s[j] == '-') {
			j++
		}
		if j < len(s) && s[j] >= '0' && s[j] <= '9' {
			for j < len(s) && s[j] >= '0' && s[j] <= '9' {
				j++
			}
			i = j
		}
	}
	if !digits {
		// Let ParseFloat report words such as "NaN" and "Inf".
		j := i
		for j < len(s) && unicode.IsLetter(rune(s[j])) {
			j++
		}
		w := strings.ToLower(s[i:j])
		if w == "nan" || w == "inf" || w == "infinity" {
			return s[:j], strings.TrimSpace(s[j:])
		}
		return "", s
	}
	return s[:i], strings.TrimSpace(s[i:])
}

// Format writes v (SI) in the named unit of kind k with the given number of
// decimals, as Parse reads it back: Format(25.4e-6, Length, "mil", 2) = "1.00 mil".
// It panics if the unit is unknown, which is a programming error.
func Format(v float64, k Kind, name string, decimals int) string {
	f, ok := Factor(k, name)
	if !ok {
		panic("unit: unknown " + k.String() + " unit " + name)
	}
	return strconv.FormatFloat(v/f, 'f', decimals, 64) + " " + name
}

// In returns v (SI) expressed in the named unit of kind k.
func In(v float64, k Kind, name string) float64 {
	f, ok := Factor(k, name)
	if !ok {
		panic("unit: unknown " + k.String() + " unit " + name)
	}
	return v / f
}

// Range is an arithmetic progression From, From+Step, ... up to To (inclusive
// within a small tolerance), in SI.
type Range struct{ From, To, Step float64 }

// ParseRange reads "FROM:TO:STEP" with a unit on each part, as in "-2mil:2mil:0.5mil".
func ParseRange(s string, k Kind) (Range, error) {
	parts := strings.Split(s, ":")
	if len(parts) != 3 {
		return Range{}, fmt.Errorf("%q: want FROM:TO:STEP, each with a %s unit", s, k)
	}
	var v [3]float64
	for i, p := range parts {
		x, err := Parse(p, k)
		if err != nil {
			return Range{}, err
		}
		v[i] = x
	}
	r := Range{v[0], v[1], v[2]}
	if r.Step <= 0 {
		return Range{}, fmt.Errorf("%q: the step must be positive", s)
	}
	if r.To < r.From {
		return Range{}, fmt.Errorf("%q: TO is below FROM", s)
	}
	if (r.To-r.From)/r.Step > 1e5 {
		return Range{}, fmt.Errorf("%q: more than 100000 steps", s)
	}
	return r, nil
}

// Values lists the points of the range; the last is To when the span is a whole
// number of steps (within 1e-9 of a step).
func (r Range) Values() []float64 {
	n := int(math.Floor((r.To-r.From)/r.Step + 1e-9))
	out := make([]float64, 0, n+1)
	for i := 0; i <= n; i++ {
		out = append(out, r.From+float64(i)*r.Step)
	}
	return out
}

// Names returns the unit names known for kind k, sorted.
func Names(k Kind) []string {
	var out []string
	for n := range factors[k] {
		out = append(out, n)
	}
	sort.Strings(out)
	return out
}
