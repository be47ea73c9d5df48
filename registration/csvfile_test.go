package registration

import (
	"errors"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel/textfile"
	"github.com/regdrift/regdrift/panel/unit"
)

func utf16LE(s string) string { return string(textfile.EncodeUTF16(s, false)) }

// TestCSVInputs checks the encodings, separators, header case, quotes and
// plausibility bounds shared by the CSV readers, on targets and grids.
func TestCSVInputs(t *testing.T) {
	const h = "panel,layer,target,x [in],y [in],dx [mil],dy [mil]\n"
	var rows strings.Builder
	for i := 0; i < 200; i++ {
		rows.WriteString("P,L3,T" + strings.Repeat("x", i%7) + string(rune('a'+i%26)) + string(rune('a'+i/26)) + ",1,2,0.1,0.2\n")
	}
	many := rows.String()
	// An opening quote on row 6 (the header is row 1) that never closes.
	quoted := h + strings.Join(strings.SplitAfter(many, "\n")[:4], "") + "P,L3,\"Q,1,2,0.1,0.2\n" + many[200:]
	tests := []struct {
		name, csv string
		read      func(string) error
		row       int
		column    string
		contains  string
		is        error
	}{
		{"targets: UTF-8 mark then a comment", "\ufeff# lot 7\n" + h + "P,L3,T1,1,2,0.1,0.2\n", targets, 0, "", "", nil},
		{"targets: header in capitals", "PANEL,Layer,TARGET,X [in],Y [in],DX [mil],dY [mil]\nP,L3,T1,1,2,0.1,0.2\n", targets, 0, "", "", nil},
		{"targets: UTF-16", utf16LE(h + "P,L3,T1,1,2,0.1,0.2\n"), targets, 1, "", "UTF-16", textfile.ErrUTF16},
		{"targets: semicolons", "panel;layer;target;x [in];y [in];dx [mil];dy [mil]\nP;L3;T1;1,5;2;0,1;0,2\n", targets, 1, "", "expected comma-separated columns (this file uses semicolons)", nil},
		{"targets: tabs", "panel\tlayer\ttarget\tx [in]\ty [in]\tdx [mil]\tdy [mil]\n", targets, 1, "", "uses tabs", nil},
		{"targets: quote opened on row 6", quoted, targets, 6, "", "opens on this row", nil},
		{"targets: quote in a bare field", h + "P,L3,T\"1,1,2,0.1,0.2\n", targets, 2, "", "bare", nil},
		{"targets: position 1e300 in", h + "P,L3,T1,1e300,2,0.1,0.2\n", targets, 2, "x", "plausible position", nil},
		{"targets: position overflows", h + "P,L3,T1,1,1e308,0.1,0.2\n", targets, 2, "y", "plausible position", nil},
		{"targets: displacement 2 in", h + "P,L3,T1,1,2,2000,0.2\n", targets, 2, "dx", "at most 25.4 mm", nil},
		{"targets: measured 2 in away", "panel,layer,target,x [in],y [in],x_meas [in],y_meas [in]\nP,L3,T1,1,2,1,4\n", targets, 2, "y_meas", "measured minus nominal", nil},
		{"grid: UTF-8 mark then a comment", "\ufeff# grid\nx [in],y [in],dx [mil],dy [mil]\n0,0,0.1,0.2\n", grid, 0, "", "", nil},
		{"grid: UTF-16", utf16LE("x [in],y [in],dx [mil],dy [mil]\n"), grid, 1, "", "UTF-16", textfile.ErrUTF16},
		{"grid: empty", "", grid, 1, "", "empty", nil},
		{"grid: movement 1e300 mil", "x [in],y [in],dx [mil],dy [mil]\n0,0,0.1,1e300\n", grid, 2, "dy", "plausible", nil},
		{"grid: capitals", "X [in],Y [in],DX [mil],DY [mil]\n0,0,0.1,0.2\n", grid, 0, "", "", nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.read(tt.csv)
			if tt.row == 0 {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			var ce *CSVError
			if !errors.As(err, &ce) {
				t.Fatalf("error %v, want a *CSVError", err)
			}
			if ce.Row != tt.row || ce.Column != tt.column || !strings.Contains(err.Error(), tt.contains) || tt.is != nil && !errors.Is(err, tt.is) {
				t.Errorf("error %q (row %d, column %q), want row %d, column %q, saying %q", err, ce.Row, ce.Column, tt.row, tt.column, tt.contains)
			}
		})
	}
}

func targets(s string) error { _, err := ReadTargets(strings.NewReader(s), "m.csv"); return err }
func grid(s string) error    { _, err := ReadGrid(strings.NewReader(s), "g.csv"); return err }

// TestCheckTerm checks the plausibility bounds at and beyond their values.
func TestCheckTerm(t *testing.T) {
	for _, tt := range []struct {
		v    float64
		kind string
		ok   bool
	}{
		{MaxMovement, "length", true}, {-MaxMovement * 1.001, "length", false},
		{MaxRotation, "angle", true}, {1e6, "angle", false},
		{-MaxStrain, "strain", true}, {0.2, "strain", false},
	} {
		k := map[string]int{"length": 0, "strain": 1, "angle": 2}[tt.kind]
		if err := CheckTerm(tt.v, unit.Kind(k)); (err == nil) != tt.ok {
			t.Errorf("CheckTerm(%g, %s) = %v, want ok = %v", tt.v, tt.kind, err, tt.ok)
		}
	}
}
