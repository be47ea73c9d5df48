package drift

import (
	"math"
	"os"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

const (
	mil  = unit.Mil
	inch = unit.Inch
	deg  = math.Pi / 180
)

// stackup is a stripline of two 26 mil prepregs about a 4 mil core, with
// the coupled traces on the core's faces L3 and L4 (invented, in the range
// of the broadside hybrids of the samples).
func stackup() section.Stackup {
	cu := func(n string) section.Layer {
		return section.Layer{Name: n, Kind: section.Copper, Thickness: 1.4 * mil}
	}
	di := func(t, er float64, core bool) section.Layer {
		return section.Layer{Kind: section.Dielectric, Thickness: t, Er: er, Core: core}
	}
	return section.Stackup{Layers: []section.Layer{cu("L2"), di(26*mil, 3.55, false), cu("L3"),
		di(4*mil, 3.0, true), cu("L4"), di(26*mil, 3.55, false), cu("L5")}}
}

// pair returns a centred pair of equal 14 mil traces on L3 over L4 with the
// design offset off and the spec sp.
func pair(name string, off float64, sp section.Spec) *section.Section {
	return &section.Section{Name: name, Stackup: stackup(),
		Traces:    [2]section.Trace{{Layer: "L3", Width: 14 * mil, Etch: 0.6 * mil}, {Layer: "L4", Width: 14 * mil, Etch: 0.6 * mil}},
		Grounds:   []string{"L2", "L5"},
		Frequency: 2.45e9, ZRef: 50, Spec: sp, DesignOffset: off}
}

// testSettings solve at 1 % in a cache private to the test binary.
func testSettings(t *testing.T) *Settings {
	t.Helper()
	return &Settings{Accuracy: 0.01, CacheDir: cacheDir}
}

// cacheDir is one solve cache for the whole test binary.
var cacheDir string

func TestMain(m *testing.M) {
	d, err := os.MkdirTemp("", "drift-test-cache")
	if err != nil {
		panic(err)
	}
	cacheDir = d
	code := m.Run()
	os.RemoveAll(d)
	os.Exit(code)
}

// layout returns a 12 x 18 in panel with one part of one coupler at its
// centre (section sec, lines at angleDeg) stepped by the arrays.
func layout(t *testing.T, sec string, angleDeg float64, arrays ...panel.Array) (panel.Layout, []panel.Instance, []panel.Site) {
	t.Helper()
	l := panel.Layout{
		Panel: panel.Panel{Size: panel.Vec{X: 12 * inch, Y: 18 * inch}, Border: 0.5 * inch},
		Parts: []panel.Part{{Name: "p", Size: panel.Vec{X: 0.5 * inch, Y: 0.5 * inch},
			Couplers: []panel.Coupler{{Name: "C", Section: sec, At: panel.Vec{X: 0.25 * inch, Y: 0.25 * inch}, Angle: angleDeg * deg}}}},
		Arrays: arrays,
	}
	inst, sites, err := l.Expand()
	if err != nil {
		t.Fatal(err)
	}
	return l, inst, sites
}

func term(mean, sd float64) registration.Term {
	if sd == 0 {
		return registration.Term{Mean: mean}
	}
	return registration.Term{Mean: mean, Spread: sd, Dist: registration.Normal}
}

// microstripPair returns an edge-coupled microstrip pair on L1 over a
// 10 mil core K1 and the ground L2: two 20 mil traces 10 mil apart (an
// invented section, near a 15 dB coupler).
func microstripPair() *section.Section {
	return &section.Section{Name: "ms",
		Stackup: section.Stackup{Layers: []section.Layer{
			{Name: "L1", Kind: section.Copper, Thickness: 1.9 * mil},
			{Name: "K1", Kind: section.Dielectric, Thickness: 10 * mil, Er: 3.48, Core: true},
			{Name: "L2", Kind: section.Copper, Thickness: 1.4 * mil}}},
		Traces:    [2]section.Trace{{Layer: "L1", Width: 20 * mil, Etch: 0.5 * mil, X: -15 * mil}, {Layer: "L1", Width: 20 * mil, Etch: 0.5 * mil, X: 15 * mil}},
		Grounds:   []string{"L2"},
		Frequency: 2.45e9, ZRef: 50, Spec: section.Spec{Coupling: -15, Tolerance: 3}}
}
