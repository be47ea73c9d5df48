package history

import (
	"bytes"
	"context"
	"encoding/csv"
	"fmt"
	"image/png"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/pelletier/go-toml/v2"

	"github.com/regdrift/regdrift/registration"
)

// stepHistory stores 40 invented lots: "C2 5mil" moves −150 ppm in x until
// lot 25 and −190 ppm after (a material change), built each time with the
// artwork a run-to-run controller would have set; L1 of "prepreg build"
// moves −80 ppm throughout.
func stepHistory(t *testing.T) *DB {
	d, _ := openTemp(t)
	rng := rand.New(rand.NewPCG(11, 12))
	for i := range 40 {
		mx := -150 * ppm
		if i >= 25 {
			mx = -190 * ppm
		}
		l := synthLot(rng, fmt.Sprintf("S%03d", i), fmt.Sprintf("2026-%02d-%02d", 1+i/28, 1+i%28), 8, []string{"L1", "L3", "L4"},
			[2]float64{mx, -100 * ppm}, [2]float64{160 * ppm, 100 * ppm})
		// L1 moves −80 ppm: rescale its fits.
		for j := range l.Fits {
			if f := &l.Fits[j]; f.Layer == "L1" {
				f.Terms[registration.ScaleX] = (1+f.AppliedX)*(1+registration.MaterialScale(f.Terms[registration.ScaleX], f.AppliedX)-mx-80*ppm) - 1
			}
		}
		if err := d.Add(context.Background(), l, false); err != nil {
			t.Fatal(err)
		}
	}
	return d
}

func TestTable(t *testing.T) {
	d := stepHistory(t)
	ss, err := d.Series(context.Background(), Filter{}, registration.ScaleX, registration.ScaleY)
	if err != nil {
		t.Fatal(err)
	}
	rows := Table(ss)
	// The database's table, which reads no names but the ones it shows,
	// agrees with the table of the full series.
	fast, err := d.ScaleTable(context.Background(), Filter{})
	if err != nil || len(fast) != len(rows) {
		t.Fatalf("ScaleTable: %d rows, %v", len(fast), err)
	}
	for i := range rows {
		a, b := rows[i], fast[i]
		if a.Movement != b.Movement || a.SE != b.SE || a.LastLot != b.LastLot || a.LastDate != b.LastDate ||
			fmt.Sprint(a.Signals, a.SignalLots) != fmt.Sprint(b.Signals, b.SignalLots) {
			t.Errorf("row %d: %+v, vs %+v", i, a, b)
		}
	}
	if len(rows) != 6 {
		t.Fatalf("%d rows, want 3 series × 2 axes", len(rows))
	}
	var top *TableRow
	for i := range rows {
		r := &rows[i]
		if r.Lots != 40 || r.LastLot != "S039" || r.Setting != registration.Setting(r.Movement) {
			t.Errorf("row %+v", r)
		}
		if r.Construction == "C2 5mil" && r.Role == "core top" && r.Axis == "x" {
			top = r
		}
	}
	if top == nil || !top.Shifted() {
		t.Fatalf("the stepped series is not flagged: %+v", top)
	}
	// 15 lots after the step the controller has absorbed all but
	// 0.7^15 = 0.5 % of it; the estimate's SE is about
	// σ_lot·√(λ/(2−λ)) with σ_lot ≈ 4 ppm/√8 = 1.4 ppm (within-lot noise
	// only; the MR̄ estimate is inflated by the step): allow 4 SE plus the
	// 0.2 ppm left of the step.
	if tol := 4*top.SE + 0.2*ppm; math.Abs(top.Movement+190*ppm) > tol {
		t.Errorf("movement %.2f ppm, want −190 ± %.2f", top.Movement/ppm, tol/ppm)
	}
	var csvBuf, tomlBuf bytes.Buffer
	if err := WriteTableCSV(&csvBuf, rows); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&csvBuf).ReadAll()
	if err != nil || len(recs) != 7 || recs[0][7] != "movement [ppm]" {
		t.Fatalf("table CSV: %v, %v", recs, err)
	}
	if err := WriteContributors(&tomlBuf, rows, "h.db"); err != nil {
		t.Fatal(err)
	}
	var job struct {
		Contributor []struct {
			Name   string
			Layers []string
			ScaleX map[string]string `toml:"scale_x"`
			ScaleY map[string]string `toml:"scale_y"`
		}
	}
	if err := toml.Unmarshal(tomlBuf.Bytes(), &job); err != nil {
		t.Fatalf("contributors TOML: %v\n%s", err, tomlBuf.String())
	}
	if len(job.Contributor) != 3 || !strings.HasSuffix(job.Contributor[0].ScaleX["mean"], " ppm") || job.Contributor[0].ScaleY["sigma"] == "" {
		t.Errorf("contributors: %+v\n%s", job.Contributor, tomlBuf.String())
	}
}

