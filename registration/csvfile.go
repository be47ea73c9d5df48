package registration

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"

	"github.com/regdrift/regdrift/panel/textfile"
)

// NewCSVReader returns the reader every CSV input of regdrift is read with
// (targets, placements, residual grids): a leading UTF-8 byte-order mark is
// dropped and UTF-16 is refused (package textfile), lines starting with '#'
// are comments, and spaces after a comma are ignored. The error is a
// *CSVError at row 1.
func NewCSVReader(r io.Reader, file string) (*csv.Reader, error) {
	tr, err := textfile.Reader(r)
	if err != nil {
		return nil, &CSVError{File: file, Row: 1, Err: err}
	}
	cr := csv.NewReader(tr)
	cr.Comment = '#'
	cr.TrimLeadingSpace = true
	return cr, nil
}

// ReadError returns the error of a failed csv.Reader.Read as a *CSVError at
// the row where the trouble began: a quoted field that never closes is
// reported where its quote opened, not at the end of the file where the
// reader gave up.
func ReadError(file string, err error) *CSVError {
	var pe *csv.ParseError
	if !errors.As(err, &pe) {
		return &CSVError{File: file, Err: err}
	}
	if errors.Is(pe.Err, csv.ErrQuote) && pe.Line != pe.StartLine {
		return &CSVError{File: file, Row: pe.StartLine, Err: fmt.Errorf("%w: the quoted field that opens on this row does not close (read on to row %d)", pe.Err, pe.Line)}
	}
	return &CSVError{File: file, Row: pe.Line, Err: fmt.Errorf("%w (byte %d of the row)", pe.Err, pe.Column)}
}
