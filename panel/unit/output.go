package unit

import "fmt"

// Output is the choice of units for what regdrift writes: tables, CSV headers
// and figure axes. Lengths (offsets, displacements, widths) and panel
// coordinates are shown in a pair of units that belong together: mil with
// inches, or µm with millimetres. JSON stays SI whatever the choice.
//
// The zero value is MilInch, the default.
type Output int

const (
	MilInch  Output = iota // lengths in mil, panel coordinates in in
	MicronMM               // lengths in um, panel coordinates in mm
)

// ParseOutput reads an output unit choice by its length unit: "mil" (or "")
// for MilInch, "um" or "µm" for MicronMM.
func ParseOutput(s string) (Output, error) {
	switch s {
	case "mil", "":
		return MilInch, nil
	case "um", "µm":
		return MicronMM, nil
	}
	return MilInch, fmt.Errorf("want mil or um, not %q", s)
}

// Length returns the name of the length unit: "mil" or "um".
func (o Output) Length() string {
	if o == MicronMM {
		return "um"
	}
	return "mil"
}

// LengthSI returns the size of the length unit in metres.
func (o Output) LengthSI() float64 {
	if o == MicronMM {
		return Micrometre
	}
	return Mil
}

// Panel returns the name of the unit of panel coordinates: "in" or "mm".
func (o Output) Panel() string {
	if o == MicronMM {
		return "mm"
	}
	return "in"
}

// PanelSI returns the size of the panel-coordinate unit in metres.
func (o Output) PanelSI() float64 {
	if o == MicronMM {
		return Millimetre
	}
	return Inch
}

// String returns the length unit's name, as ParseOutput reads it.
func (o Output) String() string { return o.Length() }
