package render

import (
	"image/color"
	"math"
)

// This file holds the colour science the palettes are built on: the sRGB
// transfer function and Björn Ottosson's OKLab space.
//
// References:
//   - IEC 61966-2-1:1999, Multimedia systems and equipment — Colour
//     measurement and management — Part 2-1: Default RGB colour space — sRGB.
//   - B. Ottosson, "A perceptual color space for image processing", 2020,
//     https://bottosson.github.io/posts/oklab/ (the two matrix pairs below,
//     transcribed from memory; TestOKLabRoundTrip and TestOKLabWhite check
//     them: white must map to L = 1, a = b = 0 and the two directions must
//     invert each other).

// Lab is a colour in Ottosson's OKLab space. L is perceived lightness
// (0 black, 1 reference white); A and B are the green–red and blue–yellow
// opponent axes.
type Lab struct{ L, A, B float64 }

// LCh is OKLab in polar form: lightness, chroma and hue angle in degrees.
type LCh struct{ L, C, H float64 }

// Lab converts to rectangular form.
func (c LCh) Lab() Lab {
	h := c.H * math.Pi / 180
	return Lab{c.L, c.C * math.Cos(h), c.C * math.Sin(h)}
}

// LCh converts to polar form; the hue of a neutral colour is 0.
func (c Lab) LCh() LCh {
	h := math.Atan2(c.B, c.A) * 180 / math.Pi
	if h < 0 {
		h += 360
	}
	return LCh{c.L, math.Hypot(c.A, c.B), h}
}

// srgbDecode is the sRGB electro-optical transfer function of
// IEC 61966-2-1 (section 5.2): encoded value in [0,1] to linear light.
func srgbDecode(v float64) float64 {
	if v <= 0.04045 {
		return v / 12.92
	}
	return math.Pow((v+0.055)/1.055, 2.4)
}

// srgbEncode is the inverse of srgbDecode (IEC 61966-2-1, section 5.3).
func srgbEncode(v float64) float64 {
	if v <= 0.0031308 {
		return 12.92 * v
	}
	return 1.055*math.Pow(v, 1/2.4) - 0.055
}

// LinearToLab converts linear-light sRGB components to OKLab (Ottosson 2020,
// "Converting from linear sRGB to Oklab").
func LinearToLab(r, g, b float64) Lab {
	l := 0.4122214708*r + 0.5363325363*g + 0.0514459929*b
	m := 0.2119034982*r + 0.6806995451*g + 0.1073969566*b
	s := 0.0883024619*r + 0.2817188376*g + 0.6299787005*b
	l, m, s = math.Cbrt(l), math.Cbrt(m), math.Cbrt(s)
	return Lab{
		L: 0.2104542553*l + 0.7936177850*m - 0.0040720468*s,
		A: 1.9779984951*l - 2.4285922050*m + 0.4505937099*s,
		B: 0.0259040371*l + 0.7827717662*m - 0.8086757660*s,
	}
}

// Linear converts an OKLab colour to linear-light sRGB components, which
// fall outside [0,1] when the colour is out of the sRGB gamut.
func (c Lab) Linear() (r, g, b float64) {
	l := c.L + 0.3963377774*c.A + 0.2158037573*c.B
	m := c.L - 0.1055613458*c.A - 0.0638541728*c.B
	s := c.L - 0.0894841775*c.A - 1.2914855480*c.B
	l, m, s = l*l*l, m*m*m, s*s*s
	return +4.0767416621*l - 3.3077115913*m + 0.2309699292*s,
		-1.2684380046*l + 2.6097574011*m - 0.3413193965*s,
		-0.0041960863*l - 0.7034186147*m + 1.7076147010*s
}

// gamutEps allows for rounding in the matrices when testing whether a colour
// lies inside the sRGB gamut.
const gamutEps = 1e-9

// InGamut reports whether c is inside the sRGB gamut.
func (c Lab) InGamut() bool {
	r, g, b := c.Linear()
	return r >= -gamutEps && r <= 1+gamutEps &&
		g >= -gamutEps && g <= 1+gamutEps &&
		b >= -gamutEps && b <= 1+gamutEps
}

// RGBA converts c to 8-bit sRGB, clipping each linear component to [0,1]
// and rounding to the nearest code value.
func (c Lab) RGBA() color.RGBA {
	r, g, b := c.Linear()
	return color.RGBA{quantize(r), quantize(g), quantize(b), 255}
}

func quantize(lin float64) uint8 {
	lin = math.Min(1, math.Max(0, lin))
	return uint8(math.Round(255 * srgbEncode(lin)))
}

// LabOf converts an 8-bit sRGB colour (alpha ignored) to OKLab.
func LabOf(c color.RGBA) Lab {
	return LinearToLab(srgbDecode(float64(c.R)/255),
		srgbDecode(float64(c.G)/255), srgbDecode(float64(c.B)/255))
}

// Luma reports the Rec. ITU-R BT.709 luma Y' = 0.2126 R' + 0.7152 G' +
// 0.0722 B' of c in [0,1], computed on the gamma-encoded components as a
// greyscale conversion does (ITU-R BT.709-6, item 3.2).
func Luma(c color.RGBA) float64 {
	return (0.2126*float64(c.R) + 0.7152*float64(c.G) + 0.0722*float64(c.B)) / 255
}

// maxChroma reports the largest chroma at lightness l and hue h (degrees)
// that stays inside the sRGB gamut, found by bisection (the in-gamut chroma
// set at fixed L and h is an interval starting at 0).
func maxChroma(l, h float64) float64 {
	lo, hi := 0.0, 0.5
	for range 40 {
		mid := (lo + hi) / 2
		if (LCh{l, mid, h}).Lab().InGamut() {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo
}
