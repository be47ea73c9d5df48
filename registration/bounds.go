package registration

import (
	"fmt"
	"math"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
)

// Plausibility bounds of the registration inputs: the largest magnitude a
// term's mean, sigma or half-width, a per-site sigma, a measured residual or
// a measured displacement may have. They are not limits of a process; they
// catch a value typed in the wrong unit, and they keep every figure derived
// from the model (offsets, statistics, JSON) finite.
const (
	// MaxMovement bounds lengths (offset_x, offset_y, site_sigma, residual
	// grids, measured displacements): layer-to-layer misregistration on a
	// production panel is tens to a few hundred micrometres, so a layer that
	// moved an inch (25.4 mm) has left the part it belongs to; "5 in" typed
	// for "5 mil" is caught.
	MaxMovement = 25.4e-3 // m
	// MaxRotation bounds rotations. The model is first order in θ: its
	// error θ²r/2 is 0.19 µm at 1 mrad on the corner of an 18 x 24 in
	// panel, and 1.9 mm at 0.1 rad, where the model no longer describes
	// the movement. A rotation in degrees typed as rad is caught.
	MaxRotation = 0.1 // rad
	// MaxStrain bounds scale and skew: material movement through
	// lamination is some hundreds of ppm, 10 % is 100,000 ppm; "200 %" or
	// "200 mil/in" typed for ppm is caught.
	MaxStrain = 0.1 // plain
)

// MaxTerm returns the plausibility bound of a quantity of kind k in the
// registration model (MaxMovement, MaxRotation or MaxStrain), or +Inf for a
// kind the model has no bound for.
func MaxTerm(k unit.Kind) float64 {
	switch k {
	case unit.Length:
		return MaxMovement
	case unit.Angle:
		return MaxRotation
	case unit.Strain:
		return MaxStrain
	}
	return math.Inf(1)
}

// CheckTerm returns an error when |v|, a registration quantity of kind k,
// is above its plausibility bound (MaxTerm), saying what the bound is.
func CheckTerm(v float64, k unit.Kind) error {
	max := MaxTerm(k)
	if math.Abs(v) <= max {
		return nil
	}
	return fmt.Errorf("%s is not a plausible registration %s: at most %s", formatSI(v, k), k, formatSI(max, k))
}

// checkPosition returns an error when a coordinate is not on any panel
// regdrift takes (|v| > panel.MaxPanelSize).
func checkPosition(v float64) error {
	if math.Abs(v) <= panel.MaxPanelSize {
		return nil
	}
	return fmt.Errorf("%s is not a plausible position on a panel: at most %g m from its centre", formatSI(v, unit.Length), panel.MaxPanelSize)
}

// formatSI writes v in a unit people read for kind k (mm, mrad, ppm), or
// in SI for an absurd value, which the small unit would overflow.
func formatSI(v float64, k unit.Kind) string {
	big := math.Abs(v) >= 1
	switch {
	case k == unit.Length && !big:
		return fmt.Sprintf("%.4g mm", v/unit.Millimetre)
	case k == unit.Length:
		return fmt.Sprintf("%.4g m", v)
	case k == unit.Angle && !big:
		return fmt.Sprintf("%.4g mrad", v/unit.Milliradian)
	case k == unit.Angle:
		return fmt.Sprintf("%.4g rad", v)
	case k == unit.Strain && !big:
		return fmt.Sprintf("%.4g ppm", v/unit.PPM)
	}
	return fmt.Sprintf("%.4g", v)
}
