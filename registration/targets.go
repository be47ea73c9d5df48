package registration

import (
	"errors"
	"fmt"
	"hash/maphash"
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
	cr, err := NewCSVReader(r, file)
	if err != nil {
		return nil, err
	}
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			return nil, &CSVError{File: file, Row: 1, Err: errors.New("the file is empty (want a header such as \"panel,layer,target,x [in],y [in],dx [mil],dy [mil]\")")}
		}
		return nil, ReadError(file, err)
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
	// Memory is per target, so nothing here may keep a row alive: the
	// reader reuses its record, a panel or layer name is stored once
	// (intern), a target name is copied out of the row's string, and the
	// duplicate check keys on the group's number rather than on its names.
	cr.ReuseRecord = true
	names := map[string]string{}
	intern := func(v string) string {
		if s, ok := names[v]; ok {
			return s
		}
		v = strings.Clone(v)
		names[v] = v
		return v
	}
	type group struct{ panel, layer string }
	groups := map[group]int32{}
	// seen maps a hash of (group, name) to the index of the first target
	// with it; a hit is confirmed against that target, and the rare distinct
	// targets with one hash go to exact, so a slot costs 12 bytes, not a
	// string and a row per target.
	type key struct {
		group int32
		name  string
	}
	seed := maphash.MakeSeed()
	seen := map[uint64]int32{}
	exact := map[key]int32{}
	var out []Target
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			// FieldPos is only valid after a successful Read.
			return nil, ReadError(file, err)
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
				t.Panel = intern(v)
			case "layer":
				t.Layer = intern(v)
			case "target":
				t.Name = strings.Clone(v)
			}
		}
		if a, b, rel := SplitLayer(t.Layer); rel && (a == "" || b == "" || strings.Contains(b, "-") || a == b) {
			return nil, &CSVError{File: file, Row: line, Column: "layer", Err: fmt.Errorf("%q: want a layer (\"L3\") or a pair of different layers (\"L3-L4\")", t.Layer)}
		}
		var v [4]float64
		for k, name := range numeric {
			c := idx[name]
			// Positions (nominal, and measured ones) lie on a panel; a
			// displacement is a registration movement.
			if v[k], err = boundedCell(file, line, cols[c], rec[c], k < 2 || !disp); err != nil {
				return nil, err
			}
		}
		t.Pos = panel.Vec{X: v[0], Y: v[1]}
		t.D = panel.Vec{X: v[2], Y: v[3]}
		if !disp {
			t.D = t.D.Sub(t.Pos)
			for k, d := range []float64{t.D.X, t.D.Y} {
				if err := CheckTerm(d, unit.Length); err != nil {
					return nil, &CSVError{File: file, Row: line, Column: numeric[2+k], Err: fmt.Errorf("measured minus nominal: %w", err)}
				}
			}
		}
		g, ok := groups[group{t.Panel, t.Layer}]
		if !ok {
			g = int32(len(groups))
			groups[group{t.Panel, t.Layer}] = g
		}
		h := maphash.Comparable(seed, key{g, t.Name})
		first := -1
		if i, hit := seen[h]; !hit {
			seen[h] = int32(len(out))
		} else if o := &out[i]; o.Panel == t.Panel && o.Layer == t.Layer && o.Name == t.Name {
			first = o.Row
		} else if j, dup := exact[key{g, t.Name}]; dup {
			first = out[j].Row
		} else {
			exact[key{g, t.Name}] = int32(len(out))
		}
		if first >= 0 {
			return nil, &CSVError{File: file, Row: line, Column: "target", Err: fmt.Errorf("%w: %q on panel %q, layer %q is also on row %d", ErrDuplicate, t.Name, t.Panel, t.Layer, first)}
		}
		out = append(out, t)
	}
	if len(out) == 0 {
		return nil, &CSVError{File: file, Err: errors.New("no targets after the header")}
	}
	return out, nil
}

// Frame maps target positions from the frame a measuring machine exports
// (an x-ray drill's or an optical inspection system's) into the panel frame
// of the job file: origin at the panel centre, x along the first size, y
// up. The zero value is the panel frame itself.
type Frame struct {
	// Origin is where the machine frame's origin lies in the panel frame:
	// (−W/2, −H/2) for a machine that measures from the panel's lower-left
	// corner, (−W/2, +H/2) from the upper-left with FlipY.
	Origin panel.Vec
	// FlipY is set for a machine whose y axis points down the panel: the
	// y of every position and of every displacement changes sign.
	FlipY bool
}

// Apply maps the targets' positions and displacements into the panel frame,
// in place: p_panel = Origin + (x, ±y) and d_panel = (dx, ±dy).
func (f Frame) Apply(ts []Target) {
	for i := range ts {
		t := &ts[i]
		if f.FlipY {
			t.Pos.Y, t.D.Y = -t.Pos.Y, -t.D.Y
		}
		t.Pos = f.Origin.Add(t.Pos)
	}
}

// CheckOutline returns a *CSVError naming the row and column of the first
// target (in the panel frame) outside outline, the panel's outer rectangle:
// a target off the panel is a frame or unit given wrongly.
func CheckOutline(ts []Target, outline panel.Rect, file string) error {
	for _, t := range ts {
		col := ""
		switch {
		case t.Pos.X < outline.Min.X || t.Pos.X > outline.Max.X:
			col = "x"
		case t.Pos.Y < outline.Min.Y || t.Pos.Y > outline.Max.Y:
			col = "y"
		default:
			continue
		}
		return &CSVError{File: file, Row: t.Row, Column: col, Err: fmt.Errorf("target %q at (%.4g, %.4g) mm in the panel frame is off the %.4g x %.4g mm panel (centre origin, y up; see the frame options)",
			t.Name, t.Pos.X*1e3, t.Pos.Y*1e3, (outline.Max.X-outline.Min.X)*1e3, (outline.Max.Y-outline.Min.Y)*1e3)}
	}
	return nil
}
