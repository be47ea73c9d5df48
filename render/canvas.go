package render

import (
	"image"
	"image/color"
	"io"
	"math"
	"sync"

	"github.com/fogleman/gg"
	"github.com/golang/freetype/truetype"
	"golang.org/x/image/font"
	"golang.org/x/image/font/gofont/gobold"
	"golang.org/x/image/font/gofont/goregular"
	"golang.org/x/image/math/fixed"
)

// Colours of the page furniture: a light neutral page, near-black ink for
// text and outlines, and a mid grey for frames and grid lines.
var (
	Background = color.RGBA{250, 250, 249, 255}
	Ink        = color.RGBA{33, 33, 36, 255}
	Frame      = color.RGBA{120, 120, 124, 255}
	GridLine   = color.RGBA{222, 222, 224, 255}
	Halo       = color.RGBA{255, 255, 255, 255}
)

// Canvas is an RGBA image with a gg context drawing on the same pixels and
// text faces scaled to the image: every finished map and plot is a Canvas.
type Canvas struct {
	img *image.RGBA
	dc  *gg.Context
	em  float64 // body text size in pixels; all layout is in multiples of it

	faces map[faceKey]font.Face
	// clipped is set while a gg clip is in force (drawAxesPanel): drawing
	// straight into the pixels would ignore it.
	clipped bool
}

// fillRect fills the part of r inside img with the opaque colour col, by
// doubling copies along the first row and then row copies: several times
// faster than draw.Draw with a uniform source on these large images.
func fillRect(img *image.RGBA, r image.Rectangle, col color.RGBA) {
	r = r.Intersect(img.Rect)
	if r.Empty() {
		return
	}
	n := 4 * r.Dx()
	first := img.Pix[img.PixOffset(r.Min.X, r.Min.Y):][:n]
	copy(first, []byte{col.R, col.G, col.B, col.A})
	for k := 4; k < n; k *= 2 {
		copy(first[k:], first[:k])
	}
	for y := r.Min.Y + 1; y < r.Max.Y; y++ {
		copy(img.Pix[img.PixOffset(r.Min.X, y):][:n], first)
	}
}

type faceKey struct {
	size float64
	bold bool
}

// newCanvas returns a w x h canvas filled with Background, with body text
// em pixels tall.
func newCanvas(w, h int, em float64) *Canvas {
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	fillRect(img, img.Rect, Background)
	return &Canvas{img: img, dc: gg.NewContextForRGBA(img), em: em, faces: map[faceKey]font.Face{}}
}

// Image returns the canvas pixels.
func (c *Canvas) Image() *image.RGBA { return c.img }

// Bounds returns the image rectangle.
func (c *Canvas) Bounds() image.Rectangle { return c.img.Bounds() }

// EncodePNG writes the canvas as an 8-bit RGB PNG, compressed on all cores
// (see encodeRGB). Every canvas is opaque: it starts filled with
// Background and everything drawn is composited over it.
func (c *Canvas) EncodePNG(w io.Writer) error { return encodeRGB(w, c.img) }

// Fonts: the Go fonts (goregular, gobold) compiled into the binary, so
// rendering never depends on what a machine has installed. They are parsed
// with freetype's truetype package, which gg already depends on; x/image's
// opentype package would pull golang.org/x/text and x/sys into go.sum.
var (
	regularFont = sync.OnceValue(func() *truetype.Font { return mustParse(goregular.TTF) })
	boldFont    = sync.OnceValue(func() *truetype.Font { return mustParse(gobold.TTF) })
)

func mustParse(ttf []byte) *truetype.Font {
	f, err := truetype.Parse(ttf)
	if err != nil {
		panic("render: embedded Go font does not parse: " + err.Error())
	}
	return f
}

// face returns a face of the given pixel size. Faces are cached per canvas
// because a truetype face is not safe for concurrent use.
func (c *Canvas) face(size float64, bold bool) font.Face {
	k := faceKey{math.Round(size*4) / 4, bold}
	if f, ok := c.faces[k]; ok {
		return f
	}
	src := regularFont()
	if bold {
		src = boldFont()
	}
	f := truetype.NewFace(src, &truetype.Options{Size: k.size, DPI: 72, Hinting: font.HintingNone})
	c.faces[k] = f
	return f
}

// textStyle selects size (in em), weight and colour of a piece of text.
type textStyle struct {
	size  float64 // in em; 0 means 1
	bold  bool
	color color.Color // nil means Ink
	halo  bool        // draw an outline behind the glyphs
	// haloColor is the colour of the outline; nil means Halo (white).
	haloColor color.Color
}

// px returns the text size in pixels for body text em pixels tall.
func (ts textStyle) px(em float64) float64 {
	if ts.size == 0 {
		return em
	}
	return ts.size * em
}

func (c *Canvas) setFont(ts textStyle) float64 {
	px := ts.px(c.em)
	c.dc.SetFontFace(c.face(px, ts.bold))
	return px
}

// capHeight of the Go fonts is 1409/2048 em (from the fonts' OS/2 table).
const capHeight = 1409.0 / 2048

// measure returns the advance width of s in whole pixels (rounded down, as
// gg's MeasureString does: the layout of every figure rests on it).
func (c *Canvas) measure(s string, ts textStyle) float64 {
	return float64(font.MeasureString(c.face(ts.px(c.em), ts.bold), s).Floor())
}

// text draws s anchored at (x, y): ax = 0, 0.5, 1 puts x at the left, centre
// or right of the text; ay = 0, 0.5, 1 puts y at the top, middle or base of
// the capital letters.
func (c *Canvas) text(s string, x, y, ax, ay float64, ts textStyle) {
	c.drawText(s, x, y, ax, ay, ts, false)
}

