package section

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

func TestCouplingNoAlloc(t *testing.T) {
	c := syntheticCurve(t)
	x := 1.234 * testMil
	if n := testing.AllocsPerRun(100, func() { sink = c.Coupling(x) }); n != 0 {
		t.Errorf("Coupling allocates %v times per call", n)
	}
}

// TestInterpolant: the Fritsch–Butland interpolant reproduces the data at the
// nodes, stays between neighbouring values (monotone where the data are) and
// reproduces a parabola exactly between nodes (not-a-knot slopes); outside the range it
// continues along the end slope.
func TestInterpolant(t *testing.T) {
	c := syntheticCurve(t)
	for _, p := range c.Points {
		if got := c.Coupling(p.Offset); math.Abs(got-p.CouplingDB) > 1e-12 {
			t.Errorf("Coupling(%s) = %g, node value %g", mils(p.Offset), got, p.CouplingDB)
		}
	}
	lo, hi := c.Range()
	for x := lo; x < hi; x += 0.037 * testMil {
		d := x / testMil
		want := -3 - 0.0144*d*d
		if got := c.Coupling(x); math.Abs(got-want) > 1e-9 { // a parabola is reproduced exactly
			t.Errorf("Coupling(%s) = %.6f, parabola %.6f", mils(x), got, want)
		}
	}
	for i := 1; i < len(c.Points); i++ {
		a, b := c.Points[i-1], c.Points[i]
		mlo, mhi := math.Min(a.CouplingDB, b.CouplingDB), math.Max(a.CouplingDB, b.CouplingDB)
		for f := 0.1; f < 1; f += 0.2 {
			v := c.Coupling(a.Offset + f*(b.Offset-a.Offset))
			if v < mlo-1e-12 || v > mhi+1e-12 {
				t.Errorf("overshoot between %s and %s: %g not in [%g, %g]", mils(a.Offset), mils(b.Offset), v, mlo, mhi)
			}
		}
	}
	e := c.Coupling(hi + testMil)
	if !(e < c.Coupling(hi)) {
		t.Errorf("extrapolation beyond the range does not continue the fall: %g vs %g", e, c.Coupling(hi))
	}
	if z := c.ZLine(0); math.Abs(z[0]-50) > 1e-9 || math.Abs(z[1]-50) > 1e-9 {
		t.Errorf("ZLine(0) = %v", z)
	}
}

func TestDefaultOffsets(t *testing.T) {
	s := demoSection()
	s.DesignOffset = 3 * testMil
	o := DefaultOffsets(s, 0)
	if len(o) != 21 || math.Abs(o[0]-(-2*testMil)) > 1e-12 || math.Abs(o[20]-8*testMil) > 1e-12 || o[10] != 3*testMil {
		t.Errorf("DefaultOffsets = %v", o)
	}
	o = DefaultOffsets(s, 12*testMil)
	if len(o) != 49 || o[0] > 3*testMil-12*testMil+1e-12 {
		t.Errorf("DefaultOffsets(span 12 mil): %d points from %s", len(o), mils(o[0]))
	}
}

// TestSweepCache: a second CachedSweep of the same section reads the file the
// first one wrote (no solve), returns the same curve, and a changed section or
// setting misses.
func TestSweepCache(t *testing.T) {
	dir := t.TempDir()
	s := demoSection()
	offs := []float64{-2 * testMil, -1 * testMil, 0, 1 * testMil, 2 * testMil}
	c1, hit, err := CachedSweep(context.Background(), s, offs, nil, dir, false)
	if err != nil || hit {
		t.Fatalf("first CachedSweep: hit %v err %v", hit, err)
	}
	if c1.Length <= 0 || math.Abs(c1.Length-c1.Points[2].QuarterWave(s.Frequency)) > 1e-12 {
		t.Errorf("quarter-wave length %g, want %g", c1.Length, c1.Points[2].QuarterWave(s.Frequency))
	}
	s2 := demoSection()
	s2.Name = "renamed" // the name is not content
	c2, hit, err := CachedSweep(context.Background(), s2, offs, &Settings{Workers: 1}, dir, false)
	if err != nil || !hit {
		t.Fatalf("second CachedSweep: hit %v err %v", hit, err)
	}
	if c2.Section != "renamed" || c2.Coupling(0.5*testMil) != c1.Coupling(0.5*testMil) || c2.Points[3].C != c1.Points[3].C {
		t.Errorf("cached curve differs: %v vs %v", c2.Points[3].C, c1.Points[3].C)
	}
	if _, hit, _ := CachedSweep(context.Background(), s, offs, &Settings{Accuracy: 5e-4}, dir, false); hit {
		t.Errorf("different accuracy hit the cache")
	}
	s3 := demoSection()
	s3.Stackup.Layers[3].Er = 3.01
	if _, hit, _ := CachedSweep(context.Background(), s3, offs, nil, dir, false); hit {
		t.Errorf("different εr hit the cache")
	}
	if _, hit, _ := CachedSweep(context.Background(), s, offs, nil, dir, true); hit {
		t.Errorf("noCache hit the cache")
	}
	// a damaged entry is recomputed and rewritten
	path := filepath.Join(dir, CacheKey(s, offs, nil)+".json")
	if err := os.WriteFile(path, []byte("{"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, hit, err := CachedSweep(context.Background(), s, offs, nil, dir, false); hit || err != nil {
		t.Errorf("damaged entry: hit %v err %v", hit, err)
	}
	if _, hit, _ := CachedSweep(context.Background(), s, offs, nil, dir, false); !hit {
		t.Errorf("rewritten entry not hit")
	}
	// no temporary files left behind
	m, _ := filepath.Glob(filepath.Join(dir, "*.tmp"))
	if len(m) != 0 {
		t.Errorf("temporary files left: %v", m)
	}
}

func TestSweepCancel(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Sweep(ctx, demoSection(), DefaultOffsets(demoSection(), 0), nil); err == nil {
		t.Errorf("cancelled sweep returned no error")
	}
}

func TestReport(t *testing.T) {
	c, err := Sweep(context.Background(), demoSection(), []float64{-testMil, 0, testMil}, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := json.Marshal(c.Report())
	if err != nil {
		t.Fatal(err)
	}
	var back map[string]any
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	pts := back["points"].([]any)
	mid := pts[1].(map[string]any)
	for _, k := range []string{"offset_m", "c_f_per_m", "c0_f_per_m", "l_h_per_m", "k_c", "k_l", "coupling_db", "directivity_db", "z_even_ohm", "z_odd_ohm", "eps_eff", "convergence"} {
		if _, ok := mid[k]; !ok {
			t.Errorf("point lacks %q", k)
		}
	}
	// (the demo pair is symmetric at every offset: a half turn about the
	// section's centre maps it onto itself; a widened pair is not)
	cw, err := Sweep(context.Background(), widened(demoSection(), 2*testMil), []float64{0, testMil}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if p := cw.Report().Points[0]; p.ZEvenOhm != nil {
		t.Errorf("asymmetric pair reports z_even_ohm %g", *p.ZEvenOhm)
	}
	if lv := mid["convergence"].(map[string]any)["levels"].([]any); len(lv) != 3 {
		t.Errorf("convergence report has %d levels", len(lv))
	}
	for _, k := range []string{"section", "frequency_hz", "length_m"} {
		if _, ok := back[k]; !ok {
			t.Errorf("report lacks %q", k)
		}
	}
}
