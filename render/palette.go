package render

import (
	"image/color"
	"math"
)

// lutSize is the number of entries in a palette's lookup table: enough that
// neighbouring entries differ by less than one 8-bit code value.
const lutSize = 1024

// Palette maps a number in [0,1] to a colour through a precomputed lookup
// table, so that At costs a multiply and an index. The zero value is not
// usable; build palettes with NewPalette or use Sequential and Diverging.
type Palette struct {
	// Name identifies the palette in messages and legends.
	Name string
	// NaN is the colour At returns for NaN.
	NaN color.RGBA

	lut [lutSize]color.RGBA
}

// NewPalette tabulates the OKLCh curve f over [0,1]. Where f asks for more
// chroma than sRGB can show at its lightness and hue, the chroma is reduced
// to the gamut boundary, so lightness and hue are kept exactly and only
// colourfulness gives way. NaN maps to a neutral mid grey.
func NewPalette(name string, f func(t float64) LCh) *Palette {
	p := &Palette{Name: name, NaN: LCh{L: 0.62}.Lab().RGBA()}
	for i := range p.lut {
		p.lut[i] = gamutLimited(f(float64(i) / (lutSize - 1))).RGBA()
	}
	return p
}

func gamutLimited(c LCh) Lab {
	if m := maxChroma(c.L, c.H); c.C > m {
		c.C = m
	}
	return c.Lab()
}

// At returns the colour at t in [0,1]; t outside is clamped, NaN gives p.NaN.
func (p *Palette) At(t float64) color.RGBA {
	if t != t {
		return p.NaN
	}
	return p.lut[lutIndex(t*(lutSize-1))]
}

// Map returns the colour of v on a scale whose ends lo and hi take the
// palette's first and last colours (hi may be below lo, reversing the
// palette). Values beyond the ends are clamped; NaN gives p.NaN. If
// hi == lo every number maps to the middle colour.
func (p *Palette) Map(v, lo, hi float64) color.RGBA {
	if v != v {
		return p.NaN
	}
	scale, base := lutMap(lo, hi)
	return p.lut[lutIndex((v-lo)*scale+base)]
}

// lutMap returns the factor from a value's distance above lo to a
// fractional table index, and the index of lo itself (the middle entry when
// the range is empty). The raster loops use the same expression as Map, so
// that a pixel's colour is exactly Map of its value.
func lutMap(lo, hi float64) (scale, base float64) {
	if hi == lo {
		return 0, (lutSize - 1) / 2.0
	}
	return (lutSize - 1) / (hi - lo), 0
}

// lutIndex rounds a fractional table index to the nearest entry, clamping.
func lutIndex(f float64) int {
	switch {
	case f <= 0:
		return 0
	case f >= lutSize-1:
		return lutSize - 1
	}
	return int(f + 0.5)
}

// Symmetric returns the range [-m, m] with m = max(|lo|, |hi|), so that zero
// falls on the neutral centre of a diverging palette.
func Symmetric(lo, hi float64) (float64, float64) {
	m := math.Max(math.Abs(lo), math.Abs(hi))
	return -m, m
}

// Palette design. Both palettes are defined here, as curves in OKLCh of our
// own choosing, and share one rule: the further a value is from "nothing"
// (zero magnitude, zero signed value), the darker its colour, so that a map
// printed in grey still orders its values and the worst places stand out
// on the light page.
const (
	seqLightL = 0.97 // lightness at t = 0 (smallest magnitude)
	seqDarkL  = 0.27 // lightness at t = 1 (largest magnitude)
	divMidL   = 0.96 // lightness of the neutral centre of Diverging
	divEndL   = 0.40 // lightness at both ends of Diverging
)

// Sequential is a palette for magnitudes: pale cream at 0 through yellow,
// orange, red and magenta to deep indigo at 1. OKLab lightness falls
// linearly from 0.97 to 0.27; the hue turns steadily from 95° to 280°
// (through 0°), and chroma rises from near-neutral at the pale end to a
// gamut-limited maximum in the middle.
var Sequential = NewPalette("sequential", sequentialCurve)

func sequentialCurve(t float64) LCh {
	return LCh{
		L: seqLightL + (seqDarkL-seqLightL)*t,
		C: 0.03 + 0.16*math.Sin(0.85*math.Pi*t),
		H: math.Mod(95-175*t+360, 360),
	}
}

// Diverging is a palette for signed values on a symmetric range: a deep
// blue at 0, a neutral light grey at 0.5 and a deep orange-red at 1, for
// negative, zero and positive values. Lightness falls linearly and
// symmetrically from 0.96 at the centre to 0.40 at both ends, so the two
// halves are told apart by hue (blue against orange, a pair that stays
// distinct for red–green colour-blind readers: TestColourBlind) and the
// size of a value by lightness.
var Diverging = NewPalette("diverging", divergingCurve)

func divergingCurve(t float64) LCh {
	u := math.Abs(2*t - 1) // 0 at the centre, 1 at either end
	// Chroma rises from neutral, peaks at 0.16 near u = 0.6 and eases to
	// 0.094 at the ends, staying just inside the sRGB gamut of both hues
	// all the way: a curve that ran into the gamut boundary would be cut
	// there, and the kink shows as a band in a smooth field.
	c := LCh{L: divMidL + (divEndL-divMidL)*u, C: 0.16 * math.Sin(0.8*math.Pi*math.Pow(u, 1.1))}
	if t < 0.5 {
		c.H = 262 - 12*u // blue, leaning slightly to cyan towards the centre
	} else {
		c.H = 48 - 10*u // orange, deepening to orange-red
	}
	return c
}

// Qualitative is a set of eight colours for distinct series, in the order
// they should be used. They differ in hue and also in lightness, so that
// neighbours in the list stay apart for colour-blind readers and in grey.
var Qualitative = []color.RGBA{
	qual(0.48, 0.15, 258), // blue
	qual(0.72, 0.16, 62),  // orange
	qual(0.58, 0.11, 165), // teal green
	qual(0.52, 0.17, 340), // magenta
	qual(0.78, 0.15, 112), // olive yellow
	qual(0.40, 0.12, 28),  // brick
	qual(0.74, 0.09, 225), // sky
	qual(0.45, 0.00, 0),   // grey
}

func qual(l, c, h float64) color.RGBA { return gamutLimited(LCh{l, c, h}).RGBA() }

// Series returns the i'th qualitative colour, wrapping around.
func Series(i int) color.RGBA { return Qualitative[i%len(Qualitative)] }
