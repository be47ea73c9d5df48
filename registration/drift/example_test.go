package drift_test

import (
	"context"
	"fmt"
	"log"
	"math"
	"os"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
)

// ExampleAnalyse maps an invented panel of three 3 dB broadside hybrids
// whose upper layer is scaled by +300 ppm in x: lines along y see
// −300 ppm·x across them.
func ExampleAnalyse() {
	const mil, inch = unit.Mil, unit.Inch
	cu := func(n string) section.Layer {
		return section.Layer{Name: n, Kind: section.Copper, Thickness: 1.4 * mil}
	}
	di := func(t, er float64) section.Layer {
		return section.Layer{Kind: section.Dielectric, Thickness: t, Er: er}
	}
	hybrid := &section.Section{Name: "hybrid",
		Stackup:   section.Stackup{Layers: []section.Layer{cu("L2"), di(26*mil, 3.55), cu("L3"), di(4*mil, 3.0), cu("L4"), di(26*mil, 3.55), cu("L5")}},
		Traces:    [2]section.Trace{{Layer: "L3", Width: 14 * mil, Etch: 0.6 * mil}, {Layer: "L4", Width: 14 * mil, Etch: 0.6 * mil}},
		Grounds:   []string{"L2", "L5"},
		Frequency: 2.45e9, ZRef: 50, Spec: section.Spec{Coupling: -3, Tolerance: 0.25}}
	layout := panel.Layout{
		Panel: panel.Panel{Size: panel.Vec{X: 12 * inch, Y: 18 * inch}, Border: 0.5 * inch},
		Parts: []panel.Part{{Name: "module", Size: panel.Vec{X: 0.5 * inch, Y: 0.5 * inch},
			Couplers: []panel.Coupler{{Name: "H1", Section: "hybrid", At: panel.Vec{X: 0.25 * inch, Y: 0.25 * inch}, Angle: math.Pi / 2}}}},
		Arrays: []panel.Array{{Part: "module", Count: [2]int{3, 1}, Pitch: panel.Vec{X: 5 * inch, Y: 1 * inch}}},
	}
	inst, sites, err := layout.Expand()
	if err != nil {
		log.Fatal(err)
	}
	model := &registration.Model{Contributors: []registration.Contributor{{Name: "L3 scale", Layers: []string{"L3"},
		Terms: [registration.NumTerms]registration.Term{registration.ScaleX: {Mean: 300e-6}}}}}
	in := &drift.Input{Title: "example", Layout: layout, Instances: inst, Sites: sites,
		Sections: []*section.Section{hybrid}, Model: model}

	dir, err := os.MkdirTemp("", "drift-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	a, err := drift.Analyse(context.Background(), in, &drift.Settings{Accuracy: 0.01, CacheDir: dir})
	if err != nil {
		log.Fatal(err)
	}
	for _, s := range a.Sites {
		fmt.Printf("x %+.0f in: offset %+.1f mil, in spec %v\n", s.Site.Pos.X/inch, math.Round(s.Offset/mil*10)/10+0, s.InSpec) // +0 turns −0 into 0
	}
	// Output:
	// x -5 in: offset +1.5 mil, in spec true
	// x +0 in: offset +0.0 mil, in spec true
	// x +5 in: offset -1.5 mil, in spec true
}