// drawText is text. Unrotated, the glyphs go straight into the pixels with
// a font.Drawer (image/draw's glyph path), about five times faster than
// gg's DrawString, which resamples every glyph through a bilinear transform
// even when nothing is rotated or scaled; rotated (textUp) they go through
// gg and its transform. Text is never drawn under a gg clip (drawAxesPanel
// lifts it first), which the direct path would not honour.
func (c *Canvas) drawText(s string, x, y, ax, ay float64, ts textStyle, rotated bool) {
	px := c.setFont(ts)
	face := c.face(px, ts.bold)
	x -= ax * c.measure(s, ts)
	base := y + (1-ay)*capHeight*px
	put := func(col color.Color, dx, dy float64) {
		if rotated {
			c.dc.SetColor(col)
			c.dc.DrawString(s, x+dx, base+dy)
			return
		}
		d := font.Drawer{Dst: c.img, Src: image.NewUniform(col), Face: face,
			Dot: fixed.Point26_6{X: fixed.Int26_6(math.Round((x + dx) * 64)), Y: fixed.Int26_6(math.Round((base + dy) * 64))}}
		d.DrawString(s)
	}
	if ts.halo {
		halo := ts.haloColor
		if halo == nil {
			halo = Halo
		}
		r := math.Max(1, 0.09*px)
		for k := range 12 {
			a := float64(k) * math.Pi / 6
			put(halo, r*math.Cos(a), r*math.Sin(a))
		}
	}
	put(orInk(ts.color), 0, 0)
}

// textBox returns the pixel box text() would cover.
func (c *Canvas) textBox(s string, x, y, ax, ay float64, ts textStyle) box {
	px := ts.px(c.em)
	w := c.measure(s, ts)
	x -= ax * w
	top := y - ay*capHeight*px
	return box{x, top - 0.25*px, x + w, top + capHeight*px + 0.3*px}
}

// textUp draws s rotated a quarter turn anticlockwise (reading upwards),
// centred on (x, y).
func (c *Canvas) textUp(s string, x, y float64, ts textStyle) {
	c.dc.Push()
	c.dc.RotateAbout(-math.Pi/2, x, y)
	c.drawText(s, x, y, 0.5, 0.5, ts, true)
	c.dc.Pop()
}

func orInk(c color.Color) color.Color {
	if c == nil {
		return Ink
	}
	return c
}

// box is an axis-aligned pixel rectangle used for label placement.
type box struct{ x0, y0, x1, y1 float64 }

func (b box) overlaps(o box) bool {
	return b.x0 < o.x1 && o.x0 < b.x1 && b.y0 < o.y1 && o.y0 < b.y1
}

func (b box) inside(r image.Rectangle) bool {
	return b.x0 >= float64(r.Min.X) && b.y0 >= float64(r.Min.Y) &&
		b.x1 <= float64(r.Max.X) && b.y1 <= float64(r.Max.Y)
}

func (b box) grow(d float64) box { return box{b.x0 - d, b.y0 - d, b.x1 + d, b.y1 + d} }

// LineStyle sets how a line is stroked. The zero value is a thin solid
// line in Ink.
type LineStyle struct {
	Color color.Color // nil means Ink
	Width float64     // pixels; 0 means the canvas's thin line width
	Dash  []float64   // dash and gap lengths in pixels; nil means solid
}

// TextSize returns the body text size in pixels, the unit of the layout:
// use it to size dots and markers so that they scale with the image.
func (c *Canvas) TextSize() float64 { return c.em }

// Thin returns the width in pixels of the default thin line (a LineStyle
// with zero Width); multiples of it give heavier lines that scale with the
// image.
func (c *Canvas) Thin() float64 { return c.thin() }

// thin is the default line width: about a thousandth of the image width,
// at least one pixel.
func (c *Canvas) thin() float64 { return math.Max(1, math.Round(c.em/12*2)/2) }

func (c *Canvas) applyLine(s LineStyle) {
	c.dc.SetColor(orInk(s.Color))
	w := s.Width
	if w == 0 {
		w = c.thin()
	}
	c.dc.SetLineWidth(w)
	c.dc.SetDash(s.Dash...)
	c.dc.SetLineCapButt()
	c.dc.SetLineJoinRound()
}

// strokeBox draws the outline of a pixel rectangle with a crisp line.
func (c *Canvas) strokeBox(b box, s LineStyle) {
	c.applyLine(s)
	c.dc.DrawRectangle(b.x0, b.y0, b.x1-b.x0, b.y1-b.y0)
	c.dc.Stroke()
	c.dc.SetDash()
}

// fillBox fills b with col: an opaque colour on a box with whole-pixel
// corners straight into the pixels (what gg's rasteriser would paint there,
// full coverage inside and none outside, at a fraction of its cost on the
// large plot panels), anything else through gg.
func (c *Canvas) fillBox(b box, col color.Color) {
	r := image.Rect(int(b.x0), int(b.y0), int(b.x1), int(b.y1))
	whole := float64(r.Min.X) == b.x0 && float64(r.Min.Y) == b.y0 && float64(r.Max.X) == b.x1 && float64(r.Max.Y) == b.y1
	if _, _, _, a := col.RGBA(); whole && a == 0xffff && !c.clipped {
		fillRect(c.img, r, color.RGBAModel.Convert(col).(color.RGBA))
		return
	}
	c.dc.SetColor(col)
	c.dc.DrawRectangle(b.x0, b.y0, b.x1-b.x0, b.y1-b.y0)
	c.dc.Fill()
}
