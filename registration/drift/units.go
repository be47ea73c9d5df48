package drift

import (
	"encoding/json"
	"io"
	"strconv"

	"github.com/regdrift/regdrift/panel/unit"
)

// Units are the units of lengths written to CSV files and drawn in figures:
// offsets in Length (metres per unit LengthM), panel coordinates in Panel
// (metres per unit PanelM). The zero value means Mils.
type Units struct {
	Length  string
	LengthM float64
	Panel   string
	PanelM  float64
}

// Mils are offsets in mil and panel coordinates in inches; Micrometres are
// offsets in µm (written "um") and coordinates in millimetres.
var (
	Mils        = Units{"mil", unit.Mil, "in", unit.Inch}
	Micrometres = Units{"um", unit.Micrometre, "mm", unit.Millimetre}
)

func (u Units) orDefault() Units {
	if u.LengthM == 0 {
		return Mils
	}
	return u
}

// WriteJSON writes v as indented JSON, the form of every summary file.
func WriteJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// fixed formats v with d decimals, as every CSV cell.
func fixed(v float64, d int) string { return strconv.FormatFloat(v, 'f', d, 64) }
