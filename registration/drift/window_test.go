package drift

import (
	"math"
	"testing"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// TestWindowUsed: the share of the allowed offsets that mean ± 3σ reaches,
// on its worse side, for a design offset of 10 mil allowed from 8 to 11 mil
// (2 mil below, 1 mil above). Expected values are worked here by hand.
func TestWindowUsed(t *testing.T) {
	const mil = unit.Mil
	// A share is a few float64 operations on values near 1: its rounding
	// error is a few ulps, far below this.
	const shareTol = 1e-12
	c := &Curve{Section: &section.Section{DesignOffset: 10 * mil}, Allowed: registration.Interval{Lo: 8 * mil, Hi: 11 * mil}}
	for _, tt := range []struct {
		name     string
		mean, sd float64
		want     float64
	}{
		{"at the design, no spread", 10 * mil, 0, 0},
		{"spread alone, the narrow side decides", 10 * mil, 0.1 * mil, 0.3},    // 0.3/1 above, 0.3/2 below
		{"towards the narrow side", 10.5 * mil, 0.1 * mil, 0.8},                // (0.5+0.3)/1
		{"towards the wide side", 9 * mil, 0.1 * mil, 0.65},                    // (1+0.3)/2
		{"3σ touches the upper edge", 10.4 * mil, 0.2 * mil, 1},                // (0.4+0.6)/1
		{"mean beyond the window", 11.5 * mil, 0.1 * mil, 1.8},                 // (1.5+0.3)/1
		{"far below: wide side past its edge", 7 * mil, 0, 1.5},                // 3/2
		{"mean below, spread reaching above", 9.9 * mil, 0.5 * mil, 1.4 / 1.0}, // max((−0.1+1.5)/1, (0.1+1.5)/2)
	} {
		t.Run(tt.name, func(t *testing.T) {
			if got := WindowUsed(c, tt.mean, tt.sd); math.Abs(got-tt.want) > shareTol {
				t.Errorf("WindowUsed(%.2f mil ± %.2f) = %.15g, want %g", tt.mean/mil, tt.sd/mil, got, tt.want)
			}
		})
	}
	out := &Curve{Section: c.Section, Allowed: registration.EmptyInterval()}
	if got := WindowUsed(out, 10*mil, 0); !math.IsInf(got, 1) {
		t.Errorf("design out of spec: WindowUsed = %g, want +Inf", got)
	}
}
