package unit

import "testing"

func TestParseOutput(t *testing.T) {
	// 1 mil = 2.54e-5 m, 1 in = 2.54e-2 m exactly (NIST SP 811, 2008 edition,
	// appendix B.9, "Length"; published); 1 µm = 1e-6 m and 1 mm = 1e-3 m by
	// the SI prefixes (NIST SP 811, table 5).
	tests := []struct {
		in                string
		want              Output
		length, panel     string
		lengthSI, panelSI float64
	}{
		{"", MilInch, "mil", "in", 2.54e-5, 2.54e-2},
		{"mil", MilInch, "mil", "in", 2.54e-5, 2.54e-2},
		{"um", MicronMM, "um", "mm", 1e-6, 1e-3},
		{"µm", MicronMM, "um", "mm", 1e-6, 1e-3},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			o, err := ParseOutput(tt.in)
			if err != nil {
				t.Fatal(err)
			}
			if o != tt.want || o.Length() != tt.length || o.Panel() != tt.panel || o.LengthSI() != tt.lengthSI || o.PanelSI() != tt.panelSI {
				t.Errorf("%q: got %v (%s %g m, %s %g m)", tt.in, o, o.Length(), o.LengthSI(), o.Panel(), o.PanelSI())
			}
			// The names are units Parse knows, of the same size.
			if f, ok := Factor(Length, o.Length()); !ok || f != o.LengthSI() {
				t.Errorf("%s: Factor %g, %v", o.Length(), f, ok)
			}
			if f, ok := Factor(Length, o.Panel()); !ok || f != o.PanelSI() {
				t.Errorf("%s: Factor %g, %v", o.Panel(), f, ok)
			}
			if back, err := ParseOutput(o.String()); err != nil || back != o {
				t.Errorf("ParseOutput(%q) = %v, %v", o.String(), back, err)
			}
		})
	}
	for _, bad := range []string{"mm", "in", "MIL", "micron"} {
		if _, err := ParseOutput(bad); err == nil {
			t.Errorf("ParseOutput(%q) accepted", bad)
		}
	}
	var zero Output
	if zero != MilInch {
		t.Errorf("the zero Output is %v, want mil", zero)
	}
}
