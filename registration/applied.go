package registration

import (
	"errors"
	"fmt"
	"io"
	"maps"
	"math"
	"slices"
	"strings"

	"github.com/regdrift/regdrift/panel/unit"
)

// Applied is the artwork scale compensation one layer of a lot was built
// with: the layer's artwork was plotted (1 + ScaleX) times its CAD size along
// x and (1 + ScaleY) times along y, about the datum.
//
// # Sign convention
//
// A scale is positive when a length grows. The artwork is scaled by the
// applied compensation a, then the material moves by m through lamination,
// so a feature at CAD distance r from the datum ends up at r·(1+a)·(1+m).
// The registration fit measures the finished position against CAD, a scale
// ε with
//
//	1 + ε = (1 + a)·(1 + m).
//
// The material movement is therefore the measurement with the applied
// compensation taken out, m = (1+ε)/(1+a) − 1 ≈ ε − a (MaterialScale); it
// does not depend on the artwork the lot happened to get, so it is what lot
// statistics use. The artwork that cancels a movement m is the setting
// s = 1/(1+m) − 1 ≈ −m (Setting), and the change from the applied artwork is
// s − a. Example: a lot built with a = +200 ppm that measured ε = −10 ppm
// moved m = −209.958 ppm (it shrank); the new setting is +210.002 ppm, a
// change of +10.002 ppm. The exact 1/(1+ε) form is used throughout; the
// first-order forms differ from it by terms of order a², 0.04 ppm here.
//
// A relative measurement "L3-L4" (L3 against L4) is compensated by
// (1+a₃)/(1+a₄) − 1, the artwork scale of L3 seen from L4 (Relative).
type Applied struct {
	Layer          string
	ScaleX, ScaleY float64 // strain
	Row            int     // 1-based line of the file (header = 1), for messages
}

// MaterialScale returns the material movement m of a layer that measured
// the scale ε when built with the artwork scale a: (1+ε)/(1+a) − 1.
func MaterialScale(measured, applied float64) float64 {
	return (1+measured)/(1+applied) - 1
}

// Setting returns the artwork scale that cancels the material movement m,
// so that the finished layer lands on CAD: 1/(1+m) − 1.
func Setting(movement float64) float64 {
	return 1/(1+movement) - 1
}

// RelativeScale returns the artwork scale of the upper layer seen from the
// lower one, (1+upper)/(1+lower) − 1: the applied compensation of a
// relative measurement.
func RelativeScale(upper, lower float64) float64 {
	return (1+upper)/(1+lower) - 1
}

// AppliedSet is the compensation of every layer of a lot, by layer name.
type AppliedSet map[string]Applied

// Layers returns the layers s names, sorted.
func (s AppliedSet) Layers() []string { return slices.Sorted(maps.Keys(s)) }

// For returns the applied artwork scale of a measured layer, which may be a
// relative pair "L3-L4"; a layer the set does not name was built at CAD
// size (zero). ok reports whether the set names the layer (both layers of
// a pair, or either of them).
func (s AppliedSet) For(layer string) (x, y float64, ok bool) {
	upper, lower, rel := SplitLayer(layer)
	a, okA := s[upper]
	if !rel {
		return a.ScaleX, a.ScaleY, okA
	}
	b, okB := s[lower]
	return RelativeScale(a.ScaleX, b.ScaleX), RelativeScale(a.ScaleY, b.ScaleY), okA || okB
}

// ErrUnknownColumn is a column a reader does not know.
var ErrUnknownColumn = errors.New("unknown column")

