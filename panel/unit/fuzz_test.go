package unit

import (
	"encoding/csv"
	"math"
	"strings"
	"testing"
)

// FuzzParseRange feeds FROM:TO:STEP strings, seeded from the flags' examples
// and the bad ranges of TestParseRange: an accepted range is finite, ordered,
// with a positive step and at most 100,000 steps, and its values start at
// From, rise by Step and end within a step of To.
func FuzzParseRange(f *testing.F) {
	for _, s := range []string{"-2mil:2mil:0.5mil", "-5mil:5mil:0.5mil", "0mil:4mil:1mil", "0 mm:1 mm:0.1 mm",
		"1mil:2mil", "2mil:1mil:1mil", "0mil:1mil:0mil", "0:1mil:1mil", "-1e308m:1e308m:1e303m", "0in:1in:1e-300in"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		r, err := ParseRange(s, Length)
		if err != nil {
			return
		}
		if !(r.Step > 0) || r.To < r.From || math.IsInf(r.From, 0) || math.IsInf(r.To, 0) || (r.To-r.From)/r.Step > 1e5 {
			t.Fatalf("ParseRange(%q) = %+v", s, r)
		}
		v := r.Values()
		if len(v) == 0 || len(v) > 100_001 || v[0] != r.From || v[len(v)-1] > r.To+1e-9*r.Step+1e-12*math.Abs(r.To) {
			t.Fatalf("ParseRange(%q) = %+v: %d values, first %v, last %v", s, r, len(v), v[0], v[len(v)-1])
		}
	})
}

// FuzzParseHeader feeds CSV header lines, seeded from the readers' headers:
// no panic; an accepted header has a distinct lower-case name per column, a
// positive finite factor for each, and a unit on every column that needs one.
func FuzzParseHeader(f *testing.F) {
	for _, s := range []string{"panel,layer,target,x [in],y [in],dx [mil],dy [mil]", "\ufeffX [mm], Y [mm],DX [um],dy [µm]",
		"name,x [in],y [in],angle [deg],section", "panel;layer;x [in]", "x [in", "x ]in[", "x [],y [in]", "a,A"} {
		f.Add(s)
	}
	kinds := map[string]Kind{"x": Length, "y": Length, "dx": Length, "dy": Length, "angle": Angle}
	f.Fuzz(func(t *testing.T, s string) {
		rec, err := csv.NewReader(strings.NewReader(s)).Read()
		if err != nil {
			return
		}
		idx, cols, err := ParseHeader(rec, kinds)
		if err != nil {
			return
		}
		if len(cols) != len(rec) || len(idx) != len(rec) {
			t.Fatalf("%q: %d columns, %d names for %d cells", s, len(cols), len(idx), len(rec))
		}
		for i, c := range cols {
			if idx[c.Name] != i || c.Name != strings.ToLower(c.Name) || !(c.Factor > 0) || math.IsInf(c.Factor, 0) {
				t.Fatalf("%q: column %d %+v", s, i, c)
			}
			if _, ok := kinds[c.Name]; ok && c.Unit == "" {
				t.Fatalf("%q: column %q without its unit", s, c.Name)
			}
		}
	})
}
