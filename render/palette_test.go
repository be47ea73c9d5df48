package render

import (
	"fmt"
	"image/color"
	"math"
	"testing"
)

// TestOKLabWhite checks the matrices against the defining property of OKLab
// (Ottosson 2020): linear sRGB white (1,1,1) has L = 1, a = b = 0, to the
// seven to ten digits the published matrices carry.
func TestOKLabWhite(t *testing.T) {
	w := LinearToLab(1, 1, 1)
	if math.Abs(w.L-1) > 1e-7 || math.Abs(w.A) > 1e-7 || math.Abs(w.B) > 1e-7 {
		t.Errorf("white = %+v, want L=1 a=b=0", w)
	}
	if k := LinearToLab(0, 0, 0); k.L != 0 || k.A != 0 || k.B != 0 {
		t.Errorf("black = %+v, want 0", k)
	}
}

// TestOKLabRoundTrip checks that the forward and inverse matrices of
// Ottosson 2020 invert each other (a transcription error in one entry would
// break this).
func TestOKLabRoundTrip(t *testing.T) {
	for _, rgb := range [][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {0.2, 0.5, 0.7}, {0.9, 0.9, 0.1}} {
		r, g, b := LinearToLab(rgb[0], rgb[1], rgb[2]).Linear()
		if math.Abs(r-rgb[0]) > 1e-6 || math.Abs(g-rgb[1]) > 1e-6 || math.Abs(b-rgb[2]) > 1e-6 {
			t.Errorf("round trip %v -> %v %v %v", rgb, r, g, b)
		}
	}
}

// TestSRGBTransfer checks the IEC 61966-2-1 curve at its defining points:
// the two pieces meet at 0.04045 / 0.0031308, and 0.5 encoded is 0.2140
// linear (IEC 61966-2-1 formula evaluated by hand: ((0.5+0.055)/1.055)^2.4).
func TestSRGBTransfer(t *testing.T) {
	if d := math.Abs(srgbDecode(0.04045) - 0.0031308); d > 1e-7 {
		t.Errorf("pieces do not meet: %g", d)
	}
	if d := math.Abs(srgbDecode(0.5) - 0.21404114); d > 1e-7 {
		t.Errorf("decode(0.5) = %g", srgbDecode(0.5))
	}
	for _, v := range []float64{0, 0.001, 0.3, 0.9, 1} {
		if d := math.Abs(srgbEncode(srgbDecode(v)) - v); d > 1e-12 {
			t.Errorf("encode(decode(%g)) off by %g", v, d)
		}
	}
}

// quantStep bounds how far 8-bit rounding can move OKLab L between two
// neighbouring table entries (half a code value on each of three channels,
// measured over the palettes: about 0.002; we allow 0.003).
const quantStep = 0.003

// samples is how many evenly spaced points the strict monotonicity checks
// use: spaced widely enough (L steps of about 0.011) that 8-bit rounding
// cannot reverse the order.
const samples = 64

func lightness(p *Palette, t float64) float64 { return LabOf(p.At(t)).L }

func TestSequentialMonotone(t *testing.T) {
	checkMonotone(t, Sequential, 0, 1, -1)
}

func TestDivergingMonotone(t *testing.T) {
	checkMonotone(t, Diverging, 0, 0.5, +1) // dark blue up to the light centre
	checkMonotone(t, Diverging, 0.5, 1, -1) // light centre down to dark red
	// Symmetric lightness: the two halves are mirror images in L.
	for i := 0; i <= samples; i++ {
		u := 0.5 * float64(i) / samples
		a, b := lightness(Diverging, 0.5-u), lightness(Diverging, 0.5+u)
		if math.Abs(a-b) > quantStep {
			t.Errorf("L(0.5-%.3f) = %.4f, L(0.5+%.3f) = %.4f", u, a, u, b)
		}
	}
}

// checkMonotone asserts that OKLab lightness and BT.709 luma of the
// quantised output move strictly in direction sign over [t0,t1] at the
// sample spacing, and never reverse by more than rounding between
// neighbouring table entries.
func checkMonotone(t *testing.T, p *Palette, t0, t1 float64, sign float64) {
	t.Helper()
	prevL, prevY := math.NaN(), math.NaN()
	for i := 0; i <= samples; i++ {
		c := p.At(t0 + (t1-t0)*float64(i)/samples)
		l, y := LabOf(c).L, Luma(c)
		if i > 0 && (sign*(l-prevL) <= 0 || sign*(y-prevY) <= 0) {
			t.Errorf("%s: at sample %d of [%g,%g]: L %.4f after %.4f, luma %.4f after %.4f",
				p.Name, i, t0, t1, l, prevL, y, prevY)
		}
		prevL, prevY = l, y
	}
	i0, i1 := int(t0*(lutSize-1)+0.5), int(t1*(lutSize-1)+0.5)
	for i := i0 + 1; i <= i1; i++ {
		a, b := LabOf(p.lut[i-1]).L, LabOf(p.lut[i]).L
		if sign*(b-a) < -quantStep {
			t.Errorf("%s: entry %d reverses lightness by %.4f", p.Name, i, b-a)
		}
	}
}

