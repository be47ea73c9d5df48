package process

import (
	"math"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
)

const (
	mil  = unit.Mil
	inch = unit.Inch
)

// closeTo is the tolerance of the shape checks: the shapes are closed forms
// evaluated in float64, so a few ulps of the amplitude (calculated here).
const closeTo = 1e-12

// TestShapes checks each shape against its definition, worked by hand on
// an 18 x 24 in panel (values calculated here from the formulas in At).
func TestShapes(t *testing.T) {
	size := panel.Vec{X: 18 * inch, Y: 24 * inch}
	a := 0.4 * mil
	tests := []struct {
		name string
		s    Shape
		p    panel.Vec
		want float64
	}{
		{"dome centre", Shape{Kind: Dome, Amplitude: a}, panel.Vec{}, a},
		{"dome middle of the right edge", Shape{Kind: Dome, Amplitude: a}, panel.Vec{X: 9 * inch}, 0},
		{"dome middle of the top edge", Shape{Kind: Dome, Amplitude: a}, panel.Vec{Y: 12 * inch}, 0},
		{"dome half way to the side", Shape{Kind: Dome, Amplitude: a}, panel.Vec{X: 4.5 * inch}, 0.75 * a},
		{"dome corner", Shape{Kind: Dome, Amplitude: a}, panel.Vec{X: 9 * inch, Y: -12 * inch}, -a},
		{"edge at the edge", Shape{Kind: Edge, Amplitude: a, Decay: 2 * inch}, panel.Vec{X: -9 * inch, Y: 3 * inch}, a},
		{"edge one decay length in", Shape{Kind: Edge, Amplitude: a, Decay: 2 * inch}, panel.Vec{X: 7 * inch}, a / math.E},
		{"edge two decay lengths in from the top", Shape{Kind: Edge, Amplitude: a, Decay: 2 * inch}, panel.Vec{Y: 8 * inch}, a / (math.E * math.E)},
		{"tilt x centre", Shape{Kind: Tilt, Amplitude: a}, panel.Vec{Y: 5 * inch}, 0},
		{"tilt x right end", Shape{Kind: Tilt, Amplitude: a}, panel.Vec{X: 9 * inch}, a / 2},
		{"tilt x quarter", Shape{Kind: Tilt, Amplitude: a}, panel.Vec{X: -4.5 * inch}, -a / 4},
		{"tilt y top", Shape{Kind: Tilt, Amplitude: a, AlongY: true}, panel.Vec{X: 3 * inch, Y: 12 * inch}, a / 2},
		{"flat", Shape{}, panel.Vec{X: 3 * inch}, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := tt.s.At(tt.p, size); math.Abs(got-tt.want) > closeTo*a {
				t.Errorf("At(%v) = %g mil, want %g mil", tt.p, got/mil, tt.want/mil)
			}
		})
	}
}

// TestTiltLinear checks that a tilt is linear: the value at the midpoint of
// any two points is their mean (an invariant of an affine function).
func TestTiltLinear(t *testing.T) {
	size := panel.Vec{X: 12 * inch, Y: 18 * inch}
	for _, s := range []Shape{{Kind: Tilt, Amplitude: 0.3 * mil}, {Kind: Tilt, Amplitude: -0.2 * mil, AlongY: true}} {
		for _, pq := range [][2]panel.Vec{{{X: -5 * inch, Y: 1 * inch}, {X: 4 * inch, Y: -7 * inch}}, {{X: 1 * inch}, {X: 2 * inch, Y: 8 * inch}}} {
			p, q := pq[0], pq[1]
			m := panel.Vec{X: (p.X + q.X) / 2, Y: (p.Y + q.Y) / 2}
			if got, want := s.At(m, size), (s.At(p, size)+s.At(q, size))/2; math.Abs(got-want) > closeTo*mil {
				t.Errorf("%+v: midpoint %g, mean of ends %g", s, got, want)
			}
		}
	}
}

