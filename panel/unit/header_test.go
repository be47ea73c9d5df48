package unit

import (
	"strings"
	"testing"
)

func TestParseHeader(t *testing.T) {
	kinds := map[string]Kind{"x": Length, "dx": Length, "angle": Angle}
	// Factors: 1 in = 2.54e-2 m and 1 mil = 2.54e-5 m exactly (NIST SP 811,
	// 2008 edition, appendix B.9, "Length"; published). 1 deg = π/180 rad by
	// definition.
	header := []string{"\ufeffname", " x [in]", "dx[mil]", "angle [deg]"}
	idx, cols, err := ParseHeader(header, kinds)
	if err != nil {
		t.Fatal(err)
	}
	want := []Column{{"name", "", 1}, {"x", "in", 2.54e-2}, {"dx", "mil", 2.54e-5}, {"angle", "deg", Degree}}
	for i, w := range want {
		if idx[w.Name] != i {
			t.Errorf("index of %q = %d, want %d", w.Name, idx[w.Name], i)
		}
		if cols[i] != w {
			t.Errorf("column %d = %+v, want %+v", i, cols[i], w)
		}
	}
}

func TestParseHeaderErrors(t *testing.T) {
	kinds := map[string]Kind{"x": Length}
	tests := []struct {
		name   string
		header []string
		want   string
	}{
		{"no unit", []string{"x"}, `column 1 "x": the header needs a unit, as in "x [mil]"`},
		{"unknown unit", []string{"name", "x [furlong]"}, `column 2 "x [furlong]": unknown length unit "furlong"`},
		{"wrong kind", []string{"x [ppm]"}, `unknown length unit "ppm"`},
		{"unit on a plain column", []string{"name [in]"}, `column 1 "name [in]": this column takes no unit`},
		{"unclosed", []string{"x ]in["}, `unclosed [unit]`},
		{"duplicate", []string{"x [in]", "x [mm]"}, `column 2 "x [mm]": duplicate column`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, _, err := ParseHeader(tt.header, kinds)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %v, want it to contain %q", err, tt.want)
			}
		})
	}
}
