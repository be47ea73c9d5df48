package render

import (
	"bytes"
	"flag"
	"fmt"
	"hash/adler32"
	"image"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// saveDir, when set (go test ./render -save /tmp/render), writes the test
// images there for viewing.
var saveDir = flag.String("save", "", "directory to write test images to")

func save(t testing.TB, name string, c *Canvas) {
	if *saveDir == "" {
		return
	}
	var buf bytes.Buffer
	if err := c.EncodePNG(&buf); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(*saveDir, name), buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

const inch = 0.0254

// demoField is an affine field of the kind a panel map shows: an offset in
// metres growing from the centre (invented demo numbers).
func demoField(x, y float64) float64 { return 2e-6 + 40e-6*x - 25e-6*y }

// demoSites returns n sites on a regular array filling an 18 x 24 in panel
// inside a 0.8 in border, alternating between two directions.
func demoSites(n int) []Bar {
	nx := int(math.Round(math.Sqrt(float64(n) * 16.4 / 22.4)))
	ny := (n + nx - 1) / nx
	bars := make([]Bar, 0, n)
	for k := range n {
		i, j := k%nx, k/nx
		p := Point{(-8.2 + 16.4*(float64(i)+0.5)/float64(nx)) * inch, (-11.2 + 22.4*(float64(j)+0.5)/float64(ny)) * inch}
		v := demoField(p.X, p.Y)
		bars = append(bars, Bar{At: p, Length: 0.12 * inch, Angle: math.Pi / 2 * float64(k%2), Color: Diverging.Map(v, -12e-6, 12e-6)})
	}
	return bars
}

// drawDemoMap draws a complete panel map: field, outline, border, parts,
// bars, ten markers and the colour bar.
func drawDemoMap(width, sites int) *Map {
	panel := Centered(18*inch, 24*inch)
	m := NewMap(MapSpec{
		Width:  width,
		Extent: panel,
		Title: []string{
			"Dual 3 dB hybrid module, 6-layer (demo)",
			"section hybrid · spec −3.00 ± 0.25 dB",
			fmt.Sprintf("%d sites, %d in spec", sites, sites-17),
			"worst site: module[27,25].H2 at (8.1, 11.0) in, offset 10.9 µm",
		},
		Legend: []LegendItem{
			{Label: "coupler site (coloured by offset)", Kind: LegendLine, Color: Diverging.At(0.9), Width: 8},
			{Label: "ten worst sites", Kind: LegendRing},
			{Label: "panel border", Kind: LegendLine, Dash: []float64{8, 6}},
		},
	})
	v := m.Views[0]
	lo, hi := -12e-6, 12e-6
	v.Field(panel, demoField, Diverging, lo, hi)
	v.StrokeRect(panel, LineStyle{Width: 2 * m.thin()})
	v.StrokeRect(panel.Inset(0.8*inch), LineStyle{Dash: []float64{8, 6}})
	bars := demoSites(sites)
	v.Bars(bars, BarStyle{})
	var ms []Marker
	for k := range 10 {
		ms = append(ms, Marker{At: bars[len(bars)-1-7*k].At, Label: fmt.Sprint(k + 1)})
	}
	v.Markers(ms)
	m.ColorBar(Diverging, lo*1e6, hi*1e6, "broadside offset [µm]")
	m.ColorBarMark(-8.6, "spec −8.6")
	m.ColorBarMark(9.1, "spec +9.1")
	return m
}

func TestMapSize(t *testing.T) {
	for _, w := range []int{600, 2400, 3000} {
		m := drawDemoMap(w, 500)
		b := m.Bounds()
		if b.Dx() != w {
			t.Errorf("width %d, want %d", b.Dx(), w)
		}
		// The plot area keeps the panel's 18:24 aspect to within a pixel.
		a := m.Views[0].Area()
		ext := m.Views[0].Extent()
		if d := math.Abs(float64(a.Dy()) - float64(a.Dx())*ext.Dy()/ext.Dx()); d > 1 {
			t.Errorf("width %d: plot %v off aspect by %.1f px", w, a, d)
		}
		if !a.In(b) || !m.ColorBarRect().In(b) || m.ColorBarRect().Overlaps(a) {
			t.Errorf("width %d: layout plot %v bar %v image %v", w, a, m.ColorBarRect(), b)
		}
		if w == 2400 {
			save(t, "map.png", m.Canvas)
		}
	}
	if NewMap(MapSpec{Extent: Centered(1, 1)}).Bounds().Dx() != 2400 {
		t.Error("default width is not 2400")
	}
}

// TestColorBarEnds checks that the colour bar's first and last pixel columns
// carry the palette colours of the data range's ends.
func TestColorBarEnds(t *testing.T) {
	for _, p := range []*Palette{Sequential, Diverging} {
		m := NewMap(MapSpec{Width: 800, Extent: Centered(0.3, 0.2)})
		m.ColorBar(p, -3, 7, "value [unit]")
		r := m.ColorBarRect()
		mid := (r.Min.Y + r.Max.Y) / 2
		if got := m.img.RGBAAt(r.Min.X, mid); got != p.Map(-3, -3, 7) {
			t.Errorf("%s: left end %v, want %v", p.Name, got, p.At(0))
		}
		if got := m.img.RGBAAt(r.Max.X-1, mid); got != p.Map(7, -3, 7) {
			t.Errorf("%s: right end %v, want %v", p.Name, got, p.At(1))
		}
		// The tick for 0 sits 3/10 of the way along the bar.
		x := r.Min.X + int(0.5+0.3*float64(r.Dx()-1))
		if !inkNear(m.img, x, r.Max.Y+int(0.2*tickEm*m.em)+1, 1) {
			t.Errorf("%s: no tick at value 0 (x=%d)", p.Name, x)
		}
	}
}

// TestFieldPixels checks that the raster colour at two known panel points is
// exactly the palette colour of the field's value at that pixel's centre,
// and that pixels outside the filled rectangle are untouched.
func TestFieldPixels(t *testing.T) {
	panel := Centered(18*inch, 24*inch)
	for _, useGrid := range []bool{false, true} {
		m := NewMap(MapSpec{Width: 900, Extent: panel})
		v := m.Views[0]
		lo, hi := -12e-6, 12e-6
		if useGrid {
			v.FieldGrid(NewGrid(panel, 19, 25, demoField), Sequential, lo, hi)
		} else {
			v.Field(panel, demoField, Sequential, lo, hi)
		}
		for _, p := range []Point{{-6 * inch, 9 * inch}, {8.5 * inch, -11.5 * inch}} {
			x, y := v.Pixel(p)
			i, j := int(x), int(y)
			q := v.PixelCenter(i, j)
			if math.Abs(q.X-p.X) > v.inv || math.Abs(q.Y-p.Y) > v.inv {
				t.Fatalf("pixel (%d,%d) centre %v is not near %v", i, j, q, p)
			}
			want := Sequential.Map(demoField(q.X, q.Y), lo, hi)
			if got := m.img.RGBAAt(i, j); got != want {
				t.Errorf("grid=%v at %v: pixel %v, want %v", useGrid, p, got, want)
			}
		}
		// Just outside the panel (inside the plot margin) stays background.
		x, y := v.Pixel(Point{panel.Max.X + 0.2*inch, 0})
		if got := m.img.RGBAAt(int(x), int(y)); got != Background {
			t.Errorf("grid=%v: outside pixel %v, want background", useGrid, got)
		}
	}
}

// TestCompareLayout checks a two-view map: equal views side by side, one
// colour bar, no overlap.
func TestCompareLayout(t *testing.T) {
	panel := Centered(18*inch, 24*inch)
	m := NewMap(MapSpec{Width: 2400, Extent: panel, Views: 2,
		Captions: []string{"before compensation", "after compensation"},
		Title:    []string{"Compensation (demo)", "L3 −120 ppm, L4 +35 ppm"}})
	a, b := m.Views[0].Area(), m.Views[1].Area()
	if a.Dx() != b.Dx() || a.Dy() != b.Dy() || a.Overlaps(b) || a.Min.Y != b.Min.Y {
		t.Errorf("views %v and %v", a, b)
	}
	lo, hi := 0.0, 12e-6
	m.Views[0].Field(panel, func(x, y float64) float64 { return math.Abs(demoField(x, y)) }, Sequential, lo, hi)
	m.Views[1].Field(panel, func(x, y float64) float64 { return 0.3 * math.Abs(demoField(x, y)) }, Sequential, lo, hi)
	for _, v := range m.Views {
		v.StrokeRect(panel, LineStyle{Width: 2 * m.thin()})
	}
	m.ColorBar(Sequential, lo*1e6, hi*1e6, "|offset| [µm]")
	save(t, "comp.png", m.Canvas)
}

// TestGridLayout checks five views in rows of three: equal sizes, rows
// aligned, nothing overlapping, all inside the image.
func TestGridLayout(t *testing.T) {
	m := NewMap(MapSpec{Width: 2400, Extent: Centered(18*inch, 24*inch), Views: 5, Columns: 3,
		Captions: []string{"L1", "L2", "L3", "L4", "L5"}, Title: []string{"Fit (demo)"}})
	save(t, "grid.png", m.Canvas)
	for i, v := range m.Views {
		a := v.Area()
		if !a.In(m.Bounds()) || a.Overlaps(m.ColorBarRect()) {
			t.Errorf("view %d at %v outside the image or over the bar", i, a)
		}
		if a.Size() != m.Views[0].Area().Size() {
			t.Errorf("view %d size %v", i, a.Size())
		}
		if a.Min.Y != m.Views[i/3*3].Area().Min.Y || a.Min.X != m.Views[i%3].Area().Min.X {
			t.Errorf("view %d at %v is not on the grid", i, a)
		}
		for j := range i {
			if a.Overlaps(m.Views[j].Area()) {
				t.Errorf("views %d and %d overlap", i, j)
			}
		}
	}
	if m.Views[3].Area().Min.Y <= m.Views[0].Area().Max.Y {
		t.Error("second row does not start below the first")
	}
}

// TestEncodeRoundTrip checks that EncodePNG writes a PNG that decodes to the
// same size.
func TestEncodeRoundTrip(t *testing.T) {
	m := drawDemoMap(400, 100)
	var buf bytes.Buffer
	if err := m.EncodePNG(&buf); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if img.Bounds() != m.Bounds() {
		t.Fatalf("decoded %v, want %v", img.Bounds(), m.Bounds())
	}
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, a := img.At(x, y).RGBA()
			w := m.img.RGBAAt(x, y)
			if uint8(r>>8) != w.R || uint8(g>>8) != w.G || uint8(bl>>8) != w.B || a != 0xffff {
				t.Fatalf("pixel (%d,%d): decoded %v, drawn %v", x, y, img.At(x, y), w)
			}
		}
	}
	var _ image.Image = img
}

