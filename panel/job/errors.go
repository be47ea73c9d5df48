package job

import (
	"errors"
	"fmt"
	"strings"
)

// ParseError is bad input at a place in a file.
type ParseError struct {
	File string // "<stdin>" when read from "-"
	Line int    // 1-based; 0 when unknown
	Key  string // the key path, e.g. "section[0].traces[1].width"
	Err  error
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

// Error kinds of the job loader, for errors.Is.
var (
	ErrUnknownKey = errors.New("unknown key")
	ErrMissing    = errors.New("missing value")
	ErrValue      = errors.New("invalid value")
)
