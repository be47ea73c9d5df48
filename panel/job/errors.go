package job

import (
	"errors"
	"fmt"
	"strings"
)

// ParseError is bad input at a place in a job file. Its message reads
// "FILE:LINE: KEY: ERR", leaving out a line or key that is not known.
type ParseError struct {
	File string // as named to Load or Parse; "<stdin>" when read from "-"
	Line int    // 1-based; 0 when unknown
	Key  string // the key path, e.g. "section[0].traces[1].width"
	Err  error  // ErrUnknownKey, ErrMissing, ErrValue (wrapped), a *unit.Error, ...
}

func (e *ParseError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
	}
	if e.Key != "" {
		fmt.Fprintf(&b, ": %s", e.Key)
	}
	fmt.Fprintf(&b, ": %v", e.Err)
	return b.String()
}
func (e *ParseError) Unwrap() error { return e.Err }

// Error kinds of the job loader, for errors.Is: a key the format does not
// have, a value that is needed and missing, and a value that is wrong.
var (
	ErrUnknownKey = errors.New("unknown key")
	ErrMissing    = errors.New("missing value")
	ErrValue      = errors.New("invalid value")
)
