package main

import (
	"fmt"
	"math"
	"testing"
)

// FuzzAppliedFlag: the compact --applied form never panics, and whatever it
// accepts prints back (in ppm) to the same layer and scales.
func FuzzAppliedFlag(f *testing.F) {
	for _, s := range []string{"L3:x=+200ppm,y=+180ppm", "L4:y=-0.15mil/in", "L3:x=1%", ":x=1ppm", "L3:", "L3:x=", "L3-L4:x=1ppm", "L3:x=1ppm,x=2ppm", "L3:X = 5 ppm"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		a, err := parseAppliedFlag(s)
		if err != nil {
			return
		}
		if !(math.Abs(a.ScaleX) < 0.5 && math.Abs(a.ScaleY) < 0.5) {
			t.Fatalf("%q: accepted %g, %g beyond ±50 %%", s, a.ScaleX, a.ScaleY)
		}
		back := fmt.Sprintf("%s:x=%.17gppm,y=%.17gppm", a.Layer, a.ScaleX*1e6, a.ScaleY*1e6)
		b, err := parseAppliedFlag(back)
		if err != nil {
			t.Fatalf("%q → %q: %v", s, back, err)
		}
		if b.Layer != a.Layer || math.Abs(b.ScaleX-a.ScaleX) > 1e-15 || math.Abs(b.ScaleY-a.ScaleY) > 1e-15 {
			t.Fatalf("%q → %+v, back %q → %+v", s, a, back, b)
		}
	})
}
