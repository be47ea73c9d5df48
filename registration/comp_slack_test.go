package registration

import (
	"math"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
)

// TestCompensateSlackBudget: a drill budget far beyond anything the artwork
// bound can reach gives the compensation of no budget (it used to make
// gonum's simplex method panic at 1e8 mil) and says why.
func TestCompensateSlackBudget(t *testing.T) {
	m, sites := twoCores(), compGrid(9, 11, 16*in, 22*in, panel.Vec{X: 1}, "L3", "L4")
	none, err := Compensate(m, sites, &CompSettings{Objective: Worst})
	if err != nil {
		t.Fatal(err)
	}
	huge, err := Compensate(m, sites, &CompSettings{Objective: Worst, DrillBudget: 1e8 * 25.4e-6})
	if err != nil {
		t.Fatal(err)
	}
	if len(none.Layers) != len(huge.Layers) {
		t.Fatalf("layers %d vs %d", len(none.Layers), len(huge.Layers))
	}
	for i := range none.Layers {
		a, b := none.Layers[i], huge.Layers[i]
		if math.Abs(a.X.Scale-b.X.Scale) > 1e-12 || math.Abs(a.Y.Scale-b.Y.Scale) > 1e-12 {
			t.Errorf("layer %s: %v / %v with the huge budget, %v / %v without", a.Layer, b.X.Scale, b.Y.Scale, a.X.Scale, a.Y.Scale)
		}
	}
	if !strings.Contains(strings.Join(huge.Notes, "\n"), "cannot bind") {
		t.Errorf("notes do not say the budget cannot bind: %q", huge.Notes)
	}
}
