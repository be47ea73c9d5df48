package render

import (
	"image"
	"image/draw"
)

// Stack returns one canvas holding cs from top to bottom, each at its own
// size and left-aligned, as wide as the widest: figures whose panels need
// their own x axis (one plot per section, each over its own offsets). The
// text size is the first canvas's. It panics when cs is empty.
func Stack(cs ...*Canvas) *Canvas {
	w, h := 0, 0
	for _, c := range cs {
		w, h = max(w, c.Bounds().Dx()), h+c.Bounds().Dy()
	}
	out := newCanvas(w, h, cs[0].em)
	y := 0
	for _, c := range cs {
		b := c.Bounds()
		draw.Draw(out.img, image.Rect(0, y, b.Dx(), y+b.Dy()), c.img, b.Min, draw.Src)
		y += b.Dy()
	}
	return out
}
