package registration

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
)

// TestAppliedWorkedExample walks the sign convention of Applied through one
// lot: built with +200 ppm, measured −10 ppm. The reference values follow
// from the definition 1 + ε = (1+a)(1+m) (calculated here, by hand):
// m = 0.99999/1.0002 − 1 = −209.95801 ppm, the setting 1/(1+m) − 1 =
// 1.0002/0.99999 − 1 = +210.00210 ppm and the change +10.00210 ppm.
func TestAppliedWorkedExample(t *testing.T) {
	const ppm = 1e-6
	// The hand values are given to 1e-5 ppm; the float64 arithmetic agrees
	// far closer, so 1e-5 ppm is the rounding of the reference itself.
	const tol = 1e-5 * ppm
	a, eps := 200*ppm, -10*ppm
	m := MaterialScale(eps, a)
	s := Setting(m)
	cases := []struct {
		name      string
		got, want float64
	}{
		{"material movement", m, -209.95801 * ppm},
		{"new setting", s, 210.00210 * ppm},
		{"change", s - a, 10.00210 * ppm},
		// The first-order forms the issue states: about +210 and +10 ppm.
		{"new setting, first order", -(eps - a), 210 * ppm},
	}
	for _, c := range cases {
		if math.Abs(c.got-c.want) > tol {
			t.Errorf("%s: %.6f ppm, want %.6f ppm", c.name, c.got/ppm, c.want/ppm)
		}
	}
	// Building the next lot with the setting s lands a lot of the same
	// material exactly on CAD: (1+s)(1+m) = 1.
	if r := (1+s)*(1+m) - 1; math.Abs(r) > 1e-15 {
		t.Errorf("(1+s)(1+m) − 1 = %g, want 0", r)
	}
}

func TestReadApplied(t *testing.T) {
	const ppm = 1e-6
	in := "# lot 7 artwork\nlayer, scale_x [ppm], scale_y [mil/in]\nL3,+200,0.15\nL4,-35.5,0\n"
	set, err := ReadApplied(strings.NewReader(in), "a.csv")
	if err != nil {
		t.Fatal(err)
	}
	if len(set) != 2 {
		t.Fatalf("%d layers, want 2", len(set))
	}
	l3 := set["L3"]
	if l3.Row != 3 || !near(l3.ScaleX, 200*ppm) || !near(l3.ScaleY, 150*ppm) {
		t.Errorf("L3 = %+v", l3)
	}
	x, y, ok := set.For("L3-L4")
	// (1+200e-6)/(1−35.5e-6) − 1 and (1+150e-6)/1 − 1 (calculated here).
	if !ok || math.Abs(x-235.508360*ppm) > 1e-6*ppm || !near(y, 150*ppm) {
		t.Errorf("L3-L4: %g, %g, %v", x/ppm, y/ppm, ok)
	}
	if _, _, ok := set.For("L9"); ok {
		t.Error("L9 is not in the set")
	}
}

func TestReadAppliedErrors(t *testing.T) {
	const h = "layer,scale_x [ppm],scale_y [ppm]\n"
	tests := []struct {
		name, csv string
		row       int
		column    string
		contains  string
	}{
		{"empty file", "", 1, "", "empty"},
		{"no unit", "layer,scale_x,scale_y [ppm]\n", 1, "", "needs a unit"},
		{"unknown column", "layer,scale_x [ppm],scale_y [ppm],note\n", 1, "note", "unknown column"},
		{"missing column", "layer,scale_x [ppm]\n", 1, "scale_y", "missing column"},
		{"no rows", h, 0, "", "no layers"},
		{"empty layer", h + " ,1,2\n", 2, "layer", "empty cell"},
		{"pair", h + "L3-L4,1,2\n", 2, "layer", "one layer"},
		{"duplicate", h + "L3,1,2\nL3,1,2\n", 3, "layer", "row 2"},
		{"not a number", h + "L3,1,x\n", 2, "scale_y", "finite"},
		{"absurd", h + "L3,1e6,0\n", 2, "scale_x", "50 %"},
		{"field count", h + "L3,1\n", 2, "", "2 fields"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ReadApplied(strings.NewReader(tt.csv), "a.csv")
			var ce *CSVError
			if !errors.As(err, &ce) {
				t.Fatalf("error %v, want a *CSVError", err)
			}
			if ce.File != "a.csv" || ce.Row != tt.row || ce.Column != tt.column || !strings.Contains(err.Error(), tt.contains) {
				t.Errorf("got %v (row %d, column %q), want row %d, column %q, containing %q", err, ce.Row, ce.Column, tt.row, tt.column, tt.contains)
			}
		})
	}
}

