package render

import "math"

// Contour returns the lines where the bilinear surface through the grid
// equals level, found by marching squares (W. E. Lorensen and H. E. Cline,
// "Marching cubes", SIGGRAPH 1987, in its two-dimensional form): each cell
// whose corners straddle the level contributes one or two segments whose
// ends lie on the cell edges, placed by linear interpolation along the edge.
// Segments are joined into polylines through their shared edge crossings; a
// closed line repeats its first point at the end. A saddle cell (corners
// alternately above and below) is resolved by the value at the cell centre,
// the mean of its corners. Cells with a NaN corner are skipped.
func Contour(g *Grid, level float64) [][]Point {
	nx, ny := g.NX, g.NY
	// Edge ids: horizontal edge from node (i,j) to (i+1,j) is j*nx+i; vertical
	// edge from (i,j) to (i,j+1) is nx*ny + j*nx+i.
	hEdge := func(i, j int) int { return j*nx + i }
	vEdge := func(i, j int) int { return nx*ny + j*nx + i }
	point := map[int]Point{}
	cross := func(e int) Point {
		if p, ok := point[e]; ok {
			return p
		}
		var i0, j0, i1, j1 int
		if e < nx*ny {
			j0, i0 = e/nx, e%nx
			i1, j1 = i0+1, j0
		} else {
			k := e - nx*ny
			j0, i0 = k/nx, k%nx
			i1, j1 = i0, j0+1
		}
		a, b := g.V[j0*nx+i0], g.V[j1*nx+i1]
		t := (level - a) / (b - a)
		p := Point{
			g.nodeX(i0) + t*(g.nodeX(i1)-g.nodeX(i0)),
			g.nodeY(j0) + t*(g.nodeY(j1)-g.nodeY(j0)),
		}
		point[e] = p
		return p
	}
	// links holds, for each edge crossing, the one or two crossings it is
	// joined to by segments.
	links := map[int][]int{}
	var order []int // crossings in the order first seen, for determinism
	link := func(a, b int) {
		for _, e := range [2]int{a, b} {
			if _, ok := links[e]; !ok {
				order = append(order, e)
			}
		}
		links[a] = append(links[a], b)
		links[b] = append(links[b], a)
	}
	for j := 0; j < ny-1; j++ {
		for i := 0; i < nx-1; i++ {
			v0 := g.V[j*nx+i]       // bottom left
			v1 := g.V[j*nx+i+1]     // bottom right
			v2 := g.V[(j+1)*nx+i+1] // top right
			v3 := g.V[(j+1)*nx+i]   // top left
			if math.IsNaN(v0 + v1 + v2 + v3) {
				continue
			}
			code := 0
			for k, v := range [4]float64{v0, v1, v2, v3} {
				if v >= level {
					code |= 1 << k
				}
			}
			if code == 0 || code == 15 {
				continue
			}
			// Edges of the cell: bottom, right, top, left.
			b, r, t, l := hEdge(i, j), vEdge(i+1, j), hEdge(i, j+1), vEdge(i, j)
			switch code {
			case 1, 14:
				link(l, b)
			case 2, 13:
				link(b, r)
			case 3, 12:
				link(l, r)
			case 4, 11:
				link(r, t)
			case 6, 9:
				link(b, t)
			case 7, 8:
				link(l, t)
			case 5, 10:
				centreHigh := (v0+v1+v2+v3)/4 >= level
				if (code == 5) == centreHigh {
					// The high corners (bottom left and top right for 5)
					// join through the centre: cut off the low corners.
					link(b, r)
					link(t, l)
				} else {
					link(l, b)
					link(r, t)
				}
			}
		}
	}
	var lines [][]Point
	used := map[[2]int]bool{}
	key := func(a, b int) [2]int {
		if a > b {
			a, b = b, a
		}
		return [2]int{a, b}
	}
	walk := func(start int) []int {
		path := []int{start}
		cur := start
		for {
			next := -1
			for _, n := range links[cur] {
				if !used[key(cur, n)] {
					next = n
					break
				}
			}
			if next < 0 {
				return path
			}
			used[key(cur, next)] = true
			path = append(path, next)
			cur = next
			if cur == start {
				return path
			}
		}
	}
	emit := func(path []int) {
		pts := make([]Point, len(path))
		for k, e := range path {
			pts[k] = cross(e)
		}
		lines = append(lines, pts)
	}
	// Open lines start at a crossing with one link (the grid edge); then
	// whatever remains is closed loops.
	for _, e := range order {
		if len(links[e]) == 1 && !used[key(e, links[e][0])] {
			emit(walk(e))
		}
	}
	for _, e := range order {
		for _, n := range links[e] {
			if !used[key(e, n)] {
				emit(walk(e))
			}
		}
	}
	return lines
}