// ReadApplied reads an applied-compensation file (CSV), one row per layer:
//
//	layer,scale_x [ppm],scale_y [ppm]
//
// Each scale column carries its strain unit (ppm, mil/in, um/m, mm/m, %).
// Lines starting with '#' are comments. A layer may appear once; a layer
// name is a single layer ("L3"), never a pair, since the artwork belongs to
// one layer. Errors are *CSVError values naming the row and column.
func ReadApplied(r io.Reader, file string) (AppliedSet, error) {
	const want = "want layer, scale_x [ppm], scale_y [ppm]"
	rows, err := NewCSVRows(r, file, "such as \"layer,scale_x [ppm],scale_y [ppm]\"")
	if err != nil {
		return nil, err
	}
	header := rows.Header
	kinds := map[string]unit.Kind{"scale_x": unit.Strain, "scale_y": unit.Strain}
	idx, cols, err := unit.ParseHeader(header, kinds)
	if err != nil {
		return nil, &CSVError{File: file, Row: 1, Err: err}
	}
	for _, c := range cols {
		if _, ok := kinds[c.Name]; !ok && c.Name != "layer" {
			return nil, &CSVError{File: file, Row: 1, Column: c.Name, Err: fmt.Errorf("%w (%s)", ErrUnknownColumn, want)}
		}
	}
	for _, need := range []string{"layer", "scale_x", "scale_y"} {
		if _, ok := idx[need]; !ok {
			return nil, &CSVError{File: file, Row: 1, Column: need, Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
		}
	}
	set := AppliedSet{}
	for {
		rec, line, err := rows.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		a := Applied{Row: line, Layer: strings.TrimSpace(rec[idx["layer"]])}
		switch {
		case a.Layer == "":
			return nil, &CSVError{File: file, Row: line, Column: "layer", Err: ErrEmptyCell}
		case strings.Contains(a.Layer, "-"):
			return nil, &CSVError{File: file, Row: line, Column: "layer", Err: fmt.Errorf("%q: the artwork belongs to one layer, not a pair", a.Layer)}
		}
		if first, dup := set[a.Layer]; dup {
			return nil, &CSVError{File: file, Row: line, Column: "layer", Err: fmt.Errorf("%w: layer %q is also on row %d", ErrDuplicate, a.Layer, first.Row)}
		}
		for _, c := range []string{"scale_x", "scale_y"} {
			i := idx[c]
			v, err := Cell(file, line, cols[i], rec[i])
			if err != nil {
				return nil, err
			}
			// An artwork scaled by −100 % or less has no size: that is a
			// typing error, not a compensation.
			if !(v > -0.5 && v < 0.5) {
				return nil, &CSVError{File: file, Row: line, Column: c, Err: fmt.Errorf("%q: an artwork scale must lie within ±50 %%", rec[i])}
			}
			if c == "scale_x" {
				a.ScaleX = v
			} else {
				a.ScaleY = v
			}
		}
		set[a.Layer] = a
	}
	if len(set) == 0 {
		return nil, &CSVError{File: file, Err: errors.New("no layers after the header")}
	}
	return set, nil
}

// ParseAppliedFlag reads the compact form of one layer's applied artwork,
// LAYER:x=SCALE[,y=SCALE], with a strain unit on each scale ("L3:x=+200ppm,
// y=+180ppm"); an axis left out is zero. An artwork belongs to one layer, not
// a pair, and a scale must lie within ±50 %.
func ParseAppliedFlag(v string) (Applied, error) {
	const want = "want LAYER:x=SCALE,y=SCALE such as L3:x=+200ppm,y=+180ppm"
	layer, rest, ok := strings.Cut(v, ":")
	layer = strings.TrimSpace(layer)
	a := Applied{Layer: layer}
	if !ok || layer == "" || rest == "" {
		return a, errors.New(want)
	}
	if _, _, rel := SplitLayer(layer); rel || strings.Contains(layer, "-") {
		return a, errors.New("the artwork belongs to one layer, not a pair")
	}
	seen := map[string]bool{}
	for _, kv := range strings.Split(rest, ",") {
		k, val, ok := strings.Cut(kv, "=")
		k = strings.ToLower(strings.TrimSpace(k))
		if !ok || (k != "x" && k != "y") || seen[k] {
			return a, errors.New(want)
		}
		seen[k] = true
		s, err := unit.Parse(strings.TrimSpace(val), unit.Strain)
		if err != nil {
			return a, fmt.Errorf("%s: %w", k, err)
		}
		if !(math.Abs(s) < 0.5) {
			return a, fmt.Errorf("%s: an artwork scale must lie within ±50 %%", k)
		}
		if k == "x" {
			a.ScaleX = s
		} else {
			a.ScaleY = s
		}
	}
	return a, nil
}
