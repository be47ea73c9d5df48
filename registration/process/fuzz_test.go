package process

import (
	"math"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
)

// FuzzReadGrid feeds the grid reader: it must not panic, and a grid it
// accepts has strictly increasing nodes and reproduces its node values.
func FuzzReadGrid(f *testing.F) {
	for _, s := range []string{
		"x [in],y [in],value [mil]\n-9,-12,0.1\n9,-12,0.3\n-9,12,0\n9,12,0.5\n",
		"x [in],y [in],value\n0,0,0.02\n",
		"X [mm],Y [mm],Value [um]\n1,2,3\n",
		"x [in],y [in],value [mil]\n0,0,1\n0,0,2\n",
		"x [in];y [in];value [mil]\n",
		"\ufeffx [in],y [in],value [mil]\n1e308,0,1\n",
	} {
		f.Add(s, true)
		f.Add(s, false)
	}
	f.Fuzz(func(t *testing.T, s string, length bool) {
		g, err := ReadGrid(strings.NewReader(s), "fuzz.csv", length)
		if err != nil {
			return
		}
		for _, a := range [][]float64{g.X, g.Y} {
			for i := 1; i < len(a); i++ {
				if !(a[i] > a[i-1]) {
					t.Fatalf("nodes not increasing: %v", a)
				}
			}
		}
		sh := Shape{Kind: Grid, Values: g}
		for j, y := range g.Y {
			for i, x := range g.X {
				v := sh.At(panel.Vec{X: x, Y: y}, panel.Vec{X: 1, Y: 1})
				if want := g.DX[j][i]; math.Abs(v-want) > 1e-9*math.Max(1, math.Abs(want)) {
					t.Fatalf("node (%g, %g): %g, want %g", x, y, v, want)
				}
			}
		}
	})
}
