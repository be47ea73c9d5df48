package figure

import (
	"bytes"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/registration/process"
)

const (
	mil  = unit.Mil
	inch = unit.Inch
)

// testInput is an invented panel: offset couplers (design offset 10 mil on
// a centred pair of 14 mil traces about a 4 mil core) in two arrays, the
// second turned 180°, under an upper-layer shift of 1 ± 0.5 mil in y.
func testInput(t *testing.T) *drift.Input {
	t.Helper()
	cu := func(n string) section.Layer {
		return section.Layer{Name: n, Kind: section.Copper, Thickness: 1.4 * mil}
	}
	di := func(th, er float64) section.Layer {
		return section.Layer{Kind: section.Dielectric, Thickness: th, Er: er}
	}
	sec := &section.Section{Name: "dc",
		Stackup: section.Stackup{Layers: []section.Layer{cu("L2"), di(26*mil, 3.55), cu("L3"), di(4*mil, 3.0), cu("L4"), di(26*mil, 3.55), cu("L5")}},
		Traces:  [2]section.Trace{{Layer: "L3", Width: 14 * mil, Etch: 0.6 * mil}, {Layer: "L4", Width: 14 * mil, Etch: 0.6 * mil}},
		Grounds: []string{"L2", "L5"}, Frequency: 2.45e9, ZRef: 50,
		Spec: section.Spec{Coupling: -6, Tolerance: 0.4}, DesignOffset: 10 * mil}
	l := panel.Layout{
		Panel: panel.Panel{Size: panel.Vec{X: 12 * inch, Y: 18 * inch}, Border: 0.5 * inch},
		Parts: []panel.Part{{Name: "p", Size: panel.Vec{X: 1 * inch, Y: 1 * inch},
			Couplers: []panel.Coupler{{Name: "C", Section: "dc", At: panel.Vec{X: 0.5 * inch, Y: 0.5 * inch}}}}},
		Arrays: []panel.Array{
			{Part: "p", Count: [2]int{3, 10}, Pitch: panel.Vec{X: 1.2 * inch, Y: 1.5 * inch}, Center: panel.Vec{X: -3 * inch}},
			{Part: "p", Count: [2]int{3, 10}, Pitch: panel.Vec{X: 1.2 * inch, Y: 1.5 * inch}, Center: panel.Vec{X: 3 * inch}, Rotate: 180}},
	}
	inst, sites, err := l.Expand()
	if err != nil {
		t.Fatal(err)
	}
	m := &registration.Model{Contributors: []registration.Contributor{
		{Name: "L3 imaging", Layers: []string{"L3"}, Terms: [registration.NumTerms]registration.Term{
			registration.OffsetY: {Mean: 1 * mil, Spread: 0.5 * mil, Dist: registration.Normal},
			registration.ScaleX:  {Spread: 100e-6, Dist: registration.Normal}}, SiteSigma: 0.2 * mil},
	}}
	return &drift.Input{Title: "figure test (invented)", Source: "test", Layout: l, Instances: inst, Sites: sites,
		Sections: []*section.Section{sec}, Model: m}
}

// cache is one solve cache for the whole test binary.
var cache string

func TestMain(m *testing.M) {
	d, err := os.MkdirTemp("", "figure-test-cache")
	if err != nil {
		panic(err)
	}
	cache = d
	code := m.Run()
	os.RemoveAll(d)
	os.Exit(code)
}

func settings(*testing.T) *drift.Settings { return &drift.Settings{Accuracy: 0.01, CacheDir: cache} }

// decode checks that b is a PNG of the given width with more than a few
// colours (a drawn figure, not a blank canvas).
func decode(t *testing.T, name string, b []byte, width int) image.Image {
	t.Helper()
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	if width > 0 && img.Bounds().Dx() != width {
		t.Errorf("%s: width %d, want %d", name, img.Bounds().Dx(), width)
	}
	seen := map[[3]uint32]bool{}
	r := img.Bounds()
	for y := r.Min.Y; y < r.Max.Y; y += 7 {
		for x := r.Min.X; x < r.Max.X; x += 7 {
			c0, c1, c2, _ := img.At(x, y).RGBA()
			seen[[3]uint32{c0, c1, c2}] = true
		}
	}
	if len(seen) < 20 {
		t.Errorf("%s: only %d colours", name, len(seen))
	}
	return img
}

