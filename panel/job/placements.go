package job

import (
	"encoding/csv"
	"fmt"
	"io"
	"os"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// ReadPlacements reads a placement file (CSV) with the columns
//
//	name, x [unit], y [unit], angle [unit], section
//
// in any order, the units in the header ("x [in]", "angle [deg]"), one
// coupler site per row in the panel frame. Lines starting with # are
// comments. file names the input in messages and in each placement. Errors
// are *registration.CSVError values naming the row and column. The sections
// are not checked here: the job that reads the file knows them.
func ReadPlacements(r io.Reader, file string) ([]panel.Placement, error) {
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.TrimLeadingSpace = true
	header, err := cr.Read()
	if err != nil {
		return nil, &registration.CSVError{File: file, Row: 1, Err: err}
	}
	idx, cols, err := unit.ParseHeader(header, map[string]unit.Kind{"x": unit.Length, "y": unit.Length, "angle": unit.Angle})
	if err != nil {
		return nil, &registration.CSVError{File: file, Row: 1, Err: err}
	}
	for _, need := range []string{"name", "x", "y", "angle", "section"} {
		if _, ok := idx[need]; !ok {
			return nil, &registration.CSVError{File: file, Row: 1, Err: fmt.Errorf("missing column %q (want name, x [in], y [in], angle [deg], section)", need)}
		}
	}
	var out []panel.Placement
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			// A *csv.ParseError carries its own line; FieldPos is only valid
			// after a successful read.
			return nil, &registration.CSVError{File: file, Err: err}
		}
		line, _ := cr.FieldPos(0)
		var v [3]float64
		for k, name := range []string{"x", "y", "angle"} {
			c := idx[name]
			if v[k], err = registration.Cell(file, line, cols[c], rec[c]); err != nil {
				return nil, err
			}
		}
		out = append(out, panel.Placement{Name: rec[idx["name"]], Section: rec[idx["section"]],
			At: panel.Vec{X: v[0], Y: v[1]}, Angle: v[2], File: file, Row: line})
	}
	return out, nil
}

// readPlacementFile reads the placement file at path.
func readPlacementFile(path string) ([]panel.Placement, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	return ReadPlacements(fh, path)
}
