package history_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/history"
)

// Example stores two invented lots of one layer, built with +200 ppm
// artwork, and reads back the material movement lot by lot.
func Example() {
	dir, _ := os.MkdirTemp("", "history-example-")
	defer os.RemoveAll(dir)
	ctx := context.Background()
	d, err := history.Open(ctx, filepath.Join(dir, "h.db"))
	if err != nil {
		fmt.Println(err)
		return
	}
	defer d.Close()
	const ppm = 1e-6
	for i, measured := range []float64{-10 * ppm, -4 * ppm} {
		f := history.FitRecord{Panel: "P1", Layer: "L3", Construction: "5mil core", Role: "core top",
			Model: registration.Affine, AppliedX: 200 * ppm, AppliedY: 200 * ppm}
		f.Terms[registration.ScaleX] = measured
		lot := &history.Lot{Name: fmt.Sprintf("L%d", i+1), Date: fmt.Sprintf("2026-05-0%d", i+1), Fits: []history.FitRecord{f}}
		if err := d.Add(ctx, lot, false); err != nil {
			fmt.Println(err)
			return
		}
	}
	ss, _ := d.Series(ctx, history.Filter{Construction: "5mil core"}, registration.ScaleX)
	for _, p := range ss[0].Points {
		fmt.Printf("%s %s: moved %.2f ppm\n", p.Lot, p.Date, p.Mean[registration.ScaleX]/ppm)
	}
	// Output:
	// L1 2026-05-01: moved -209.96 ppm
	// L2 2026-05-02: moved -203.96 ppm
}

// ExampleEWMAEstimate recommends the artwork for the next lot from three
// lots' movement (invented).
func ExampleEWMAEstimate() {
	const ppm = 1e-6
	est := history.EWMAEstimate([]float64{-210 * ppm, -200 * ppm, -220 * ppm}, 8*ppm, history.ControllerLambda)
	fmt.Printf("movement %.1f ppm ± %.1f, next artwork %+.1f ppm\n", est.Movement/ppm, est.SE/ppm, registration.Setting(est.Movement)/ppm)
	// Output:
	// movement -210.9 ppm ± 4.9, next artwork +210.9 ppm
}
