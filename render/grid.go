package render

import "math"

// Point is a position in panel coordinates, in metres: origin at the panel
// centre, x to the right, y up.
type Point struct{ X, Y float64 }

// Rect is a closed rectangle in panel coordinates, in metres, with
// Min.X <= X <= Max.X and Min.Y <= Y <= Max.Y. The zero Rect is the single
// point at the origin.
type Rect struct{ Min, Max Point }

// Centered returns the w x h rectangle centred on the origin, such as a
// panel outline.
func Centered(w, h float64) Rect {
	return Rect{Point{-w / 2, -h / 2}, Point{w / 2, h / 2}}
}

// Dx returns the width of r.
func (r Rect) Dx() float64 { return r.Max.X - r.Min.X }

// Dy returns the height of r.
func (r Rect) Dy() float64 { return r.Max.Y - r.Min.Y }

// Inset returns r shrunk by d on every side (grown if d is negative).
func (r Rect) Inset(d float64) Rect {
	return Rect{Point{r.Min.X + d, r.Min.Y + d}, Point{r.Max.X - d, r.Max.Y - d}}
}

// Grid holds values sampled at the nodes of a regular NX x NY grid spanning
// Bounds: node (i, j) sits at x = Bounds.Min.X + i·Dx/(NX−1),
// y = Bounds.Min.Y + j·Dy/(NY−1), and its value is V[j*NX+i] (rows from the
// bottom up). NX and NY are at least 2.
type Grid struct {
	Bounds Rect
	NX, NY int
	V      []float64
}

// NewGrid samples f at the nodes of an nx x ny grid over r. It panics if nx
// or ny is below 2.
func NewGrid(r Rect, nx, ny int, f func(x, y float64) float64) *Grid {
	if nx < 2 || ny < 2 {
		panic("render: grid needs at least 2 x 2 nodes")
	}
	g := &Grid{Bounds: r, NX: nx, NY: ny, V: make([]float64, nx*ny)}
	for j := range ny {
		y := g.nodeY(j)
		for i := range nx {
			g.V[j*nx+i] = f(g.nodeX(i), y)
		}
	}
	return g
}

func (g *Grid) nodeX(i int) float64 {
	return g.Bounds.Min.X + float64(i)*g.Bounds.Dx()/float64(g.NX-1)
}

func (g *Grid) nodeY(j int) float64 {
	return g.Bounds.Min.Y + float64(j)*g.Bounds.Dy()/float64(g.NY-1)
}

// cell locates coordinate u on an axis of n nodes from lo to hi: the index
// of the cell's lower node and the fraction across it, clamped to the grid.
func cell(u, lo, hi float64, n int) (int, float64) {
	f := (u - lo) / (hi - lo) * float64(n-1)
	switch {
	case !(f > 0): // also NaN
		return 0, 0
	case f >= float64(n-1):
		return n - 2, 1
	}
	i := int(f)
	return i, f - float64(i)
}

// At returns the bilinear interpolation of the grid at (x, y); points
// outside Bounds take the value at the nearest edge.
func (g *Grid) At(x, y float64) float64 {
	i, fx := cell(x, g.Bounds.Min.X, g.Bounds.Max.X, g.NX)
	j, fy := cell(y, g.Bounds.Min.Y, g.Bounds.Max.Y, g.NY)
	return g.bilinear(i, fx, j, fy)
}

func (g *Grid) bilinear(i int, fx float64, j int, fy float64) float64 {
	k := j*g.NX + i
	a, b := g.V[k], g.V[k+1]
	c, d := g.V[k+g.NX], g.V[k+g.NX+1]
	return (1-fy)*((1-fx)*a+fx*b) + fy*((1-fx)*c+fx*d)
}

// Range returns the smallest and largest finite values in the grid, or NaN
// twice if there are none.
func (g *Grid) Range() (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, v := range g.V {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	if lo > hi {
		return math.NaN(), math.NaN()
	}
	return lo, hi
}
