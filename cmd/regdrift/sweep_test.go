package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/regdrift/regdrift/panel/section"
)

// TestSweepJSON runs sweep on the small job and checks the JSON fields
// (section, frequency, one point per offset, even and odd impedances of the
// symmetric point), the symmetry of a centred equal-width pair (C(+δ) = C(−δ),
// a property of the geometry), and that the reported spec crossings are where
// a direct solve gives the spec limit (to 0.005 dB: the interpolant between
// 0.5 mil samples plus the solve's own accuracy).
func TestSweepJSON(t *testing.T) {
	dir := t.TempDir()
	code, stdout, stderr := run(t, "sweep", "testdata/small.toml", "-o", dir, "--offsets", "-5mil:5mil:0.5mil", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var r struct {
		Section   string    `json:"section"`
		Frequency float64   `json:"frequency_hz"`
		Length    float64   `json:"length_m"`
		Leaves    []float64 `json:"leaves_spec_at_m"`
		Points    []struct {
			Offset   float64       `json:"offset_m"`
			C        [2][2]float64 `json:"c_f_per_m"`
			Coupling float64       `json:"coupling_db"`
			ZEven    *float64      `json:"z_even_ohm"`
		} `json:"points"`
	}
	if err := json.Unmarshal([]byte(stdout), &r); err != nil {
		t.Fatal(err)
	}
	if r.Section != "hybrid" || r.Frequency != 2.45e9 || len(r.Points) != 21 || r.Points[10].ZEven == nil {
		t.Fatalf("sweep json: %+v", r)
	}
	for k := range 10 {
		a, b := r.Points[k], r.Points[20-k]
		if math.Abs(a.Coupling-b.Coupling) > 1e-6 || math.Abs(a.C[0][1]-b.C[0][1]) > 1e-9*math.Abs(a.C[0][1]) {
			t.Errorf("offsets %.3g and %.3g: coupling %.6f and %.6f", a.Offset, b.Offset, a.Coupling, b.Coupling)
		}
	}
	if len(r.Leaves) != 2 {
		t.Fatalf("spec crossings %v, want two", r.Leaves)
	}
	j, err := loadJob("testdata/small.toml", nil)
	if err != nil {
		t.Fatal(err)
	}
	s := j.Sections[0]
	for _, x := range r.Leaves {
		sol, err := section.Solve(s, x, &section.Settings{Accuracy: 5e-4})
		if err != nil {
			t.Fatal(err)
		}
		sp := section.NewLines(sol.C, sol.C0).SParams(s.Frequency, r.Length, s.ZRef)
		got := 20 * math.Log10(cmplxAbs(sp.S31))
		if math.Abs(got-(s.Spec.Coupling-s.Spec.Tolerance)) > 0.005 {
			t.Errorf("at %.4g m a direct solve gives %.4f dB, want the limit %.2f dB", x, got, s.Spec.Coupling-s.Spec.Tolerance)
		}
	}
	for _, f := range []string{"sweep.csv", "sweep.png"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Errorf("missing %s", f)
		}
	}
}