// TestGridReproducesNodes reads a 3 x 2 grid and checks that the shape
// reproduces every node and is bilinear between them (the midpoint of a
// cell is the mean of its four corners).
func TestGridReproducesNodes(t *testing.T) {
	csv := "x [in],y [in],value [mil]\n-9,-12,0.1\n0,-12,0.3\n9,-12,-0.2\n-9,12,0.0\n0,12,0.5\n9,12,0.4\n"
	g, err := ReadGrid(strings.NewReader(csv), "g.csv", true)
	if err != nil {
		t.Fatal(err)
	}
	s := Shape{Kind: Grid, Values: g}
	size := panel.Vec{X: 18 * inch, Y: 24 * inch}
	nodes := []struct{ x, y, v float64 }{{-9, -12, 0.1}, {0, -12, 0.3}, {9, -12, -0.2}, {-9, 12, 0}, {0, 12, 0.5}, {9, 12, 0.4}}
	for _, n := range nodes {
		if got := s.At(panel.Vec{X: n.x * inch, Y: n.y * inch}, size); math.Abs(got-n.v*mil) > closeTo*mil {
			t.Errorf("node (%g, %g) in: %g mil, want %g", n.x, n.y, got/mil, n.v)
		}
	}
	if got, want := s.At(panel.Vec{X: 4.5 * inch}, size), (0.3+(-0.2)+0.5+0.4)/4*mil; math.Abs(got-want) > closeTo*mil {
		t.Errorf("cell centre %g mil, want %g", got/mil, want/mil)
	}
	if !Covers(g, panel.Vec{X: 8 * inch, Y: 11 * inch}) || Covers(g, panel.Vec{X: 10 * inch, Y: 11 * inch}) {
		t.Error("Covers is wrong about a 18 x 24 in grid")
	}
	if lo, hi := s.Range(panel.Vec{X: 8 * inch, Y: 11 * inch}, size); math.Abs(lo+0.2*mil) > closeTo*mil || math.Abs(hi-0.5*mil) > closeTo*mil {
		t.Errorf("Range %g..%g mil, want -0.2..0.5", lo/mil, hi/mil)
	}
	if _, err := ReadGrid(strings.NewReader("x [in],y [in],value\n0,0,1\n"), "g.csv", true); err == nil {
		t.Error("a length grid without a unit on value was accepted")
	}
	if _, err := ReadGrid(strings.NewReader("x [in],y [in],value\n0,0,0.02\n"), "g.csv", false); err != nil {
		t.Errorf("an εr grid: %v", err)
	}
}

// TestBind maps terms onto a microstrip pair with mask: a coat moves both
// mask thicknesses, a term on a layer beyond the ground binds nothing.
func TestBind(t *testing.T) {
	cu := func(n string, th float64) section.Layer {
		return section.Layer{Name: n, Kind: section.Copper, Thickness: th}
	}
	s := &section.Section{Name: "ms",
		Stackup: section.Stackup{Layers: []section.Layer{cu("L1", 1.9*mil),
			{Name: "K1", Kind: section.Dielectric, Thickness: 10 * mil, Er: 3.48, Core: true}, cu("L2", 1.4*mil),
			{Name: "K2", Kind: section.Dielectric, Thickness: 10 * mil, Er: 3.48, Core: true}, cu("L3", 1.4*mil)},
			Mask: &section.Mask{OverLaminate: 0.8 * mil, OverCopper: 0.5 * mil, Er: 3.8}},
		Traces:  [2]section.Trace{{Layer: "L1", Width: 20 * mil, X: -15 * mil}, {Layer: "L1", Width: 20 * mil, X: 15 * mil}},
		Grounds: []string{"L2"}, Frequency: 2.45e9, ZRef: 50, Spec: section.Spec{Coupling: -20, Tolerance: 1}}
	m := &Model{Terms: []Term{
		{Name: "k1", Layer: "K1", Quantity: Thickness},
		{Name: "coat", Quantity: Mask},
		{Name: "k2", Layer: "K2", Quantity: Er},
		{Name: "plating", Layer: "L1", Step: 1, Quantity: Copper},
	}}
	params := s.Params()
	b, _, ok := m.Bind(s, params)
	if !ok {
		t.Fatal("bind failed")
	}
	got := map[string][]string{}
	for _, x := range b {
		for _, k := range x.Params {
			got[m.Terms[x.Term].Name] = append(got[m.Terms[x.Term].Name], params[k].Key)
		}
	}
	want := map[string]string{"k1": "K1.thickness", "coat": "mask.thickness mask.over_copper", "plating": "L1.copper"}
	if len(got) != len(want) {
		t.Errorf("bound %v, want %v", got, want)
	}
	for k, v := range want {
		if strings.Join(got[k], " ") != v {
			t.Errorf("%s binds %v, want %s", k, got[k], v)
		}
	}
	if _, name, ok := m.Bind(s, nil); ok || name != "k1" {
		t.Errorf("binding to a curve without sensitivities: ok %v, term %q", ok, name)
	}
}
