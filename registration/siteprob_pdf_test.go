package registration

import (
	"math"
	"testing"
)

// TestSiteProbPDF checks the density against a central difference of the
// closed-form CDF (whose own checks are in yield_test.go), for a normal
// part alone, one box, two boxes and boxes without a normal part. The
// difference step h = 1e-4 of the spread errs by h²/6·|f″| ~ 1e-9 of the
// density's scale, and cancellation by ε/h ~ 1e-12; allow 1e-6 relative
// to the peak density (calculated here). Kinks must bracket the boxes.
func TestSiteProbPDF(t *testing.T) {
	for _, p := range []SiteProb{
		{Mean: 0.3, SD: 1},
		{Mean: -1, SD: 0.5, Uniform: 2},
		{Mean: 0, SD: 0.2, Uniform: 1.5, Uniform2: 0.7},
		{Mean: 0.5, Uniform: 1},
		{Mean: 0.5, Uniform: 1, Uniform2: 0.4},
	} {
		spread := p.SD + p.Uniform + p.Uniform2
		h := 1e-4 * spread
		peak := 0.0
		for i := -400; i <= 400; i++ {
			peak = math.Max(peak, p.PDF(p.Mean+spread*float64(i)/100))
		}
		for i := -397; i <= 397; i += 7 {
			x := p.Mean + spread*float64(i)/100
			if near := p.Kinks(nil); p.SD == 0 && len(near) > 0 {
				skip := false
				for _, k := range near {
					skip = skip || math.Abs(x-k) < 2*h
				}
				if skip {
					continue // the density jumps at a box edge without a normal part
				}
			}
			want := (p.CDF(x+h) - p.CDF(x-h)) / (2 * h)
			if got := p.PDF(x); math.Abs(got-want) > 1e-6*peak {
				t.Errorf("%+v at %g: PDF %.9g, CDF difference %.9g", p, x, got, want)
			}
		}
		var area float64
		for i := -6000; i < 6000; i++ { // midpoint rule: the density integrates to 1
			area += p.PDF(p.Mean+spread*(float64(i)+0.5)/1000) * spread / 1000
		}
		if math.Abs(area-1) > 1e-5 {
			t.Errorf("%+v: density integrates to %.8f", p, area)
		}
	}
	if k := (SiteProb{SD: 1, Uniform: 2, Uniform2: 1}).Kinks(nil); len(k) != 4 || k[0] != -3 || k[3] != 3 {
		t.Errorf("kinks %v, want ±2 ± 1", k)
	}
}
