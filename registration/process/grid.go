package process

import (
	"errors"
	"fmt"
	"io"
	"sort"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// ReadGrid reads a measured shape from CSV with the columns
// "x [unit], y [unit], value [unit]", one row per node, the nodes forming a
// complete regular grid in any order (as the residual grids of package
// registration). length says whether the value is a length (its column
// needs a unit) or a relative permittivity (its column takes none). The
// values land in the DX of a registration.Grid, so that they are
// interpolated by the same bilinear rule.
func ReadGrid(r io.Reader, file string, length bool) (*registration.Grid, error) {
	cr, err := registration.NewCSVReader(r, file)
	if err != nil {
		return nil, err
	}
	header, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			return nil, &registration.CSVError{File: file, Row: 1, Err: errors.New("the file is empty (want a header such as \"x [in],y [in],value [mil]\")")}
		}
		return nil, registration.ReadError(file, err)
	}
	kinds := map[string]unit.Kind{"x": unit.Length, "y": unit.Length}
	if length {
		kinds["value"] = unit.Length
	}
	idx, cols, err := unit.ParseHeader(header, kinds)
	if err != nil {
		return nil, &registration.CSVError{File: file, Row: 1, Err: err}
	}
	for _, need := range []string{"x", "y", "value"} {
		if _, ok := idx[need]; !ok {
			return nil, &registration.CSVError{File: file, Row: 1, Err: fmt.Errorf("missing column %q (want x, y, value, e.g. \"value [mil]\")", need)}
		}
	}
	type node struct{ x, y, v float64 }
	var nodes []node
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, registration.ReadError(file, err)
		}
		line, _ := cr.FieldPos(0)
		var v [3]float64
		for k, name := range []string{"x", "y", "value"} {
			c := idx[name]
			if k < 2 {
				v[k], err = registration.PositionCell(file, line, cols[c], rec[c])
			} else {
				v[k], err = registration.Cell(file, line, cols[c], rec[c])
				if err == nil && length {
					if e := registration.CheckTerm(v[k], unit.Length); e != nil {
						err = &registration.CSVError{File: file, Row: line, Column: cols[c].Name, Err: e}
					}
				}
			}
			if err != nil {
				return nil, err
			}
		}
		nodes = append(nodes, node{v[0], v[1], v[2]})
	}
	if len(nodes) == 0 {
		return nil, &registration.CSVError{File: file, Err: errors.New("no grid nodes")}
	}
	xs, ys := distinct(nodes, func(n node) float64 { return n.x }), distinct(nodes, func(n node) float64 { return n.y })
	if len(xs)*len(ys) != len(nodes) {
		return nil, &registration.CSVError{File: file, Err: fmt.Errorf("%d nodes do not form a regular %d x %d grid", len(nodes), len(xs), len(ys))}
	}
	g := &registration.Grid{X: xs, Y: ys, DX: make([][]float64, len(ys)), DY: make([][]float64, len(ys))}
	seen := make([][]bool, len(ys))
	for j := range ys {
		g.DX[j], g.DY[j], seen[j] = make([]float64, len(xs)), make([]float64, len(xs)), make([]bool, len(xs))
	}
	for _, n := range nodes {
		i, j := sort.SearchFloat64s(xs, n.x), sort.SearchFloat64s(ys, n.y)
		if seen[j][i] {
			return nil, &registration.CSVError{File: file, Err: fmt.Errorf("node (%g, %g) m given twice", n.x, n.y)}
		}
		seen[j][i] = true
		g.DX[j][i] = n.v
	}
	return g, nil
}

// Covers reports whether the grid's nodes reach the rectangle |x| ≤ half.X,
// |y| ≤ half.Y (the usable area of a panel): beyond its nodes a grid holds
// its edge values, which would be invented data.
func Covers(g *registration.Grid, half panel.Vec) bool {
	const slack = 1e-6 // m: a node written at the border to a micrometre still covers it
	return g.X[0] <= -half.X+slack && g.X[len(g.X)-1] >= half.X-slack &&
		g.Y[0] <= -half.Y+slack && g.Y[len(g.Y)-1] >= half.Y-slack
}

func distinct[T any](items []T, f func(T) float64) []float64 {
	v := make([]float64, 0, len(items))
	for _, it := range items {
		v = append(v, f(it))
	}
	sort.Float64s(v)
	out := v[:0]
	for i, x := range v {
		if i == 0 || x != out[len(out)-1] {
			out = append(out, x)
		}
	}
	return out
}
