package registration

import (
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
)

// Grid is a measured residual displacement map on a regular rectangular grid of
// nodes, interpolated bilinearly between them and held constant (clamped)
// beyond its edges.
type Grid struct {
	X, Y   []float64   // node coordinates, strictly increasing, m
	DX, DY [][]float64 // displacement at node (X[i], Y[j]) is (DX[j][i], DY[j][i]), m
}

// At returns the interpolated displacement at p.
func (g *Grid) At(p panel.Vec) panel.Vec {
	i, fx := locate(g.X, p.X)
	j, fy := locate(g.Y, p.Y)
	bl := func(a [][]float64) float64 {
		if len(g.X) == 1 && len(g.Y) == 1 {
			return a[0][0]
		}
		i1, j1 := min(i+1, len(g.X)-1), min(j+1, len(g.Y)-1)
		return (1-fy)*((1-fx)*a[j][i]+fx*a[j][i1]) + fy*((1-fx)*a[j1][i]+fx*a[j1][i1])
	}
	return panel.Vec{X: bl(g.DX), Y: bl(g.DY)}
}

// locate returns the cell index and the fraction within it for v, clamped.
func locate(nodes []float64, v float64) (int, float64) {
	n := len(nodes)
	if n == 1 || v <= nodes[0] {
		return 0, 0
	}
	if v >= nodes[n-1] {
		return n - 2, 1
	}
	i := sort.SearchFloat64s(nodes, v) - 1
	return i, (v - nodes[i]) / (nodes[i+1] - nodes[i])
}

// CSVError is a bad cell or row of a CSV file.
type CSVError struct {
	File   string
	Row    int // 1-based line of the file, header = 1
	Column string
	Err    error
}

func (e *CSVError) Error() string {
	if e.Column != "" {
		return fmt.Sprintf("%s: row %d, column %q: %v", e.File, e.Row, e.Column, e.Err)
	}
	if e.Row > 0 {
		return fmt.Sprintf("%s: row %d: %v", e.File, e.Row, e.Err)
	}
	return fmt.Sprintf("%s: %v", e.File, e.Err)
}
func (e *CSVError) Unwrap() error { return e.Err }

// Cell parses a numeric cell in the column's unit (see unit.ParseHeader),
// returning SI.
func Cell(file string, row int, col unit.Column, s string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || math.IsInf(v*col.Factor, 0) {
		return 0, &CSVError{file, row, col.Name, fmt.Errorf("%q is not a finite number", s)}
	}
	return v * col.Factor, nil
}

// PositionCell is Cell for a coordinate on the panel: a value farther than
// panel.MaxPanelSize from the centre is an error at the cell.
func PositionCell(file string, row int, col unit.Column, s string) (float64, error) {
	return boundedCell(file, row, col, s, true)
}

// boundedCell is Cell for a position on the panel (position, checked with
// checkPosition) or a movement (CheckTerm of a length): a value beyond the
// bound is an error at the cell.
func boundedCell(file string, row int, col unit.Column, s string, position bool) (float64, error) {
	v, err := Cell(file, row, col, s)
	if err != nil {
		return 0, err
	}
	if position {
		err = checkPosition(v)
	} else {
		err = CheckTerm(v, unit.Length)
	}
	if err != nil {
		return 0, &CSVError{file, row, col.Name, err}
	}
	return v, nil
}

// ReadGrid reads a residual grid from CSV with the columns
// "x [unit], y [unit], dx [unit], dy [unit]", one row per node, nodes forming a
// complete regular grid in any order.
func ReadGrid(r io.Reader, file string) (*Grid, error) {
	cr, err := NewCSVReader(r, file)
	if err != nil {
		return nil, err
	}
	header, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			return nil, &CSVError{File: file, Row: 1, Err: errors.New("the file is empty (want a header such as \"x [in],y [in],dx [mil],dy [mil]\")")}
		}
		return nil, ReadError(file, err)
	}
	kinds := map[string]unit.Kind{"x": unit.Length, "y": unit.Length, "dx": unit.Length, "dy": unit.Length}
	idx, cols, err := unit.ParseHeader(header, kinds)
	if err != nil {
		return nil, &CSVError{File: file, Row: 1, Err: err}
	}
	for _, need := range []string{"x", "y", "dx", "dy"} {
		if _, ok := idx[need]; !ok {
			return nil, &CSVError{File: file, Row: 1, Err: fmt.Errorf("missing column %q (want x, y, dx, dy with units, e.g. \"dx [mil]\")", need)}
		}
	}
	var nodes []GridNode
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			// FieldPos is only valid after a successful read.
			return nil, ReadError(file, err)
		}
		line, _ := cr.FieldPos(0)
		var v [4]float64
		for k, name := range []string{"x", "y", "dx", "dy"} {
			c := idx[name]
			if v[k], err = boundedCell(file, line, cols[c], rec[c], k < 2); err != nil {
				return nil, err
			}
		}
		nodes = append(nodes, GridNode{v[0], v[1], v[2], v[3]})
	}
	return NewGrid(file, nodes)
}

// GridNode is one node of a grid as read from a file: its position and the
// values it holds (DY is unused by a grid of one value per node).
type GridNode struct{ X, Y, DX, DY float64 }

// NewGrid assembles nodes, in any order, into a complete regular grid; file
// names the file they came from, for the errors (no nodes, not a regular
// grid, a node given twice).
func NewGrid(file string, nodes []GridNode) (*Grid, error) {
	if len(nodes) == 0 {
		return nil, &CSVError{File: file, Err: errors.New("no grid nodes")}
	}
	xs, ys := distinct(nodes, func(n GridNode) float64 { return n.X }), distinct(nodes, func(n GridNode) float64 { return n.Y })
	if len(xs)*len(ys) != len(nodes) {
		return nil, &CSVError{File: file, Err: fmt.Errorf("%d nodes do not form a regular %d x %d grid", len(nodes), len(xs), len(ys))}
	}
	g := &Grid{X: xs, Y: ys, DX: make([][]float64, len(ys)), DY: make([][]float64, len(ys))}
	seen := make([][]bool, len(ys))
	for j := range ys {
		g.DX[j], g.DY[j], seen[j] = make([]float64, len(xs)), make([]float64, len(xs)), make([]bool, len(xs))
	}
	for _, n := range nodes {
		i, j := sort.SearchFloat64s(xs, n.X), sort.SearchFloat64s(ys, n.Y)
		if seen[j][i] {
			return nil, &CSVError{File: file, Err: fmt.Errorf("node (%g, %g) m given twice", n.X, n.Y)}
		}
		seen[j][i] = true
		g.DX[j][i], g.DY[j][i] = n.DX, n.DY
	}
	return g, nil
}

func distinct[T any](items []T, f func(T) float64) []float64 {
	var v []float64
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
