package samples

import (
	"bytes"
	"context"
	"math"
	"path/filepath"
	"testing"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/history"
)

// TestDemoHistory loads the invented demo history through the fitter into a
// database and checks that the scale table finds what the generator put
// in: the laminate change of 5mil-core-A flagged, 8mil-core-B's movement.
func TestDemoHistory(t *testing.T) {
	ctx := context.Background()
	d, err := history.Open(ctx, filepath.Join(t.TempDir(), "demo.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	lots := DemoHistory()
	if len(lots) != 60 {
		t.Fatalf("%d lots", len(lots))
	}
	for _, h := range lots {
		var tb, ab bytes.Buffer
		if err := h.WriteTargets(&tb); err != nil {
			t.Fatal(err)
		}
		if err := h.WriteApplied(&ab); err != nil {
			t.Fatal(err)
		}
		ts, err := registration.ReadTargets(&tb, h.Name+".csv")
		if err != nil {
			t.Fatal(err)
		}
		applied, err := registration.ReadApplied(&ab, h.Name+"-applied.csv")
		if err != nil {
			t.Fatal(err)
		}
		fits, err := registration.FitAll(ts, &registration.FitSettings{Robust: registration.Tukey})
		if err != nil {
			t.Fatal(err)
		}
		l, err := history.NewLot(h.Name, h.Date, fits, history.OneConstruction(h.Construction), applied, h.Name+"-applied.csv")
		if err != nil {
			t.Fatal(err)
		}
		if err := d.Add(ctx, l, false); err != nil {
			t.Fatal(err)
		}
	}
	rows, err := d.ScaleTable(ctx, history.Filter{})
	if err != nil {
		t.Fatal(err)
	}
	const ppm = 1e-6
	// Expected: the generator's movements (invented), after the change for
	// A. The lot means scatter by 8 ppm lot to lot and 10/√4 ppm panel to
	// panel; the EWMA's SE is about 0.42 of that; allow 4 SE as the tests of
	// the controller do.
	want := map[[3]string]float64{
		{HistoryCoreA, "L3", "x"}: -235 * ppm, {HistoryCoreA, "L3", "y"}: -175 * ppm,
		{HistoryCoreB, "L4", "x"}: -110 * ppm, {HistoryCoreB, "L4", "y"}: -85 * ppm,
	}
	shifted := map[string]bool{}
	for _, r := range rows {
		if r.Lots != 30 {
			t.Errorf("%s %s %s: %d lots, want 30", r.Construction, r.Role, r.Axis, r.Lots)
		}
		if r.Axis == "x" && r.Shifted() {
			shifted[r.Construction] = true
		}
		w, ok := want[[3]string{r.Construction, r.Role, r.Axis}]
		if !ok {
			continue
		}
		se := 0.42 * math.Hypot(8*ppm, 5*ppm)
		if math.Abs(r.Movement-w) > 4*se {
			t.Errorf("%s %s %s: movement %.1f ppm, want %.0f ± %.1f", r.Construction, r.Role, r.Axis, r.Movement/ppm, w/ppm, 4*se/ppm)
		}
	}
	if !shifted[HistoryCoreA] {
		t.Error("the laminate change of 5mil-core-A is not flagged")
	}
}