// BenchmarkMap10k times a whole map.png: a 3000 px wide canvas, an affine
// field, 10,000 bars, 10 markers, the colour bar, and PNG encoding.
func BenchmarkMap10k(b *testing.B) {
	b.ReportAllocs()
	for b.Loop() {
		m := drawDemoMap(3000, 10000)
		if err := m.EncodePNG(io.Discard); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Milliseconds())/float64(b.N), "ms/map")
}

// BenchmarkField times the raster alone on a 3000 x 4000 px plot area.
func BenchmarkField(b *testing.B) {
	// A view whose plot area is exactly 3000 x 4000 pixels over an
	// 18 x 24 in panel.
	panel := Centered(18*inch, 24*inch)
	c := newCanvas(3000, 4000, 30)
	v := &View{c: c, area: c.Bounds(), ext: panel, s: 3000 / panel.Dx(), inv: panel.Dx() / 3000}
	b.Run("func", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			v.Field(v.Extent(), demoField, Diverging, -12e-6, 12e-6)
		}
		b.ReportMetric(float64(v.Area().Dx()*v.Area().Dy())/1e6, "Mpx")
	})
	b.Run("grid", func(b *testing.B) {
		g := NewGrid(v.Extent(), 181, 241, demoField)
		b.ReportAllocs()
		for b.Loop() {
			v.FieldGrid(g, Diverging, -12e-6, 12e-6)
		}
	})
}

