package registration

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
)

// CSVRows reads a CSV file of rows under one header, the way every reader
// of regdrift's CSV files does: lines starting with '#' are comments,
// leading spaces of a field are dropped, and each row must have as many
// fields as the header. Its errors are *CSVError values naming the file
// and row.
type CSVRows struct {
	File   string
	Header []string
	r      *csv.Reader
}

// NewCSVRows reads the header of r. An empty file is an error that says
// what header was wanted (want, e.g. "layer, scale_x [ppm], scale_y [ppm]").
func NewCSVRows(r io.Reader, file, want string) (*CSVRows, error) {
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.TrimLeadingSpace = true
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			err = fmt.Errorf("the file is empty (want a header %s)", want)
		}
		return nil, &CSVError{File: file, Row: 1, Err: err}
	}
	return &CSVRows{File: file, Header: header, r: cr}, nil
}

// Next returns the next row and its 1-based line, or io.EOF after the last.
func (c *CSVRows) Next() ([]string, int, error) {
	rec, err := c.r.Read()
	if err == io.EOF {
		return nil, 0, io.EOF
	}
	if err != nil {
		// FieldPos is only valid after a successful Read.
		var pe *csv.ParseError
		line := 0
		if errors.As(err, &pe) {
			line, err = pe.Line, pe.Err
		}
		return nil, line, &CSVError{File: c.File, Row: line, Err: err}
	}
	line, _ := c.r.FieldPos(0)
	if len(rec) != len(c.Header) {
		return nil, line, &CSVError{File: c.File, Row: line, Err: fmt.Errorf("%d fields, the header has %d", len(rec), len(c.Header))}
	}
	return rec, line, nil
}
