package registration

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"strings"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
)

// Target is one measured registration target: its nominal position on the
// panel and the displacement measured there.
type Target struct {
	Panel string    // panel identifier, as written in the file
	Layer string    // "L3" (against the drilled tooling) or "L3-L4" (L3 relative to L4)
	Name  string    // target name, unique within a panel and layer
	Pos   panel.Vec // nominal position in the panel frame, m
	D     panel.Vec // measured displacement, m
	Row   int       // 1-based line of the file (header = 1), for messages
}

// Error kinds of the measurement reader, for errors.Is.
var (
	ErrMissingColumn = errors.New("missing column")
	ErrDuplicate     = errors.New("duplicate target")
	ErrEmptyCell     = errors.New("empty cell")
)

// SplitLayer splits a measurement's layer field: "L3-L4" is L3 measured
// relative to L4 (relative = true), "L3" is L3 measured against the drilled
// tooling. Layer names themselves may therefore not contain '-'.
func SplitLayer(s string) (upper, lower string, relative bool) {
	if a, b, ok := strings.Cut(s, "-"); ok {
		return a, b, true
	}
	return s, "", false
}

// ReadTargets reads a measurement file (CSV). The header carries units:
//
//	panel,layer,target,x [in],y [in],dx [mil],dy [mil]
//
// gives the nominal target position and the measured displacement; the columns
// x_meas [unit], y_meas [unit] (the measured position) may stand instead of dx
// and dy. Lines starting with '#' are comments; other columns are ignored.
// Errors are *CSVError values naming the row and column.
func ReadTargets(r io.Reader, file string) ([]Target, error) {
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.TrimLeadingSpace = true
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			err = errors.New("the file is empty (want a header such as \"panel,layer,target,x [in],y [in],dx [mil],dy [mil]\")")
		}
		return nil, &CSVError{File: file, Row: 1, Err: err}
	}
	kinds := map[string]unit.Kind{
		"x": unit.Length, "y": unit.Length, "dx": unit.Length, "dy": unit.Length,
		"x_meas": unit.Length, "y_meas": unit.Length,
	}
	idx, cols, err := unit.ParseHeader(header, kinds)
	if err != nil {
		return nil, &CSVError{File: file, Row: 1, Err: err}
	}
	const want = "want panel, layer, target, x [unit], y [unit] and dx [unit], dy [unit] or x_meas [unit], y_meas [unit]"
	for _, need := range []string{"panel", "layer", "target", "x", "y"} {
		if _, ok := idx[need]; !ok {
			return nil, &CSVError{File: file, Row: 1, Column: need, Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
		}
	}
	_, hasDX := idx["dx"]
	_, hasDY := idx["dy"]
	_, hasXM := idx["x_meas"]
	_, hasYM := idx["y_meas"]
	disp := hasDX || hasDY
	switch {
	case disp && (hasXM || hasYM):
		return nil, &CSVError{File: file, Row: 1, Err: errors.New("give dx, dy or x_meas, y_meas, not both")}
	case disp && !hasDX:
		return nil, &CSVError{File: file, Row: 1, Column: "dx", Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
	case disp && !hasDY:
		return nil, &CSVError{File: file, Row: 1, Column: "dy", Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
	case !disp && !hasXM:
		return nil, &CSVError{File: file, Row: 1, Column: "dx", Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
	case !disp && !hasYM:
		return nil, &CSVError{File: file, Row: 1, Column: "y_meas", Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
	}
	numeric := []string{"x", "y", "dx", "dy"}
	if !disp {
		numeric = []string{"x", "y", "x_meas", "y_meas"}
	}
	type key struct{ panel, layer, name string }
	seen := map[key]int{}
	var out []Target
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			// FieldPos is only valid after a successful Read.
			var pe *csv.ParseError
			line := 0
			if errors.As(err, &pe) {
				line, err = pe.Line, pe.Err
			}
			return nil, &CSVError{File: file, Row: line, Err: err}
		}
		line, _ := cr.FieldPos(0)
		if len(rec) != len(header) {
			return nil, &CSVError{File: file, Row: line, Err: fmt.Errorf("%d fields, the header has %d", len(rec), len(header))}
		}
		var t Target
		t.Row = line
		for _, c := range []string{"panel", "layer", "target"} {
			v := strings.TrimSpace(rec[idx[c]])
			if v == "" {
				return nil, &CSVError{File: file, Row: line, Column: c, Err: ErrEmptyCell}
			}
			switch c {
			case "panel":
				t.Panel = v
			case "layer":
				t.Layer = v
			case "target":
				t.Name = v
			}
		}
		if a, b, rel := SplitLayer(t.Layer); rel && (a == "" || b == "" || strings.Contains(b, "-") || a == b) {
			return nil, &CSVError{File: file, Row: line, Column: "layer", Err: fmt.Errorf("%q: want a layer (\"L3\") or a pair of different layers (\"L3-L4\")", t.Layer)}
		}
		var v [4]float64
		for k, name := range numeric {
			c := idx[name]
			if v[k], err = Cell(file, line, cols[c], rec[c]); err != nil {
				return nil, err
			}
		}
		t.Pos = panel.Vec{X: v[0], Y: v[1]}
		t.D = panel.Vec{X: v[2], Y: v[3]}
		if !disp {
			t.D = t.D.Sub(t.Pos)
		}
		k := key{t.Panel, t.Layer, t.Name}
		if first, dup := seen[k]; dup {
			return nil, &CSVError{File: file, Row: line, Column: "target", Err: fmt.Errorf("%w: %q on panel %q, layer %q is also on row %d", ErrDuplicate, t.Name, t.Panel, t.Layer, first)}
		}
		seen[k] = line
		out = append(out, t)
	}
	if len(out) == 0 {
		return nil, &CSVError{File: file, Err: errors.New("no targets after the header")}
	}
	return out, nil
}