func TestFigures(t *testing.T) {
	in := testInput(t)
	set := settings(t)
	a, err := drift.Analyse(t.Context(), in, set)
	if err != nil {
		t.Fatal(err)
	}
	sum := a.Summary(10)
	for _, show := range Shows {
		var b bytes.Buffer
		if err := Map(&b, a, sum, MapOptions{Show: show, Width: 600, Units: unit.MicronMM}); err != nil {
			t.Fatalf("map %s: %v", show, err)
		}
		decode(t, "map "+show, b.Bytes(), 600)
	}
	if err := Map(new(bytes.Buffer), a, sum, MapOptions{Show: "colour"}); err == nil {
		t.Error("a map of an unknown quantity drew")
	}
	res, err := a.Yield.MonteCarlo(t.Context(), registration.MCSettings{Trials: 500, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	ys := a.YieldSummary(res, 1)
	var b bytes.Buffer
	if err := Yield(&b, a, res, ys, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	decode(t, "yield", b.Bytes(), yieldWidth)
	b.Reset()
	if err := Parts(&b, res, ys, in.Title); err != nil {
		t.Fatal(err)
	}
	decode(t, "parts", b.Bytes(), 1600)
	b.Reset()
	if err := Budget(&b, ys); err != nil {
		t.Fatal(err)
	}
	decode(t, "budget", b.Bytes(), 2000)
	b.Reset()
	if err := Sweep(&b, in.Sections[0], a.Curves[0].Curve, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	decode(t, "sweep", b.Bytes(), 1800)
	tol, err := drift.Tol(t.Context(), in, drift.TolStudy{Deltas: []float64{0, 2 * mil}, Trace: 1}, set)
	if err != nil {
		t.Fatal(err)
	}
	b.Reset()
	if err := Tol(&b, tol, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	decode(t, "tol", b.Bytes(), 1800)
	cmp, err := drift.Compensate(t.Context(), in, nil, &registration.CompSettings{Max: 1e-3}, set)
	if err != nil {
		t.Fatal(err)
	}
	b.Reset()
	if err := Comp(&b, cmp, cmp.Summary(nil, nil), 800, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	decode(t, "comp", b.Bytes(), 800)
}

// TestShownRange: the range a map draws for its sites is the range of the
// sites' own evaluated values, in the units drawn.
func TestShownRange(t *testing.T) {
	a, err := drift.Analyse(t.Context(), testInput(t), settings(t))
	if err != nil {
		t.Fatal(err)
	}
	lo, hi, err := ShownRange(a, MapOptions{Show: "offset", Units: unit.MilInch})
	if err != nil {
		t.Fatal(err)
	}
	// Hand-worked: 10 mil design, +1 mil as placed and −1 mil turned, plus
	// the mean scale (zero): 9 and 11 mil exactly.
	if math.Abs(lo-9) > 1e-9 || math.Abs(hi-11) > 1e-9 {
		t.Errorf("offset range %.9f to %.9f mil, want 9 to 11", lo, hi)
	}
}

// TestNiceLength: scale arrows are 1, 2 or 5 times a power of ten, the
// largest not above the length asked for.
func TestNiceLength(t *testing.T) {
	for _, tt := range []struct{ d, want float64 }{
		{1, 1}, {1.9, 1}, {2, 2}, {4.99, 2}, {5, 5}, {9.99, 5}, {0.03, 0.02}, {7e-6, 5e-6}, {0, 1}, {-3, 1},
	} {
		if got := niceLength(tt.d); math.Abs(got-tt.want) > 1e-12*tt.want {
			t.Errorf("niceLength(%g) = %g, want %g", tt.d, got, tt.want)
		}
	}
}

// TestFit draws fit.png of two panels of one layer fitted from targets
// moved by a known offset and scale, one of them mis-measured.
func TestFit(t *testing.T) {
	var ts []registration.Target
	for p, panelName := range []string{"P1", "P2"} {
		for i := range 9 {
			pos := panel.Vec{X: float64(i%3-1) * 4 * inch, Y: float64(i/3-1) * 5 * inch}
			d := panel.Vec{X: 0.5*mil + 100e-6*pos.X, Y: -0.3 * mil}
			if p == 1 && i == 4 {
				d.X += 5 * mil // the mis-measured target
			}
			ts = append(ts, registration.Target{Panel: panelName, Layer: "L3", Name: fmt.Sprintf("T%d", i+1), Pos: pos, D: d})
		}
	}
	set := registration.FitSettings{Robust: registration.Tukey}
	fits, err := registration.FitAll(ts, &set)
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := Fit(&b, "targets.csv", set, fits, registration.LotStats(fits), panel.Vec{X: 12 * inch, Y: 18 * inch}, 900, unit.MicronMM); err != nil {
		t.Fatal(err)
	}
	decode(t, "fit", b.Bytes(), 900)
}

// TestDefaultShow: a map of one section draws the drift; of several, whose
// drifts do not compare, the window share, or with process terms the
// probability in spec (the window share sees the offset alone).
func TestDefaultShow(t *testing.T) {
	one := testInput(t)
	two := testInput(t)
	dc2 := *two.Sections[0]
	dc2.Name = "dc2"
	two.Sections = append(two.Sections, &dc2)
	q := two.Layout.Parts[0]
	q.Name, q.Couplers = "q", []panel.Coupler{{Name: "C", Section: "dc2", At: q.Couplers[0].At}}
	two.Layout.Parts = append(two.Layout.Parts, q)
	two.Layout.Arrays[1].Part = "q"
	var err error
	if two.Instances, two.Sites, err = two.Layout.Expand(); err != nil {
		t.Fatal(err)
	}
	proc := *two
	proc.Process = &process.Model{Size: two.Layout.Panel.Size, Terms: []process.Term{{Name: "L3 width", Layer: "L3", Quantity: process.Width,
		Panel: registration.Term{Spread: 0.2 * mil, Dist: registration.Normal}}}}
	for _, tt := range []struct {
		name string
		in   *drift.Input
		want string
	}{{"one section", one, "drift"}, {"two sections", two, "window"}, {"two sections, process terms", &proc, "p"}} {
		if got := DefaultShow(drift.New(tt.in, nil)); got != tt.want {
			t.Errorf("%s: default field %q, want %q", tt.name, got, tt.want)
		}
	}
}
