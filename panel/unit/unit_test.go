package unit

import (
	"errors"
	"math"
	"testing"
)

func TestParseExact(t *testing.T) {
	// 1 in = 25.4 mm exactly and 1 mil = 0.001 in: the international inch of 1959
	// (NIST SP 811, appendix B). 1 mil/in = 1000 ppm by definition.
	tests := []struct {
		in   string
		kind Kind
		want float64
	}{
		{"1 in", Length, 0.0254},
		{"18 in", Length, 0.4572},
		{"1 mil", Length, 25.4e-6},
		{"20mil", Length, 20 * 25.4e-6},
		{"0.5 mm", Length, 0.5e-3},
		{"25 um", Length, 25e-6},
		{"25 µm", Length, 25e-6},
		{"25 μm", Length, 25e-6},
		{"-3.5e-1 mm", Length, -0.35e-3},
		{"+150 ppm", Strain, 150e-6},
		{"0.15 mil/in", Strain, 150e-6},
		{"-345ppm", Strain, -345e-6},
		{"35 urad", Angle, 35e-6},
		{"35 µrad", Angle, 35e-6},
		{"180 deg", Angle, math.Pi},
		{"3600 arcsec", Angle, math.Pi / 180},
		{"2.45 GHz", Frequency, 2.45e9},
		{"100 MHz", Frequency, 1e8},
		{"-3.0 dB", Decibel, -3},
		{"50 ohm", Impedance, 50},
		{"50 Ω", Impedance, 50},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			got, err := Parse(tt.in, tt.kind)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(got-tt.want) > 1e-15*math.Abs(tt.want) {
				t.Errorf("Parse(%q) = %.17g, want %.17g", tt.in, got, tt.want)
			}
		})
	}
}

func TestParseErrors(t *testing.T) {
	tests := []struct {
		in   string
		kind Kind
		want error
	}{
		{"20", Length, ErrNoUnit},
		{"20 furlong", Length, ErrUnknownUnit},
		{"20 ppm", Length, ErrUnknownUnit},
		{"mil", Length, ErrNumber},
		{"", Length, ErrNumber},
		{"NaN mil", Length, ErrNotFinite},
		{"Inf ppm", Strain, ErrNotFinite},
		{"1e400 mil", Length, ErrNumber},
		{"2.45 ghz", Frequency, ErrUnknownUnit},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			_, err := Parse(tt.in, tt.kind)
			if !errors.Is(err, tt.want) {
				t.Fatalf("Parse(%q) error %v, want %v", tt.in, err, tt.want)
			}
			if err.Error() == "" {
				t.Fatal("empty message")
			}
		})
	}
}

func TestMessageNamesUnits(t *testing.T) {
	_, err := Parse("20", Length)
	if got, want := err.Error(), `"20": a length needs a unit (in, mil, mm, um, m)`; got != want {
		t.Errorf("message %q, want %q", got, want)
	}
}

func TestRange(t *testing.T) {
	r, err := ParseRange("-2mil:2mil:0.5mil", Length)
	if err != nil {
		t.Fatal(err)
	}
	v := r.Values()
	if len(v) != 9 || math.Abs(v[8]-2*Mil) > 1e-18 || math.Abs(v[0]+2*Mil) > 1e-18 {
		t.Fatalf("values %v", v)
	}
	for _, bad := range []string{"1mil:2mil", "2mil:1mil:1mil", "0mil:1mil:0mil", "0:1mil:1mil"} {
		if _, err := ParseRange(bad, Length); err == nil {
			t.Errorf("ParseRange(%q) accepted", bad)
		}
	}
}

func FuzzParse(f *testing.F) {
	for _, s := range []string{"20 mil", "-3.0 dB", "+150 ppm", "1e-3 in", "12 arcsec", "NaN", "5", "µm"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		for k := Length; k <= Impedance; k++ {
			v, err := Parse(s, k)
			if err != nil {
				continue
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("Parse(%q) = %v without error", s, v)
			}
			// Round trip through Format in the kind's first unit, with full precision.
			name := preferred[k][0]
			back, err := Parse(Format(v, k, name, -1), k)
			if err != nil {
				t.Fatalf("round trip of %q: %v", s, err)
			}
			if math.Abs(back-v) > 1e-12*math.Abs(v) {
				t.Fatalf("round trip of %q: %v became %v", s, v, back)
			}
		}
	})
}
