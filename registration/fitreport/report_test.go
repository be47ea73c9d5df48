package fitreport

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

const (
	mil  = unit.Mil
	inch = unit.Inch
)

// testReport fits two panels of nine targets on L3 moved by exactly
// 0.5 mil in x, −0.3 mil in y and +100 ppm of scale in x (invented data,
// generated here from those terms, with no noise).
func testReport(t *testing.T) *Report {
	t.Helper()
	var ts []registration.Target
	for _, p := range []string{"P1", "P2"} {
		for i := range 9 {
			pos := panel.Vec{X: float64(i%3-1) * 4 * inch, Y: float64(i/3-1) * 5 * inch}
			ts = append(ts, registration.Target{Panel: p, Layer: "L3", Name: fmt.Sprintf("T%d", i+1), Pos: pos,
				D: panel.Vec{X: 0.5*mil + 100e-6*pos.X, Y: -0.3 * mil}})
		}
	}
	r, err := New("targets.csv", registration.GroupTargets(ts), registration.FitSettings{}, 3)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// TestSummaryRoundTrip: the JSON summary reads back to the same terms, and
// they are the terms the targets were generated from (exact data: the
// least-squares solution reproduces them to rounding, 1e-9 of a mil here).
func TestSummaryRoundTrip(t *testing.T) {
	r := testReport(t)
	b, err := json.Marshal(r.Summary())
	if err != nil {
		t.Fatal(err)
	}
	var s Summary
	if err := json.Unmarshal(b, &s); err != nil {
		t.Fatal(err)
	}
	if len(s.Fits) != 2 || len(s.Lot) != 1 || s.Lot[0].Panels != 2 {
		t.Fatalf("summary %s", b)
	}
	want := map[registration.TermKind]float64{registration.OffsetX: 0.5 * mil, registration.OffsetY: -0.3 * mil, registration.ScaleX: 100e-6}
	for _, f := range s.Fits {
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			got := f.Terms[k]
			if got == nil {
				t.Fatalf("fit %s: term %s missing", f.Panel, k)
			}
			tol := 1e-9 * mil
			if k == registration.ScaleX || k == registration.ScaleY || k == registration.Rotation || k == registration.Skew {
				tol = 1e-12
			}
			if math.Abs(*got-want[k]) > tol {
				t.Errorf("fit %s: %s = %g, want %g", f.Panel, k, *got, want[k])
			}
		}
	}
}

// TestGridRoundTrip: a pooled residual grid written by WriteGridCSV reads
// back with registration.ReadGrid to the printed precision (6 decimals of
// an inch, 5 of a mil).
func TestGridRoundTrip(t *testing.T) {
	r := testReport(t)
	g := r.Grids["L3"]
	if g == nil {
		t.Fatal("no grid for L3")
	}
	// A grid with values to read back: the pooled residuals of exact data
	// are zero, so add a known pattern.
	for j := range g.Y {
		for i := range g.X {
			g.DX[j][i], g.DY[j][i] = float64(i+1)*0.1*mil, -float64(j+1)*0.07*mil
		}
	}
	var b bytes.Buffer
	if err := WriteGridCSV(&b, g, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	h, err := registration.ReadGrid(&b, "grid.csv")
	if err != nil {
		t.Fatal(err)
	}
	const posTol, dTol = 0.5e-6 * inch, 0.5e-5 * mil
	for j := range g.Y {
		for i := range g.X {
			if math.Abs(h.X[i]-g.X[i]) > posTol || math.Abs(h.Y[j]-g.Y[j]) > posTol ||
				math.Abs(h.DX[j][i]-g.DX[j][i]) > dTol || math.Abs(h.DY[j][i]-g.DY[j][i]) > dTol {
				t.Fatalf("node (%d, %d): read %v %v %g %g, wrote %v %v %g %g", i, j, h.X[i], h.Y[j], h.DX[j][i], h.DY[j][i], g.X[i], g.Y[j], g.DX[j][i], g.DY[j][i])
			}
		}
	}
}

// TestFitCSV: fit.csv names each term with its output unit and gives the
// generated terms in them (0.5 mil, +100 ppm).
func TestFitCSV(t *testing.T) {
	r := testReport(t)
	var b bytes.Buffer
	if err := r.WriteFitCSV(&b, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&b).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	for name, want := range map[string]float64{"offset_x [mil]": 0.5, "offset_y [mil]": -0.3, "scale_x [ppm]": 100} {
		i, ok := col[name]
		if !ok {
			t.Fatalf("no column %q in %v", name, recs[0])
		}
		v, err := strconv.ParseFloat(recs[1][i], 64)
		if err != nil || math.Abs(v-want) > 1e-4 {
			t.Errorf("%s = %q, want %g", name, recs[1][i], want)
		}
	}
}
