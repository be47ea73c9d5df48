package figure

import (
	"bytes"
	"image/png"
	"testing"

	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// TestVariants draws a Monte Carlo and a closed-form comparison (invented
// numbers) and checks that the PNG decodes at the chart's width, with the
// first variant's colour and the coupon grey both on it.
func TestVariants(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	arrays := []drift.YieldArray{
		{Name: "left", Part: "module", Product: true, Parts: 48, Sites: 96, SiteYieldMean: f(0.92), PartYieldMean: f(0.85), GoodPartsMean: f(40.8),
			PartYieldBounds: [2]float64{0.84, 0.88}, GoodPartsBounds: [2]float64{40.3, 42.2}},
		{Name: "coupons", Part: "strip", Product: false, Parts: 1, Sites: 3, SiteYieldMean: f(0.9), PartYieldMean: f(0.77), GoodPartsMean: f(0.77),
			PartYieldBounds: [2]float64{0.71, 0.88}, GoodPartsBounds: [2]float64{0.71, 0.88}},
	}
	mc := &drift.VariantComparison{Trials: 1000, Seed: 1, Variants: []drift.Variant{
		{Name: "A", Parts: 48, Coupons: 1, SiteYieldMean: f(0.92), PartYieldMean: f(0.85), GoodPartsPerPanel: &drift.GoodParts{Mean: 40.8},
			PartYieldBounds: [2]float64{0.84, 0.88}, GoodPartsBounds: [2]float64{40.3, 42.2}, Arrays: arrays},
	}}
	closed := &drift.VariantComparison{Variants: []drift.Variant{{Name: "A", Parts: 48, Coupons: 1,
		PartYieldBounds: [2]float64{0.84, 0.88}, GoodPartsBounds: [2]float64{40.3, 42.2}, Arrays: arrays}}}
	for _, c := range []struct {
		name string
		cmp  *drift.VariantComparison
	}{{"monte carlo", mc}, {"closed form", closed}} {
		t.Run(c.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := Variants(&buf, c.cmp, "invented design"); err != nil {
				t.Fatal(err)
			}
			img, err := png.Decode(&buf)
			if err != nil {
				t.Fatal(err)
			}
			if w := img.Bounds().Dx(); w != 2000 {
				t.Errorf("width %d, want 2000", w)
			}
			first, grey := false, false
			s := render.Series(0)
			for y := img.Bounds().Min.Y; y < img.Bounds().Max.Y; y++ {
				for x := img.Bounds().Min.X; x < img.Bounds().Max.X; x++ {
					r, g, b, _ := img.At(x, y).RGBA()
					first = first || (uint8(r>>8) == s.R && uint8(g>>8) == s.G && uint8(b>>8) == s.B)
					grey = grey || (r>>8 == 150 && g>>8 == 150 && b>>8 == 155)
				}
			}
			if !first || !grey {
				t.Errorf("variant colour drawn %v, coupon grey drawn %v", first, grey)
			}
		})
	}
}
