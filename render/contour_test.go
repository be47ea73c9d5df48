package render

import (
	"math"
	"testing"
)

// TestContourCircle contours the cone f = sqrt(x²+y²) at level r: the
// exact answer is the circle of radius r (closed form). Linear interpolation
// along cell edges of a cone is exact on the edges, so every returned point
// lies on the circle within the chord sagitta h²/(8r) of the grid spacing h
// (the distance from a chord to its arc).
func TestContourCircle(t *testing.T) {
	const r = 0.3
	for _, n := range []int{21, 64, 101} {
		g := NewGrid(Centered(1, 1), n, n, func(x, y float64) float64 { return math.Hypot(x, y) })
		lines := Contour(g, r)
		if len(lines) != 1 {
			t.Fatalf("n=%d: %d lines, want one closed circle", n, len(lines))
		}
		l := lines[0]
		if l[0] != l[len(l)-1] {
			t.Errorf("n=%d: circle not closed", n)
		}
		h := 1.0 / float64(n-1)
		tol := h * h / (8 * r) * 1.01
		var area float64
		for k, p := range l {
			if d := math.Abs(math.Hypot(p.X, p.Y) - r); d > tol+1e-12 {
				t.Errorf("n=%d: point %v is %.2e off the circle (tol %.2e)", n, p, d, tol)
				break
			}
			if k > 0 {
				q := l[k-1]
				area += q.X*p.Y - p.X*q.Y
			}
		}
		// The polygon's area approaches πr² from below (shoelace formula).
		area = math.Abs(area) / 2
		if rel := 1 - area/(math.Pi*r*r); rel < 0 || rel > 0.01 {
			t.Errorf("n=%d: area %.5f vs πr² %.5f", n, area, math.Pi*r*r)
		}
	}
}

// TestContourOpen checks a plane f = x: the level-0.25 contour is one
// straight open line x = 0.25 from the bottom edge to the top edge.
func TestContourOpen(t *testing.T) {
	g := NewGrid(Centered(1, 2), 11, 7, func(x, y float64) float64 { return x })
	lines := Contour(g, 0.25)
	if len(lines) != 1 || len(lines[0]) != 7 {
		t.Fatalf("got %d lines %v", len(lines), lines)
	}
	for _, p := range lines[0] {
		if math.Abs(p.X-0.25) > 1e-12 {
			t.Errorf("point %v off x = 0.25", p)
		}
	}
	if a, b := lines[0][0].Y, lines[0][6].Y; math.Abs(math.Abs(a-b)-2) > 1e-12 {
		t.Errorf("line runs from y=%g to y=%g", a, b)
	}
}

func TestGridAt(t *testing.T) {
	// A bilinear function is reproduced exactly by bilinear interpolation.
	f := func(x, y float64) float64 { return 1 + 2*x - 3*y + 0.5*x*y }
	g := NewGrid(Rect{Point{-1, -2}, Point{3, 1}}, 5, 4, f)
	for _, p := range []Point{{0.3, 0.7}, {-1, -2}, {3, 1}, {2.9, -1.99}} {
		if d := math.Abs(g.At(p.X, p.Y) - f(p.X, p.Y)); d > 1e-12 {
			t.Errorf("At(%v) off by %g", p, d)
		}
	}
	// Corner values (hand-computed): 6, 10, -4.5, 5.5.
	if lo, hi := g.Range(); lo != -4.5 || hi != 10 {
		t.Errorf("range %g %g", lo, hi)
	}
}
