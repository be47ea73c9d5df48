package render

import (
	"image"
	"image/color"
	"math"

	"github.com/fogleman/gg"
	"golang.org/x/image/font"
	"golang.org/x/image/math/fixed"
)

// A Sketch is a Canvas for a figure that lays itself out (a drawing to
// scale rather than a plot or a map): the figure draws with the gg context
// and writes text in the canvas's fonts.
type Sketch struct{ *Canvas }

// NewSketch returns a w × h sketch filled with Background, with body text
// em pixels tall.
func NewSketch(w, h int, em float64) *Sketch { return &Sketch{newCanvas(w, h, em)} }

// Context returns the gg context drawing on the sketch's pixels.
func (s *Sketch) Context() *gg.Context { return s.dc }

// TextStyle selects the size (in em; 0 means 1), weight and colour (nil
// means Ink) of a piece of text; Halo draws a white outline behind it.
type TextStyle struct {
	Size  float64
	Bold  bool
	Color color.Color
	Halo  bool
}

func (ts TextStyle) internal() textStyle {
	return textStyle{size: ts.Size, bold: ts.Bold, color: ts.Color, halo: ts.Halo}
}

// Text draws str anchored at (x, y): ax = 0, 0.5, 1 puts x at the left,
// centre or right of the text; ay = 0, 0.5, 1 puts y at the top, middle or
// base of the capital letters. It draws the glyphs with a font.Drawer
// straight into the pixels (image/draw's glyph path), five times faster
// than gg's DrawString, which resamples every glyph through a bilinear
// transform even when nothing is rotated or scaled.
func (s *Sketch) Text(str string, x, y, ax, ay float64, ts TextStyle) {
	size := ts.Size
	if size == 0 {
		size = 1
	}
	px := size * s.em
	face := s.face(px, ts.Bold)
	w := fixedToFloat(font.MeasureString(face, str))
	x -= ax * w
	base := y + (1-ay)*capHeight*px
	draw := func(col color.Color, dx, dy float64) {
		d := font.Drawer{Dst: s.img, Src: image.NewUniform(col), Face: face,
			Dot: fixed.Point26_6{X: fixed.Int26_6(math.Round((x + dx) * 64)), Y: fixed.Int26_6(math.Round((base + dy) * 64))}}
		d.DrawString(str)
	}
	if ts.Halo {
		r := math.Max(1, 0.09*px)
		for k := range 12 {
			a := float64(k) * math.Pi / 6
			draw(Halo, r*math.Cos(a), r*math.Sin(a))
		}
	}
	draw(orInk(ts.Color), 0, 0)
}

func fixedToFloat(v fixed.Int26_6) float64 { return float64(v) / 64 }

// TextUp draws str reading upwards, centred on (x, y).
func (s *Sketch) TextUp(str string, x, y float64, ts TextStyle) { s.textUp(str, x, y, ts.internal()) }

// TextWidth returns the advance width of str in pixels.
func (s *Sketch) TextWidth(str string, ts TextStyle) float64 {
	size := ts.Size
	if size == 0 {
		size = 1
	}
	return fixedToFloat(font.MeasureString(s.face(size*s.em, ts.Bold), str))
}

// CapHeight returns the height of a capital letter in pixels at the size ts.
func (s *Sketch) CapHeight(ts TextStyle) float64 {
	size := ts.Size
	if size == 0 {
		size = 1
	}
	return capHeight * size * s.em
}
