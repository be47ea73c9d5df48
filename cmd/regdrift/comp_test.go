package main

import (
	"encoding/json"
	"github.com/regdrift/regdrift/registration/drift"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// analyticJob is two-core.toml with its couplers turned to run along x and
// its contributors replaced by two cores moving in opposite directions in y:
// +150 ppm for the core under L3, −150 ppm for the core under L4. The broadside
// offset is then 300 ppm · y, and compensation must make the Y difference
// L3 − L4 equal to −300 ppm; X moves no offset.
func analyticJob(t *testing.T) string {
	t.Helper()
	b, err := os.ReadFile("../../samples/two-core.toml")
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	s = s[:strings.Index(s, "[[contributor]]")]
	s = strings.ReplaceAll(s, `angle = "90 deg"`, `angle = "0 deg"`)
	s += `
[[contributor]]
name    = "core CA"
layers  = ["L2", "L3"]
scale_y = "+150 ppm"

[[contributor]]
name    = "core CB"
layers  = ["L4", "L5"]
scale_y = "-150 ppm"
`
	p := filepath.Join(t.TempDir(), "analytic.toml")
	if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestCompCommandAnalytic(t *testing.T) {
	job := analyticJob(t)
	dir := t.TempDir()
	// The model has no spread, so every site is in spec with certainty
	// either way and the yield objective keeps the artwork; the normalised
	// minimax (one section, one window) removes the offsets.
	code, out, errs := run(t, "comp", job, "-o", dir, "--json", "--accuracy", "1%", "--objective", "worst")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var s drift.CompSummary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatalf("JSON: %v\n%s", err, out)
	}
	if len(s.Pairs) != 1 || math.Abs(s.Pairs[0].DiffYPPM+300) > 1e-6 {
		t.Fatalf("pairs %+v, want a Y difference of -300 ppm", s.Pairs)
	}
	if s.After.WorstOffsetM > 1e-12 || s.Before.WorstOffsetM < 1e-6 {
		t.Errorf("worst offset %g m before, %g m after; want the after to vanish", s.Before.WorstOffsetM, s.After.WorstOffsetM)
	}
	if s.After.InSpec != s.After.Sites || s.After.SiteYield < s.Before.SiteYield {
		t.Errorf("in spec %d/%d, yield %g -> %g", s.After.InSpec, s.After.Sites, s.Before.SiteYield, s.After.SiteYield)
	}
	for _, l := range s.Layers {
		if len(l.Free) != 1 || l.Free[0] != "x" || l.ScaleXPPM != 0 {
			t.Errorf("layer %s: free %v, X %g ppm; want X free and zero", l.Layer, l.Free, l.ScaleXPPM)
		}
		// Smallest compensation splits the difference: ∓150 ppm net.
		want := map[string]float64{"L3": -150, "L4": 150}[l.Layer]
		if math.Abs(l.NetYPPM-want) > 1e-6 {
			t.Errorf("layer %s: net Y %g ppm, want %g", l.Layer, l.NetYPPM, want)
		}
	}
	if !strings.Contains(s.Common, "smallest") || !strings.Contains(strings.Join(s.Notes, " "), "X compensation moves no offset") {
		t.Errorf("common %q, notes %q", s.Common, s.Notes)
	}
	for _, name := range []string{"comp.csv", "comp.png", "comp.json", "compensation.toml"} {
		if _, err := os.Stat(filepath.Join(dir, name)); err != nil {
			t.Error(err)
		}
	}
	// The smallest change already cancels each layer's own movement here: a
	// layer that grows by ε is imaged at 1/(1+ε) of size, so that it ends at
	// the design size, (1+ε)/(1+ε) = 1; 1/(1+150 ppm) − 1 = −149.978 ppm for
	// L3 (calculated here). A 2 mil drill budget therefore does not bind and
	// changes nothing.
	code, out, errs = run(t, "comp", job, "-o", dir, "--json", "--accuracy", "1%", "--drill-budget", "2mil", "--objective", "worst")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	if f := s.Layers[0].FactorY; math.Abs(f-1/(1+150e-6)) > 1e-12 {
		t.Errorf("L3 factor Y %.12f, want %.12f", f, 1/(1+150e-6))
	}
	if *s.After.DrillWorstM > 1e-12 || !strings.Contains(s.Common, "smallest") {
		t.Errorf("drill registration after %g m, common %q", *s.After.DrillWorstM, s.Common)
	}
}

// TestCompRoundTrip follows the process engineer's loop: fit the measured
// targets, write the lot as contributors, let comp recommend compensation
// from them, include that compensation in the job and check that the job
// now maps to the offsets comp predicted.
func TestCompRoundTrip(t *testing.T) {
	dir := t.TempDir()
	code, out, errs := run(t, "comp", "../../samples/two-core.toml", "--targets", twoCoreTargets, "--drill-budget", "3mil",
		"--step", "5ppm", "-o", dir, "--json", "--accuracy", "1%")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var s drift.CompSummary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	if strings.Join(s.Measured, ",") != "L3,L4" || !strings.Contains(errs, `"L3 imaging" left out`) {
		t.Errorf("measured %v; stderr %s", s.Measured, errs)
	}
	for _, l := range s.Layers {
		for _, v := range []float64{l.ScaleXPPM, l.ScaleYPPM} {
			if q := v / 5; math.Abs(q-math.Round(q)) > 1e-6 {
				t.Errorf("layer %s: %g ppm is not a multiple of 5 ppm", l.Layer, v)
			}
		}
	}
	if s.After.SiteYield < s.Before.SiteYield || s.BelowApplied || *s.After.DrillWorstM > 3*25.4e-6*(1+1e-7) {
		t.Errorf("site yield %g -> %g (below applied %v), drill after %g m", s.Before.SiteYield, s.After.SiteYield, s.BelowApplied, *s.After.DrillWorstM)
	}

	// The same loop by hand: fit -> contributors file; a job whose trace
	// layers move by the measurement only, plus comp's compensation.toml.
	fdir := t.TempDir()
	if code, _, errs := runPlain(t, "", "fit", twoCoreTargets, "--robust", "-o", fdir, "--contributors", filepath.Join(fdir, "measured.toml")); code != 0 {
		t.Fatalf("fit: exit %d: %s", code, errs)
	}
	comp, err := os.ReadFile(filepath.Join(dir, "compensation.toml"))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(fdir, "compensation.toml"), comp, 0o644); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile("../../samples/two-core.toml")
	if err != nil {
		t.Fatal(err)
	}
	js := string(b)
	js = "include = [\"measured.toml\", \"compensation.toml\"]\n" + js[:strings.Index(js, "[[contributor]]")]
	jp := filepath.Join(fdir, "job.toml")
	if err := os.WriteFile(jp, []byte(js), 0o644); err != nil {
		t.Fatal(err)
	}
	j, err := loadJob(jp, nil)
	if err != nil {
		t.Fatal(err)
	}
	a := drift.New(input(j), nil)
	var worst float64
	for i := range a.Sites {
		worst = math.Max(worst, math.Abs(a.Sites[i].Stats.MeanAcross))
	}
	// Six significant digits in the TOML files: 1e-5 of a mil or so.
	if math.Abs(worst-s.After.WorstOffsetM) > 1e-9 {
		t.Errorf("the compensated job maps a worst offset of %.6g m, comp predicted %.6g m", worst, s.After.WorstOffsetM)
	}
}

