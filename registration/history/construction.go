package history

import (
	"errors"
	"fmt"
	"io"
	"strings"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// LayerBuild is the construction of one layer and its place (role) in it.
type LayerBuild struct {
	Construction, Role string
	Row                int // 1-based line of the file, 0 when not from a file
}

// Constructions maps layer names to their construction.
type Constructions map[string]LayerBuild

// ErrUnknownLayer is a measured layer the constructions do not name.
var ErrUnknownLayer = errors.New("unknown layer")

// Of returns the construction of a measured layer. A relative measurement
// "L3-L4" belongs to the construction of both its layers, with the role
// "L3-L4 (role of L3 − role of L4)"; its layers must share a construction.
func (c Constructions) Of(layer string) (LayerBuild, error) {
	upper, lower, rel := registration.SplitLayer(layer)
	a, ok := c[upper]
	if !ok {
		return LayerBuild{}, fmt.Errorf("%w %q", ErrUnknownLayer, upper)
	}
	if !rel {
		return a, nil
	}
	b, ok := c[lower]
	if !ok {
		return LayerBuild{}, fmt.Errorf("%w %q", ErrUnknownLayer, lower)
	}
	if a.Construction != b.Construction {
		return LayerBuild{}, fmt.Errorf("layer %q: %s is %q and %s is %q; a relative measurement needs one construction", layer, upper, a.Construction, lower, b.Construction)
	}
	return LayerBuild{Construction: a.Construction, Role: fmt.Sprintf("%s (%s − %s)", layer, a.Role, b.Role)}, nil
}

// OneConstruction is every layer in one construction, each layer its own
// role: for a job whose layers are all of one build.
type OneConstruction string

// Of returns the construction key with the layer as its role.
func (k OneConstruction) Of(layer string) (LayerBuild, error) {
	return LayerBuild{Construction: string(k), Role: layer}, nil
}

// ReadConstructions reads a constructions file (CSV), one row per layer:
//
//	layer,construction,role
//
// for example "L3,5 mil high-Tg core 1/1 oz,core top". Lines starting with
// '#' are comments. Errors are *registration.CSVError values naming the row
// and column.
func ReadConstructions(r io.Reader, file string) (Constructions, error) {
	const want = "want layer, construction, role"
	rows, err := registration.NewCSVRows(r, file, "such as \"layer,construction,role\"")
	if err != nil {
		return nil, err
	}
	header := rows.Header
	idx, cols, err := unit.ParseHeader(header, nil)
	if err != nil {
		return nil, &registration.CSVError{File: file, Row: 1, Err: err}
	}
	for _, c := range cols {
		if c.Name != "layer" && c.Name != "construction" && c.Name != "role" {
			return nil, &registration.CSVError{File: file, Row: 1, Column: c.Name, Err: fmt.Errorf("%w (%s)", registration.ErrUnknownColumn, want)}
		}
	}
	for _, need := range []string{"layer", "construction", "role"} {
		if _, ok := idx[need]; !ok {
			return nil, &registration.CSVError{File: file, Row: 1, Column: need, Err: fmt.Errorf("%w (%s)", registration.ErrMissingColumn, want)}
		}
	}
	out := Constructions{}
	for {
		rec, line, err := rows.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		var v [3]string
		for i, c := range []string{"layer", "construction", "role"} {
			v[i] = strings.TrimSpace(rec[idx[c]])
			if v[i] == "" {
				return nil, &registration.CSVError{File: file, Row: line, Column: c, Err: registration.ErrEmptyCell}
			}
		}
		if strings.Contains(v[0], "-") {
			return nil, &registration.CSVError{File: file, Row: line, Column: "layer", Err: fmt.Errorf("%q: name one layer, not a pair", v[0])}
		}
		if first, dup := out[v[0]]; dup {
			return nil, &registration.CSVError{File: file, Row: line, Column: "layer", Err: fmt.Errorf("%w: layer %q is also on row %d", registration.ErrDuplicate, v[0], first.Row)}
		}
		out[v[0]] = LayerBuild{Construction: v[1], Role: v[2], Row: line}
	}
	if len(out) == 0 {
		return nil, &registration.CSVError{File: file, Err: errors.New("no layers after the header")}
	}
	return out, nil
}

// Builder gives the construction of a measured layer: Constructions (from
// a file) or OneConstruction (a key).
type Builder interface {
	Of(layer string) (LayerBuild, error)
}

// NewLot returns the lot of the fits, each layer with its construction and
// the artwork scale it was built with (read from appliedFile, for
// messages). A layer the builder does not know, or an applied layer the
// fits lack (a *registration.CSVError naming its row), is an error.
func NewLot(name, date string, fits []registration.Fit, b Builder, applied registration.AppliedSet, appliedFile string) (*Lot, error) {
	l := &Lot{Name: name, Date: date}
	measured := map[string]bool{}
	for i := range fits {
		f := &fits[i]
		lb, err := b.Of(f.Layer)
		if err != nil {
			return nil, err
		}
		ax, ay, _ := applied.For(f.Layer)
		l.Fits = append(l.Fits, NewFitRecord(f, lb.Construction, lb.Role, ax, ay))
		u, lo, rel := registration.SplitLayer(f.Layer)
		measured[u] = true
		if rel {
			measured[lo] = true
		}
	}
	// The first such row of the file, so the message does not depend on
	// the map's order.
	var bad *registration.Applied
	for layer, a := range applied {
		if !measured[layer] && (bad == nil || a.Row < bad.Row) {
			bad = &a
		}
	}
	if bad != nil {
		return nil, &registration.CSVError{File: appliedFile, Row: bad.Row, Column: "layer", Err: fmt.Errorf("%w %q: the targets have no such layer", ErrUnknownLayer, bad.Layer)}
	}
	return l, l.Validate()
}
