package render

import (
	"image/color"

	"github.com/fogleman/gg"
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
// base of the capital letters (the glyphs go straight into the pixels, see
// Canvas.drawText).
func (s *Sketch) Text(str string, x, y, ax, ay float64, ts TextStyle) {
	s.text(str, x, y, ax, ay, ts.internal())
}

// TextUp draws str reading upwards, centred on (x, y).
func (s *Sketch) TextUp(str string, x, y float64, ts TextStyle) { s.textUp(str, x, y, ts.internal()) }

// TextWidth returns the advance width of str in pixels.
func (s *Sketch) TextWidth(str string, ts TextStyle) float64 { return s.measure(str, ts.internal()) }

// CapHeight returns the height of a capital letter in pixels at the size ts.
func (s *Sketch) CapHeight(ts TextStyle) float64 { return capHeight * ts.internal().px(s.em) }
