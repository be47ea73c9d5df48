package unit

import (
	"fmt"
	"strings"
)

// Column is a CSV header cell of the form "name [unit]", as in "x [in]" or
// "dx [mil]".
type Column struct {
	Name   string
	Unit   string  // as written in the header; "" for a column without one
	Factor float64 // SI per unit; 1 for a column without one
}

// ParseHeader reads the header cells "name [unit]" of a CSV file. kinds gives
// the unit kind of each column that needs one; other columns may not carry a
// unit. It returns the index of each column by name and the parsed columns in
// header order. A byte-order mark before the first cell is ignored.
func ParseHeader(header []string, kinds map[string]Kind) (map[string]int, []Column, error) {
	idx := map[string]int{}
	cols := make([]Column, len(header))
	for i, h := range header {
		h = strings.TrimSpace(strings.TrimPrefix(h, "\ufeff"))
		name, u := h, ""
		if a := strings.IndexByte(h, '['); a >= 0 {
			b := strings.IndexByte(h, ']')
			if b < a {
				return nil, nil, fmt.Errorf("column %d %q: unclosed [unit]", i+1, h)
			}
			name, u = strings.TrimSpace(h[:a]), strings.TrimSpace(h[a+1:b])
		}
		c := Column{Name: name, Unit: u, Factor: 1}
		if k, ok := kinds[name]; ok {
			if u == "" {
				return nil, nil, fmt.Errorf("column %d %q: the header needs a unit, as in %q (%s)", i+1, h, name+" [mil]", Accepted(k))
			}
			f, ok := Factor(k, u)
			if !ok {
				return nil, nil, fmt.Errorf("column %d %q: unknown %s unit %q (want %s)", i+1, h, k, u, Accepted(k))
			}
			c.Factor = f
		} else if u != "" {
			return nil, nil, fmt.Errorf("column %d %q: this column takes no unit", i+1, h)
		}
		if _, dup := idx[name]; dup {
			return nil, nil, fmt.Errorf("column %d %q: duplicate column", i+1, h)
		}
		idx[name] = i
		cols[i] = c
	}
	return idx, cols, nil
}