func FuzzReadApplied(f *testing.F) {
	f.Add("layer,scale_x [ppm],scale_y [ppm]\nL3,200,-10\n")
	f.Add("layer,scale_x [mil/in],scale_y [%]\nL3,0.2,0.01\nL4,0,0\n")
	f.Add("layer,scale_x [ppm]\n\"L3\n")
	f.Fuzz(func(t *testing.T, s string) {
		set, err := ReadApplied(strings.NewReader(s), "f.csv")
		if err != nil {
			var ce *CSVError
			if !errors.As(err, &ce) {
				t.Fatalf("error %v is not a *CSVError", err)
			}
			return
		}
		for l, a := range set {
			if l == "" || l != a.Layer || math.IsNaN(a.ScaleX) || math.Abs(a.ScaleX) >= 0.5 || math.Abs(a.ScaleY) >= 0.5 {
				t.Fatalf("bad entry %q: %+v", l, a)
			}
		}
	})
}

// FuzzParseAppliedFlag: the compact --applied form never panics, and
// whatever it accepts prints back (in ppm) to the same layer and scales.
func FuzzParseAppliedFlag(f *testing.F) {
	for _, s := range []string{"L3:x=+200ppm,y=+180ppm", "L4:y=-0.15mil/in", "L3:x=1%", ":x=1ppm", "L3:", "L3:x=", "L3-L4:x=1ppm", "L3:x=1ppm,x=2ppm", "L3:X = 5 ppm"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		a, err := ParseAppliedFlag(s)
		if err != nil {
			return
		}
		if !(math.Abs(a.ScaleX) < 0.5 && math.Abs(a.ScaleY) < 0.5) {
			t.Fatalf("%q: accepted %g, %g beyond ±50 %%", s, a.ScaleX, a.ScaleY)
		}
		back := fmt.Sprintf("%s:x=%.17gppm,y=%.17gppm", a.Layer, a.ScaleX*1e6, a.ScaleY*1e6)
		b, err := ParseAppliedFlag(back)
		if err != nil {
			t.Fatalf("%q → %q: %v", s, back, err)
		}
		if b.Layer != a.Layer || math.Abs(b.ScaleX-a.ScaleX) > 1e-15 || math.Abs(b.ScaleY-a.ScaleY) > 1e-15 {
			t.Fatalf("%q → %+v, back %q → %+v", s, a, back, b)
		}
	})
}

// TestParseAppliedFlag: the compact form's accepted and refused values.
func TestParseAppliedFlag(t *testing.T) {
	for _, c := range []struct {
		in     string
		x, y   float64
		errHas string
	}{
		{"L3:x=+200ppm,y=+180ppm", 200e-6, 180e-6, ""},
		{"L4:y=-15ppm", 0, -15e-6, ""},
		{"L3: X = 0.01 % ", 100e-6, 0, ""},
		{"L3-L4:x=1ppm", 0, 0, "not a pair"},
		{"L3:x=1ppm,x=2ppm", 0, 0, "want LAYER"},
		{"L3:x=60%", 0, 0, "±50 %"},
		{"L3:x=2mil", 0, 0, "x:"},
		{"L3", 0, 0, "want LAYER"},
	} {
		a, err := ParseAppliedFlag(c.in)
		switch {
		case c.errHas != "":
			if err == nil || !strings.Contains(err.Error(), c.errHas) {
				t.Errorf("%q: error %v, want one saying %q", c.in, err, c.errHas)
			}
		case err != nil:
			t.Errorf("%q: %v", c.in, err)
		case math.Abs(a.ScaleX-c.x) > 1e-18 || math.Abs(a.ScaleY-c.y) > 1e-18 || a.Layer != strings.TrimSpace(strings.Split(c.in, ":")[0]):
			t.Errorf("%q: read %+v, want x %g y %g", c.in, a, c.x, c.y)
		}
	}
}
