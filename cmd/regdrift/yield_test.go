package main

import (
	"bytes"
	"encoding/json"
	"github.com/regdrift/regdrift/registration/drift"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// yieldJob is an invented job whose error model makes the yield visibly less
// than 100 %: a 3 dB centred broadside pair on the two faces of a 4 mil core,
// a tight spec, and large imaging errors on the upper layer including a
// uniform offset term. Lines of H1 run along y, of H2 along x.
const yieldJob = `title = "yield test job (invented)"

[panel]
size   = ["12 in", "18 in"]
border = "0.5 in"

[stackup]
layers = [
  { copper = "L2", thickness = "1.4 mil" },
  { prepreg = "26 mil", er = 3.55 },
  { copper = "L3", thickness = "1.4 mil" },
  { core = "4 mil", er = 3.00, name = "C2" },
  { copper = "L4", thickness = "1.4 mil" },
  { prepreg = "26 mil", er = 3.55 },
  { copper = "L5", thickness = "1.4 mil" },
]

[[section]]
name      = "hybrid"
traces    = [
  { layer = "L3", width = "14 mil", etch = "0.6 mil" },
  { layer = "L4", width = "14 mil", etch = "0.6 mil" },
]
grounds   = ["L2", "L5"]
frequency = "2.45 GHz"
length    = "quarter-wave"
z_ref     = "50 ohm"
spec      = { coupling = "-3.0 dB", tolerance = "0.12 dB" }

[[part]]
name     = "module"
size     = ["1 in", "1 in"]
couplers = [
  { name = "H1", section = "hybrid", at = ["0.3 in", "0.5 in"], angle = "90 deg" },
  { name = "H2", section = "hybrid", at = ["0.7 in", "0.5 in"], angle = "0 deg" },
]

[[array]]
part   = "module"
count  = [8, 12]
pitch  = ["1.3 in", "1.3 in"]

[[contributor]]
name    = "L3 imaging"
layers  = ["L3"]
offset_x = { sigma = "1.5 mil" }
offset_y = { mean = "0.5 mil", half_width = "2 mil", dist = "uniform" }
scale_x = { mean = "100 ppm", sigma = "150 ppm" }
scale_y = { sigma = "60 ppm" }
site_sigma = "0.3 mil"
`

// writeJob writes a job file (yieldJob with replacements old→new applied in
// pairs) into a temporary directory and returns its path.
func writeJob(t *testing.T, src string, repl ...string) string {
	t.Helper()
	for i := 0; i+1 < len(repl); i += 2 {
		if !strings.Contains(src, repl[i]) {
			t.Fatalf("job text has no %q", repl[i])
		}
		src = strings.Replace(src, repl[i], repl[i+1], 1)
	}
	p := filepath.Join(t.TempDir(), "job.toml")
	if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestYieldWorkers: the same seed gives byte-identical yield.csv and JSON
// with one and with two workers.
func TestYieldWorkers(t *testing.T) {
	job := writeJob(t, yieldJob)
	var csvs, jsons [2][]byte
	for k, w := range []string{"1", "2"} {
		dir := t.TempDir()
		code, out, errs := run(t, "yield", job, "--accuracy", "1%", "--trials", "3000", "--seed", "42", "--workers", w, "-o", dir, "--json")
		if code != 0 {
			t.Fatalf("workers %s: exit %d: %s", w, code, errs)
		}
		jsons[k] = []byte(out)
		var err error
		if csvs[k], err = os.ReadFile(filepath.Join(dir, "yield.csv")); err != nil {
			t.Fatal(err)
		}
		for _, f := range []string{"yield.png", "parts.png", "budget.csv", "budget.png", "yield.json"} {
			if st, err := os.Stat(filepath.Join(dir, f)); err != nil || st.Size() == 0 {
				t.Errorf("%s missing or empty: %v", f, err)
			}
		}
	}
	if !bytes.Equal(csvs[0], csvs[1]) {
		t.Error("yield.csv differs between 1 and 2 workers")
	}
	if !bytes.Equal(jsons[0], jsons[1]) {
		t.Error("JSON summary differs between 1 and 2 workers")
	}
	var sum drift.YieldSummary
	if err := json.Unmarshal(jsons[0], &sum); err != nil {
		t.Fatal(err)
	}
	if sum.Trials != 3000 || sum.Seed != 42 || sum.Sites != 192 || sum.Parts != 96 {
		t.Errorf("summary header %+v", sum)
	}
	if !(sum.SiteYieldMean > 0.5 && sum.SiteYieldMean < 0.999) || !(sum.PartYieldMean <= sum.SiteYieldMean) {
		t.Errorf("site yield %g, part yield %g: want a visibly imperfect yield with parts below sites", sum.SiteYieldMean, sum.PartYieldMean)
	}
	// 3000 panels: the mean site yields of closed form and Monte Carlo agree
	// far better than 1 %.
	if d := sum.SiteYieldMean - sum.SiteYieldMeanClosed; d > 0.01 || d < -0.01 {
		t.Errorf("mean site yield: Monte Carlo %g, closed form %g", sum.SiteYieldMean, sum.SiteYieldMeanClosed)
	}
	gp := sum.GoodPartsPerPanel
	if !(gp.Min <= gp.P05 && gp.P05 <= gp.P50 && gp.P50 <= gp.P95 && gp.P95 <= gp.Max && gp.Max <= sum.Parts) {
		t.Errorf("good parts quantiles out of order: %+v", gp)
	}
	if len(sum.WorstParts) != 10 || sum.WorstParts[0].PartYield > sum.WorstParts[9].PartYield {
		t.Errorf("worst parts %+v", sum.WorstParts)
	}
	var share float64
	for _, r := range sum.Budget.Panel {
		share += r.Share
	}
	if share < 0.999999 || share > 1.000001 {
		t.Errorf("panel budget shares sum to %g", share)
	}
	if len(sum.Orientation) != 1 {
		t.Errorf("orientation study: %d arrays", len(sum.Orientation))
	}
}

func TestYieldBadInput(t *testing.T) {
	tests := []struct {
		name  string
		repl  []string
		args  []string
		words []string // each must appear in the message
	}{
		{"zero trials", nil, []string{"--trials", "0"}, []string{"--trials"}},
		{"negative trials", nil, []string{"--trials", "-5"}, []string{"--trials"}},
		{"negative workers", nil, []string{"--workers", "-1"}, []string{"--workers"}},
		{"zero tolerance", []string{`tolerance = "0.12 dB"`, `tolerance = "0 dB"`}, nil, []string{"job.toml", "spec.tolerance"}},
		{"negative tolerance", []string{`tolerance = "0.12 dB"`, `tolerance = "-0.1 dB"`}, nil, []string{"job.toml", "spec.tolerance"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			job := writeJob(t, yieldJob, tt.repl...)
			dir := t.TempDir()
			args := append([]string{"yield", job, "-o", dir, "--accuracy", "1%"}, tt.args...)
			code, _, errs := run(t, args...)
			if code != exitBadInput {
				t.Fatalf("exit %d, want %d; stderr %s", code, exitBadInput, errs)
			}
			for _, w := range tt.words {
				if !strings.Contains(errs, w) {
					t.Errorf("message %q does not name %q", errs, w)
				}
			}
			if ents, _ := os.ReadDir(dir); len(ents) != 0 {
				t.Errorf("a failed run left %d files in the output directory", len(ents))
			}
		})
	}
}

// TestYieldDesignOutOfSpec: a spec the nominal design misses gives a warning
// and yield 0, not a crash.
func TestYieldDesignOutOfSpec(t *testing.T) {
	job := writeJob(t, yieldJob, `coupling = "-3.0 dB"`, `coupling = "-3.5 dB"`)
	code, out, errs := run(t, "yield", job, "--accuracy", "1%", "--trials", "500", "-o", t.TempDir(), "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if !strings.Contains(errs, "warning") || !strings.Contains(errs, "hybrid") || !strings.Contains(errs, "outside its spec") {
		t.Errorf("no clear warning: %q", errs)
	}
	var sum drift.YieldSummary
	if err := json.Unmarshal([]byte(out), &sum); err != nil {
		t.Fatal(err)
	}
	if sum.SiteYieldMean != 0 || sum.SiteYieldMeanClosed != 0 || sum.PartYieldMean != 0 || sum.GoodPartsPerPanel.Max != 0 {
		t.Errorf("out-of-spec design yields %g (closed %g), parts %g", sum.SiteYieldMean, sum.SiteYieldMeanClosed, sum.PartYieldMean)
	}
	if len(sum.Sections) != 1 || sum.Sections[0].DesignInSpec || sum.Sections[0].AllowedLowM != nil {
		t.Errorf("section summary %+v", sum.Sections)
	}
	code, _, _ = run(t, "yield", job, "--accuracy", "1%", "--trials", "500", "-o", t.TempDir(), "--strict")
	if code != exitOutOfSpec {
		t.Errorf("--strict: exit %d, want %d", code, exitOutOfSpec)
	}
}
