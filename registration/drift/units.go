package drift

import (
	"encoding/json"
	"io"
	"strconv"
)

// WriteJSON writes v as indented JSON, the form of every summary file.
func WriteJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// fixed formats v with d decimals, as every CSV cell.
func fixed(v float64, d int) string { return strconv.FormatFloat(v, 'f', d, 64) }
