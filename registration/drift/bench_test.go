package drift

import (
	"io"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// bigInput is 100 x 100 one-coupler parts (10,000 sites) of a centred 3 dB
// pair under an upper-layer error model with normal, uniform and site terms.
func bigInput(b *testing.B) *Input {
	l := panel.Layout{
		Panel: panel.Panel{Size: panel.Vec{X: 18 * inch, Y: 24 * inch}, Border: 0.5 * inch},
		Parts: []panel.Part{{Name: "p", Size: panel.Vec{X: 0.15 * inch, Y: 0.2 * inch},
			Couplers: []panel.Coupler{{Name: "C", Section: "hyb", At: panel.Vec{X: 0.07 * inch, Y: 0.1 * inch}, Angle: 90 * deg}}}},
		Arrays: []panel.Array{{Part: "p", Count: [2]int{100, 100}, Pitch: panel.Vec{X: 0.16 * inch, Y: 0.22 * inch}}},
	}
	inst, sites, err := l.Expand()
	if err != nil {
		b.Fatal(err)
	}
	m := &registration.Model{Contributors: []registration.Contributor{{Name: "L3", Layers: []string{"L3"},
		Terms: [registration.NumTerms]registration.Term{
			registration.OffsetX: term(0.2*mil, 0.5*mil),
			registration.OffsetY: {Mean: 0, Spread: 0.5 * mil, Dist: registration.Uniform},
			registration.ScaleX:  term(50e-6, 20e-6)}, SiteSigma: 0.1 * mil}}}
	return &Input{Layout: l, Instances: inst, Sites: sites,
		Sections: []*section.Section{pair("hyb", 0, section.Spec{Coupling: -3, Tolerance: 0.25})}, Model: m}
}

// BenchmarkAnalyse10k times the analysis of 10,000 sites with the curve
// solved once before: rows, statistics and every quantity of every site.
func BenchmarkAnalyse10k(b *testing.B) {
	in := bigInput(b)
	set := &Settings{Accuracy: 0.01, CacheDir: b.TempDir()}
	curves, err := SolveCurves(b.Context(), set, New(in, nil))
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		a := New(in, nil)
		a.Evaluate(curves)
	}
}

// BenchmarkValue times one per-pixel evaluation of each quantity drawn.
func BenchmarkValue(b *testing.B) {
	in := bigInput(b)
	set := &Settings{Accuracy: 0.01, CacheDir: b.TempDir()}
	a, err := Analyse(b.Context(), in, set)
	if err != nil {
		b.Fatal(err)
	}
	ev := a.Evaluator(0)
	p, u := panel.Vec{X: 3 * inch, Y: -4 * inch}, panel.Vec{Y: 1}
	for _, q := range []struct {
		name string
		q    Quantity
	}{{"drift", Drift}, {"worst", WorstDrift}, {"pinspec", PInSpec}} {
		b.Run(q.name, func(b *testing.B) {
			b.ReportAllocs()
			var sink float64
			for b.Loop() {
				sink += ev.Value(q.q, p, u)
			}
			_ = sink
		})
	}
}

// BenchmarkSensitivityOutput times what sweep --sensitivities adds after the
// solve: the JSON rows, the ranked impacts and sensitivity.csv, for a
// centred 3 dB pair solved at 21 offsets with sensitivities once before.
func BenchmarkSensitivityOutput(b *testing.B) {
	s := pair("hyb", 0, section.Spec{Coupling: -3, Tolerance: 0.25})
	offsets := make([]float64, 21)
	for k := range offsets {
		offsets[k] = (float64(k) - 10) * 0.5 * mil
	}
	set := &Settings{CacheDir: b.TempDir(), Sensitivities: true}
	c, _, err := SolveAt(b.Context(), s, offsets, set)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		rows := SensitivityRows(c)
		imp := Impacts(s, c, DefaultExcursions)
		if len(rows) == 0 || len(imp) == 0 {
			b.Fatal("no sensitivities")
		}
		if err := WriteSensitivityCSV(io.Discard, c, unit.MilInch); err != nil {
			b.Fatal(err)
		}
	}
}
