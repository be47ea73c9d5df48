package drift

import (
	"errors"
	"math"
	"testing"
)

// TestParseExcursions reads excursion lists on top of the defaults. The
// lengths use 1 mil = 2.54e-5 m and 1 um = 1e-6 m exactly (NIST Special
// Publication 811, 2008 edition, appendix B.9, "Length"; published).
func TestParseExcursions(t *testing.T) {
	const mil = 2.54e-5
	tests := []struct {
		in   string
		want Excursions
		bad  bool
	}{
		{"", DefaultExcursions, false},
		{"thickness=5%,er=0.05,width=0.3mil", Excursions{Thickness: 0.05, ThicknessRelative: true, Er: 0.05, Width: 0.3 * mil, Etch: 0.5 * mil, Copper: 0.3 * mil}, false},
		{" thickness = 1 mil , copper=5um, etch=0.2mil", Excursions{Thickness: 1 * mil, Er: 0.1, Width: 0.5 * mil, Etch: 0.2 * mil, Copper: 5e-6}, false},
		{"thickness=100%", Excursions{}, true},
		{"thickness=0%", Excursions{}, true},
		{"er=-0.1", Excursions{}, true},
		{"er=NaN", Excursions{}, true},
		{"width=0.3", Excursions{}, true}, // a length needs its unit
		{"width", Excursions{}, true},
		{"gap=1mil", Excursions{}, true},
		{"copper=Inf mil", Excursions{}, true},
	}
	near := func(a, b float64) bool { return math.Abs(a-b) <= 1e-15*math.Max(math.Abs(a), math.Abs(b)) }
	for _, tt := range tests {
		got, err := ParseExcursions(tt.in)
		if tt.bad {
			if !errors.Is(err, ErrExcursion) {
				t.Errorf("%q: err %v, want ErrExcursion", tt.in, err)
			}
			continue
		}
		if err != nil {
			t.Errorf("%q: %v", tt.in, err)
			continue
		}
		w := tt.want
		if got.ThicknessRelative != w.ThicknessRelative || !near(got.Thickness, w.Thickness) || !near(got.Er, w.Er) ||
			!near(got.Width, w.Width) || !near(got.Etch, w.Etch) || !near(got.Copper, w.Copper) {
			t.Errorf("%q: got %+v, want %+v", tt.in, got, w)
		}
	}
}

// FuzzParseExcursions checks that any list either parses to positive,
// finite excursions (a relative thickness below 1) or fails with
// ErrExcursion, and never panics.
func FuzzParseExcursions(f *testing.F) {
	for _, s := range []string{"", "thickness=5%,er=0.05,width=0.3mil", "thickness=1mil", "copper=5um,etch=0.1mil", "er=,", "=", "width=1e400mil", "thickness=-0%"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		ex, err := ParseExcursions(s)
		if err != nil {
			if !errors.Is(err, ErrExcursion) {
				t.Fatalf("%q: error %v does not wrap ErrExcursion", s, err)
			}
			return
		}
		for _, v := range []float64{ex.Thickness, ex.Er, ex.Width, ex.Etch, ex.Copper} {
			if !(v > 0) || math.IsInf(v, 0) {
				t.Fatalf("%q: excursion %g not positive and finite: %+v", s, v, ex)
			}
		}
		if ex.ThicknessRelative && !(ex.Thickness < 1) {
			t.Fatalf("%q: relative thickness excursion %g", s, ex.Thickness)
		}
	})
}
