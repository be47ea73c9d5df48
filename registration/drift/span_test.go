package drift

import (
	"testing"

	"github.com/regdrift/regdrift/panel/section"
)

func TestSpanProbe(t *testing.T) {
	s := namedPair("probe", section.Spec{Coupling: -3, Tolerance: 0.1})
	set := testSettings(t)
	set.Sensitivities = true
	c, err := SolveSection(t.Context(), s, 12*mil, set)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range c.Curve.Points {
		t.Logf("%.2f mil: %.4f dB", p.Offset/mil, c.Coupling(p.Offset))
	}
	t.Logf("params %v", c.Curve.Params())
	for k := range c.Curve.Params() {
		t.Logf("sens %d at 0: %g dB/mil, at 5: %g", k, c.Curve.CouplingSensitivity(k, 0)*mil, c.Curve.CouplingSensitivity(k, 5*mil)*mil)
	}
}
