package figure

import (
	"bytes"
	"image/color"
	"math"
	"testing"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
)

// sectionCase is testInput's invented offset broadside section, its drawing
// at the design offset and its mesh at level 1.
func sectionCase(t testing.TB) (*section.Section, *section.Drawing, *section.DrawnMesh) {
	s := testInput(&testing.T{}).Sections[0]
	d, err := s.Drawing(s.NominalOffset())
	if err != nil {
		t.Fatal(err)
	}
	m, err := s.SweepMesh([]float64{0, s.NominalOffset()}, s.NominalOffset(), 1)
	if err != nil {
		t.Fatal(err)
	}
	return s, d, m
}

// TestSectionFigure checks that section.png draws the copper (in the trace
// colour) and, with the mesh, more ink than without.
func TestSectionFigure(t *testing.T) {
	s, d, m := sectionCase(t)
	count := func(b []byte, want color.RGBA) (n, ink int) {
		img := decode(t, "section", b, sectionWidth)
		r := img.Bounds()
		for y := r.Min.Y; y < r.Max.Y; y++ {
			for x := r.Min.X; x < r.Max.X; x++ {
				c0, c1, c2, _ := img.At(x, y).RGBA()
				if uint8(c0>>8) == want.R && uint8(c1>>8) == want.G && uint8(c2>>8) == want.B {
					n++
				}
				if c0+c1+c2 < 3*0x8000 {
					ink++
				}
			}
		}
		return n, ink
	}
	var plain, meshed bytes.Buffer
	if err := Section(&plain, s, d, nil, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	if err := Section(&meshed, s, d, m, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	cu, ink0 := count(plain.Bytes(), copperFill)
	_, ink1 := count(meshed.Bytes(), copperFill)
	if cu < 1000 {
		t.Errorf("only %d copper pixels", cu)
	}
	if ink1 <= ink0 {
		t.Errorf("the mesh adds no ink: %d dark pixels with, %d without", ink1, ink0)
	}
}

// TestVScale checks the vertical map: monotone, each row at least minRowPx
// tall and to scale when thicker.
func TestVScale(t *testing.T) {
	const s = 10.0 / mil // 10 px per mil
	v := newVScale([]float64{0, 0.5 * mil, 20 * mil, 21.4 * mil}, s, 100)
	want := []float64{minRowPx, 185, minRowPx} // 1.4 mil → 14 px → raised; 19.5 mil → 195 px; 0.5 mil → raised
	want[1] = 19.5 * mil * s
	if len(v.rows) != 3 {
		t.Fatalf("rows %+v", v.rows)
	}
	for i, r := range v.rows {
		if math.Abs(r.px-want[i]) > 1e-9 || r.raised != (i != 1) {
			t.Errorf("row %d: %g px raised %v, want %g", i, r.px, r.raised, want[i])
		}
	}
	prev := v.py(22 * mil)
	for y := 21.9 * mil; y > -1*mil; y -= 0.1 * mil {
		p := v.py(y)
		if !(p > prev) {
			t.Fatalf("py(%g mil) = %g not below py above it %g", y/mil, p, prev)
		}
		prev = p
	}
	if got := v.py(21.4 * mil); got != 100 {
		t.Errorf("top at %g px, want 100", got)
	}
}

// BenchmarkSection times section.png, plain and with the mesh overlaid.
func BenchmarkSection(b *testing.B) {
	s, d, m := sectionCase(b)
	for _, bc := range []struct {
		name string
		m    *section.DrawnMesh
	}{{"plain", nil}, {"mesh", m}} {
		b.Run(bc.name, func(b *testing.B) {
			b.ReportAllocs()
			var buf bytes.Buffer
			for b.Loop() {
				buf.Reset()
				if err := Section(&buf, s, d, bc.m, unit.MilInch); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// TestSectionZeroThickness checks that ideal zero-thickness strips (a line
// of nodes in the solver) are drawn: the copper-edge colour appears.
func TestSectionZeroThickness(t *testing.T) {
	s := testInput(t).Sections[0]
	z := *s
	z.Stackup.Layers = append([]section.Layer(nil), s.Stackup.Layers...)
	for i, l := range z.Stackup.Layers {
		if l.Name == "L3" || l.Name == "L4" {
			z.Stackup.Layers[i].Thickness = 0
		}
	}
	z.Traces[0].Etch, z.Traces[1].Etch = 0, 0
	d, err := z.Drawing(z.NominalOffset())
	if err != nil {
		t.Fatal(err)
	}
	count := func(d *section.Drawing) int {
		var b bytes.Buffer
		if err := Section(&b, &z, d, nil, unit.MilInch); err != nil {
			t.Fatal(err)
		}
		img := decode(t, "zero thickness", b.Bytes(), sectionWidth)
		n := 0
		r := img.Bounds()
		for y := r.Min.Y; y < r.Max.Y; y++ {
			for x := r.Min.X; x < r.Max.X; x++ {
				c0, c1, c2, _ := img.At(x, y).RGBA()
				r, g, b := uint8(c0>>8), uint8(c1>>8), uint8(c2>>8)
				exact := color.RGBA{r, g, b, 255} == copperEdge || color.RGBA{r, g, b, 255} == copperFill
				// Copper-brown, but not a pixel set whole (fills and the
				// ground hatching are): the antialiased strip lines.
				if !exact && int(r)-int(b) > 60 {
					n++
				}
			}
		}
		return n
	}
	// The same drawing with each strip shrunk to a point: the difference is
	// the two strips' lines.
	pt := *d
	for k := range pt.Traces {
		for c := range pt.Traces[k].Corners {
			pt.Traces[k].Corners[c].X = pt.Traces[k].Centre
		}
	}
	with, without := count(d), count(&pt)
	// Two 14 mil lines at no less than 5 px per mil, each with at least one
	// antialiased row along it.
	if with-without < 2*14*5 {
		t.Errorf("the strips add %d antialiased copper pixels, want at least %d", with-without, 2*14*5)
	}
}
