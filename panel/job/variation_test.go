package job

import (
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
	"github.com/regdrift/regdrift/samples"
)

// processFile is an invented fab process file, included by a job.
const processFile = `
[[variation]]
name     = "press profile of C2"
on       = "C2"
quantity = "thickness"
panel    = { mean = "0.1 mil", sigma = "0.2 mil" }
shape    = { kind = "dome", centre_minus_edge = "0.3 mil" }
site_sigma = "0.05 mil"

[[variation]]
name     = "etch along the conveyor"
on       = "L3"
quantity = "width"
panel    = { half_width = "0.3 mil", dist = "uniform" }
shape    = { kind = "tilt", along = "y", end_to_end = "0.4 mil" }

[[variation]]
on       = "C2"
quantity = "er"
panel    = { sigma = 0.02 }
shape    = { kind = "grid", file = "er.csv" }

[[variation]]
on       = "L4"
quantity = "copper"
shape    = { kind = "edge", at_edge = "0.2 mil", decay = "2 in" }
`

// TestVariationInclude reads variation terms from an included process file
// and checks every value it gives, converted to SI (1 mil = 25.4 µm
// exactly, NIST SP 811 appendix B.9).
func TestVariationInclude(t *testing.T) {
	dir := t.TempDir()
	base, _ := samples.FS.ReadFile("same-core.toml")
	os.WriteFile(filepath.Join(dir, "fab.toml"), []byte(processFile), 0o644)
	os.WriteFile(filepath.Join(dir, "er.csv"), []byte("x [in],y [in],value\n-9,-12,0.01\n9,-12,0.02\n-9,12,0.03\n9,12,0.04\n"), 0o644)
	os.WriteFile(filepath.Join(dir, "job.toml"), []byte("include = [\"fab.toml\"]\n"+string(base)), 0o644)
	j, err := Load(filepath.Join(dir, "job.toml"), nil)
	if err != nil {
		t.Fatal(err)
	}
	if j.Process == nil || len(j.Process.Terms) != 4 {
		t.Fatalf("process %+v, want 4 terms", j.Process)
	}
	ts := j.Process.Terms
	for i := range ts {
		if filepath.Base(ts[i].File) != "fab.toml" {
			t.Errorf("term %d: file %q, want the included fab.toml", i, ts[i].File)
		}
	}
	eq := func(name string, got, want float64) {
		t.Helper()
		if math.Abs(got-want) > 1e-12*math.Max(1, math.Abs(want)) {
			t.Errorf("%s = %g, want %g", name, got, want)
		}
	}
	if ts[0].Name != "press profile of C2" || ts[0].Layer != "C2" || ts[0].Quantity != process.Thickness || ts[0].Shape.Kind != process.Dome {
		t.Errorf("term 0: %+v", ts[0])
	}
	eq("term 0 mean", ts[0].Panel.Mean, 0.1*unit.Mil)
	eq("term 0 sigma", ts[0].Panel.Spread, 0.2*unit.Mil)
	eq("term 0 amplitude", ts[0].Shape.Amplitude, 0.3*unit.Mil)
	eq("term 0 site sigma", ts[0].SiteSigma, 0.05*unit.Mil)
	if ts[1].Panel.Dist != registration.Uniform || !ts[1].Shape.AlongY || ts[1].Quantity != process.Width {
		t.Errorf("term 1: %+v", ts[1])
	}
	eq("term 1 half width", ts[1].Panel.Spread, 0.3*unit.Mil)
	eq("term 1 tilt", ts[1].Shape.Amplitude, 0.4*unit.Mil)
	if ts[2].Name != "variation 3" || ts[2].Quantity != process.Er || ts[2].Shape.Values == nil {
		t.Errorf("term 2: %+v", ts[2])
	}
	eq("term 2 sigma", ts[2].Panel.Spread, 0.02)
	eq("term 2 grid corner", ts[2].Shape.At(panel.Vec{X: 9 * unit.Inch, Y: 12 * unit.Inch}, j.Layout.Panel.Size), 0.04)
	eq("term 3 decay", ts[3].Shape.Decay, 2*unit.Inch)
	if ts[3].Quantity != process.Copper || ts[3].Layer != "L4" {
		t.Errorf("term 3: %+v", ts[3])
	}
	// A job without [[variation]] has no process model.
	j, err = Parse(base, "same-core.toml", ".")
	if err != nil || j.Process != nil {
		t.Errorf("no variation: process %v, err %v", j.Process, err)
	}
}