// BenchmarkEncode compares PNG encoding of a finished map.
func BenchmarkEncode(b *testing.B) {
	m := drawDemoMap(3000, 10000)
	b.ReportAllocs()
	for b.Loop() {
		if err := m.EncodePNG(io.Discard); err != nil {
			b.Fatal(err)
		}
	}
}

// TestAdler32Combine checks adler32Combine against hash/adler32 over the
// concatenation, including pieces longer than the modulus.
func TestAdler32Combine(t *testing.T) {
	data := make([]byte, 300000)
	for i := range data {
		data[i] = byte(i*7919 + i>>8)
	}
	for _, cut := range []int{0, 1, 65521, 65522, 200000, len(data)} {
		a, b := data[:cut], data[cut:]
		got := adler32Combine(adler32.Checksum(a), adler32.Checksum(b), len(b))
		if want := adler32.Checksum(data); got != want {
			t.Errorf("cut %d: %08x, want %08x", cut, got, want)
		}
	}
}

// TestWrapCaption checks that a caption too wide for its view is broken
// after its separators into lines that each fit, and that one that fits
// stays whole.
func TestWrapCaption(t *testing.T) {
	c := newCanvas(1, 1, 20)
	ts := textStyle{size: 1.1, bold: true}
	long := "layer L2, 100 panels; lot mean scale x +300.0 ppm, y -200.0 ppm, rotation -0.6 µrad"
	for _, room := range []float64{300, 500, 800, 5000} {
		lines := wrapCaption(c, long, ts, room)
		if got := strings.Join(lines, " "); got != long {
			t.Errorf("room %g: lines %q do not rejoin to the caption", room, lines)
		}
		for _, l := range lines {
			// A line still too wide must be one piece: no separator inside
			// it that the break could have used.
			if w := c.measure(l, ts); w > room && (strings.Contains(l, "; ") || strings.Contains(l, ", ")) {
				t.Errorf("room %g: line %q is %.0f wide", room, l, w)
			}
		}
		if c.measure(long, ts) <= room && len(lines) != 1 {
			t.Errorf("room %g: a caption that fits was broken into %q", room, lines)
		}
	}
}