// TestPaletteEnds checks the designed end and centre colours: lightness
// within rounding of the design values, the diverging centre neutral and
// its two ends of clearly different hue.
func TestPaletteEnds(t *testing.T) {
	const tol = 0.005 // 8-bit rounding moves L by at most about 0.002
	check := func(name string, got, want float64) {
		if math.Abs(got-want) > tol {
			t.Errorf("%s: L = %.4f, want %.4f", name, got, want)
		}
	}
	check("sequential(0)", lightness(Sequential, 0), seqLightL)
	check("sequential(1)", lightness(Sequential, 1), seqDarkL)
	check("diverging(0)", lightness(Diverging, 0), divEndL)
	check("diverging(0.5)", lightness(Diverging, 0.5), divMidL)
	check("diverging(1)", lightness(Diverging, 1), divEndL)
	if c := LabOf(Diverging.At(0.5)).LCh().C; c > 0.005 {
		t.Errorf("diverging centre chroma %.4f, want neutral", c)
	}
	lo, hi := LabOf(Diverging.At(0)).LCh(), LabOf(Diverging.At(1)).LCh()
	if d := math.Abs(lo.H - hi.H); d < 150 {
		t.Errorf("diverging ends hues %.0f and %.0f are too alike", lo.H, hi.H)
	}
}

// TestPaletteGamut checks that each palette stays inside the sRGB gamut
// without bending its design: every 8-bit entry has the design lightness
// (to rounding), and the design chroma is cut at the gamut boundary by at
// most 0.01 anywhere, so no visible kink appears where the cut starts.
func TestPaletteGamut(t *testing.T) {
	const maxCut = 0.01 // OKLab chroma; a just-noticeable difference is about 0.02
	for _, p := range []*Palette{Sequential, Diverging} {
		curve := paletteCurve(p)
		for i := 0; i < lutSize; i++ {
			c := curve(float64(i) / (lutSize - 1))
			if got := LabOf(p.lut[i]).L; math.Abs(got-c.L) > quantStep {
				t.Errorf("%s entry %d: L %.4f, designed %.4f", p.Name, i, got, c.L)
			}
			if cut := c.C - maxChroma(c.L, c.H); cut > maxCut {
				t.Errorf("%s entry %d: chroma cut by %.4f at the gamut boundary", p.Name, i, cut)
			}
			if !gamutLimited(c).InGamut() {
				t.Errorf("%s entry %d outside the sRGB gamut", p.Name, i)
			}
		}
	}
}

func paletteCurve(p *Palette) func(float64) LCh {
	if p == Sequential {
		return sequentialCurve
	}
	return divergingCurve
}

func TestPaletteAt(t *testing.T) {
	p := Sequential
	if p.At(math.NaN()) != p.NaN {
		t.Error("NaN does not map to NaN colour")
	}
	if LabOf(p.NaN).LCh().C > 0.005 {
		t.Error("NaN colour is not neutral")
	}
	if p.At(-3) != p.At(0) || p.At(7) != p.At(1) {
		t.Error("out-of-range t not clamped")
	}
	if p.Map(5, 5, 10) != p.At(0) || p.Map(10, 5, 10) != p.At(1) {
		t.Error("Map ends differ from At ends")
	}
	if p.Map(3, 3, 3) != p.At(0.5) {
		t.Error("empty range does not map to the middle colour")
	}
	if p.Map(100, 100, 90) != p.At(0) || p.Map(90, 100, 90) != p.At(1) || p.Map(95, 100, 90) != p.At(0.5) {
		t.Error("reversed range does not reverse the palette")
	}
	if lo, hi := Symmetric(-2, 5); lo != -5 || hi != 5 {
		t.Errorf("Symmetric(-2,5) = %g,%g", lo, hi)
	}
}

// TestQualitativeDistinct checks that every pair of series colours differs by
// at least 0.10 in OKLab (a just-noticeable difference is about 0.02, so
// these are far apart), and neighbours also in lightness alone.
func TestQualitativeDistinct(t *testing.T) {
	for i, a := range Qualitative {
		for j := i + 1; j < len(Qualitative); j++ {
			b := Qualitative[j]
			la, lb := LabOf(a), LabOf(b)
			d := math.Sqrt(sq(la.L-lb.L) + sq(la.A-lb.A) + sq(la.B-lb.B))
			if d < 0.10 {
				t.Errorf("colours %d and %d differ by %.3f", i, j, d)
			}
		}
	}
	for i := 1; i < len(Qualitative); i++ {
		if d := math.Abs(LabOf(Qualitative[i]).L - LabOf(Qualitative[i-1]).L); d < 0.05 {
			t.Errorf("neighbours %d,%d differ in L by only %.3f", i-1, i, d)
		}
	}
}

func sq(x float64) float64 { return x * x }

func rgbString(c color.RGBA) string { return fmt.Sprintf("#%02x%02x%02x", c.R, c.G, c.B) }
