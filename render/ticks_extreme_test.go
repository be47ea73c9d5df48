package render

import (
	"math"
	"testing"
)

// TestTicksExtreme: absurd but finite ranges give a finite tick list
// instead of an overflowing step count (an index out of range in ColorBar
// for a panel of 1e250 in).
func TestTicksExtreme(t *testing.T) {
	for _, r := range [][2]float64{{-1e250, 1e250}, {1e20, 1e20 + 1e4}, {-math.MaxFloat64, math.MaxFloat64}, {0, 1e-300}} {
		ticks, _ := Ticks(r[0], r[1], 8)
		if len(ticks) == 0 || len(ticks) > 8 {
			t.Errorf("Ticks(%g, %g): %d ticks", r[0], r[1], len(ticks))
		}
		for _, v := range ticks {
			slack := 1e-9 * (math.Abs(r[0]) + math.Abs(r[1])) // tickRange allows 1e-9 of a step of rounding
			if v < r[0]-slack || v > r[1]+slack {
				t.Errorf("Ticks(%g, %g): tick %g outside", r[0], r[1], v)
			}
		}
	}
}
