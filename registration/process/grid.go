package process

import (
	"errors"
	"fmt"
	"io"

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
	var nodes []registration.GridNode
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
		nodes = append(nodes, registration.GridNode{X: v[0], Y: v[1], DX: v[2]})
	}
	return registration.NewGrid(file, nodes)
}

// Covers reports whether the grid's nodes reach the rectangle |x| ≤ half.X,
// |y| ≤ half.Y (the usable area of a panel): beyond its nodes a grid holds
// its edge values, which would be invented data.
func Covers(g *registration.Grid, half panel.Vec) bool {
	const slack = 1e-6 // m: a node written at the border to a micrometre still covers it
	return g.X[0] <= -half.X+slack && g.X[len(g.X)-1] >= half.X-slack &&
		g.Y[0] <= -half.Y+slack && g.Y[len(g.Y)-1] >= half.Y-slack
}