func TestCompBadInput(t *testing.T) {
	job := analyticJob(t)
	tdir := t.TempDir()
	unknown := filepath.Join(tdir, "unknown.csv")
	os.WriteFile(unknown, []byte("panel,layer,target,x [in],y [in],dx [mil],dy [mil]\nP,L9,T1,-5,-5,0,0\nP,L9,T2,5,-5,0,0\nP,L9,T3,0,5,0,0\n"), 0o644)
	bad := filepath.Join(tdir, "bad.csv")
	os.WriteFile(bad, []byte("panel,layer,target,x [in],y [in],dx [mil],dy [mil]\nP,L3,T1,-5,-5,zero,0\n"), 0o644)
	tests := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"unknown layer warns", []string{"--targets", unknown}, 0, `layer "L9" is not a copper layer`},
		{"bad cell", []string{"--targets", bad}, 2, `row 2, column "dx"`},
		{"missing targets", []string{"--targets", filepath.Join(tdir, "none.csv")}, 2, "none.csv"},
		{"bad objective", []string{"--objective", "median"}, 2, "--objective"},
		{"bare max", []string{"--max", "600"}, 2, "--max"},
		{"bad step", []string{"--step", "5mil"}, 2, "--step"},
		{"negative budget", []string{"--drill-budget", "-1mil"}, 2, "--drill-budget"},
		{"impossible budget", []string{"--drill-budget", "0.01mil", "--max", "20ppm"}, 2, "no compensation meets"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "out")
			args := append([]string{"comp", job, "-o", dir, "--accuracy", "1%"}, tt.args...)
			code, _, errs := run(t, args...)
			if code != tt.code || !strings.Contains(errs, tt.want) {
				t.Fatalf("exit %d (want %d), stderr %q lacks %q", code, tt.code, errs, tt.want)
			}
			if ents, _ := os.ReadDir(dir); tt.code != 0 && len(ents) != 0 {
				t.Errorf("bad input left %d files", len(ents))
			}
		})
	}
}
