package figure

import (
	"testing"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/render"
)

// TestDarkAtTheBadEnd: every panel figure is dark where it is bad (one
// convention, so that a reader who learnt one map reads the next): each
// one-signed quantity of the drift map and the site yield of yield.png.
func TestDarkAtTheBadEnd(t *testing.T) {
	type end struct {
		name      string
		pal       *render.Palette
		bad, good float64
	}
	var ends []end
	for _, name := range Shows {
		s, ok := showOf(name, unit.MilInch)
		if !ok {
			t.Fatalf("show %q unknown", name)
		}
		pal, lo, hi := scaleFor(0.1, 1, s.badLow)
		bad, good := hi, lo
		if s.badLow {
			bad, good = lo, hi
		}
		ends = append(ends, end{"map --show " + name, pal, bad, good})
	}
	ends = append(ends, end{"yield.png", yieldPalette, 0.1, 1})
	for _, e := range ends {
		if render.Luma(e.pal.Map(e.bad, 0.1, 1)) >= render.Luma(e.pal.Map(e.good, 0.1, 1)) {
			t.Errorf("%s: the bad end (%g) is lighter than the good end (%g)", e.name, e.bad, e.good)
		}
	}
}
