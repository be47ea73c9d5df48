package render

import (
	"image/color"
	"math"
	"testing"
)

// Colour-vision-deficiency simulation matrices for full dichromacy
// (severity 1.0), acting on linear sRGB: G. M. Machado, M. M. Oliveira and
// L. A. F. Fernandes, "A physiologically-based model for simulation of
// color vision deficiency", IEEE TVCG 15(6), 2009, table of matrices
// (values from memory; each row sums to 1, so white stays white, which the
// test checks).
var cvdMatrices = map[string][3][3]float64{
	"protanopia": {
		{0.152286, 1.052583, -0.204868},
		{0.114503, 0.786281, 0.099216},
		{-0.003882, -0.048116, 1.051998},
	},
	"deuteranopia": {
		{0.367322, 0.860646, -0.227968},
		{0.280085, 0.672501, 0.047413},
		{-0.011820, 0.042940, 0.968881},
	},
	"tritanopia": {
		{1.255528, -0.076749, -0.178779},
		{-0.078411, 0.930809, 0.147602},
		{0.004733, 0.691367, 0.303900},
	},
}

// simulate returns the OKLab colour a dichromat of the given matrix sees.
func simulate(m [3][3]float64, c color.RGBA) Lab {
	r, g, b := srgbDecode(float64(c.R)/255), srgbDecode(float64(c.G)/255), srgbDecode(float64(c.B)/255)
	clip := func(v float64) float64 { return math.Min(1, math.Max(0, v)) }
	return LinearToLab(
		clip(m[0][0]*r+m[0][1]*g+m[0][2]*b),
		clip(m[1][0]*r+m[1][1]*g+m[1][2]*b),
		clip(m[2][0]*r+m[2][1]*g+m[2][2]*b))
}

func deltaE(a, b Lab) float64 { return math.Sqrt(sq(a.L-b.L) + sq(a.A-b.A) + sq(a.B-b.B)) }

// TestColourBlind checks the palettes through the three dichromat
// simulations: the diverging palette's two halves stay apart (equal
// lightness, so only the hue tells them apart), the sequential palette's
// lightness order survives, and neighbouring series colours stay apart.
func TestColourBlind(t *testing.T) {
	const (
		minHalves = 0.05 // OKLab; a just-noticeable difference is about 0.02
		minSeries = 0.06
	)
	for name, m := range cvdMatrices {
		for _, row := range m {
			if s := row[0] + row[1] + row[2]; math.Abs(s-1) > 2e-6 {
				t.Fatalf("%s: matrix row sums to %g", name, s)
			}
		}
		for _, u := range []float64{0.15, 0.25, 0.35, 0.45, 0.5} {
			a, b := simulate(m, Diverging.At(0.5-u)), simulate(m, Diverging.At(0.5+u))
			if d := deltaE(a, b); d < minHalves {
				t.Errorf("%s: diverging at ±%.2f from the centre differ by only %.3f", name, u, d)
			}
		}
		prev := math.Inf(1)
		for i := 0; i <= samples; i++ {
			l := simulate(m, Sequential.At(float64(i)/samples)).L
			if l >= prev {
				t.Errorf("%s: sequential lightness not falling at sample %d", name, i)
				break
			}
			prev = l
		}
		for i := 1; i < len(Qualitative); i++ {
			if d := deltaE(simulate(m, Qualitative[i-1]), simulate(m, Qualitative[i])); d < minSeries {
				t.Errorf("%s: series colours %d and %d differ by only %.3f", name, i-1, i, d)
			}
		}
	}
}