func TestTrendOutputs(t *testing.T) {
	d := stepHistory(t)
	ss, err := d.Series(context.Background(), Filter{Construction: "C2 5mil", Role: "core top"})
	if err != nil || len(ss) != 1 {
		t.Fatal(ss, err)
	}
	tr := NewTrend(&ss[0], registration.ScaleX)
	// The step of 40 ppm against σ_lot ≈ 1.4 ppm: the lots after it sit
	// far beyond the limits of a centre between the two levels.
	rules := map[Rule]bool{}
	for _, s := range tr.Signals {
		rules[s.Rule] = true
	}
	if !rules[EightInRow] || !rules[EWMAOut] {
		t.Errorf("signals %v lack the run and the EWMA", tr.Signals)
	}
	var c bytes.Buffer
	if err := tr.WriteCSV(&c); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&c).ReadAll()
	if err != nil || len(recs) != 41 || recs[0][3] != "scale_x [ppm]" {
		t.Fatalf("trend CSV %v, %v", recs[:2], err)
	}
	var p bytes.Buffer
	if err := tr.WritePNG(&p, 1200, 800); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(&p)
	if err != nil || img.Bounds().Dx() != 1200 {
		t.Fatalf("PNG: %v", err)
	}
}

// TestDecimate checks that decimating keeps every bucket's extremes and
// ends (so the drawn line reaches every value a pixel column would show)
// and fewer than 4 points per bucket.
func TestDecimate(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	n, buckets := 10000, 100
	x, y := make([]float64, n), make([]float64, n)
	for i := range x {
		x[i], y[i] = float64(i+1), rng.NormFloat64()
	}
	y[5000] = 9 // one excursion
	dx, dy := decimate(x, y, buckets)
	if len(dx) > 4*buckets {
		t.Errorf("%d points for %d buckets", len(dx), buckets)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for i, v := range dy {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
		if i > 0 && dx[i] <= dx[i-1] {
			t.Fatalf("x not increasing at %d", i)
		}
	}
	wantLo, wantHi := math.Inf(1), math.Inf(-1)
	for _, v := range y {
		wantLo, wantHi = math.Min(wantLo, v), math.Max(wantHi, v)
	}
	if lo != wantLo || hi != wantHi || dx[0] != 1 || dx[len(dx)-1] != float64(n) {
		t.Errorf("range %g..%g, want %g..%g; ends %g, %g", lo, hi, wantLo, wantHi, dx[0], dx[len(dx)-1])
	}
}

// TestTableOldStep checks that a step the controller absorbed long ago no
// longer flags the series, while the same step among the last lots does.
func TestTableOldStep(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	mk := func(step int) []Series {
		s := Series{Construction: "K", Role: "r"}
		for i := range 100 {
			m := -150 * ppm
			if i >= step {
				m = -200 * ppm
			}
			var p Point
			p.Lot, p.N = fmt.Sprint(i), 8
			p.Mean[registration.ScaleX] = m + 2*ppm*rng.NormFloat64()
			p.Mean[registration.ScaleY] = -100*ppm + 2*ppm*rng.NormFloat64()
			s.Points = append(s.Points, p)
		}
		return []Series{s}
	}
	if r := Table(mk(20))[0]; r.Shifted() {
		t.Errorf("a step 80 lots ago flags the table: %v", r.Signals)
	}
	if r := Table(mk(85))[0]; !r.Shifted() {
		t.Error("a step 15 lots ago is not flagged")
	}
}
