package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/registration/history"
	"github.com/regdrift/regdrift/samples"
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
	appliedBad := filepath.Join(tdir, "applied.csv")
	os.WriteFile(appliedBad, []byte("layer,scale_x [ppm],scale_y [ppm]\nL3,+200,+180\nL4,+100,lots\n"), 0o644)
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
		{"applied: no layer", []string{"--applied", ":x=10ppm"}, 2, "want LAYER:x=SCALE"},
		{"applied: bare number", []string{"--applied", "L3:x=200"}, 2, `--applied "L3:x=200": x:`},
		{"applied: unknown axis", []string{"--applied", "L3:z=200ppm"}, 2, "want LAYER:x=SCALE"},
		{"applied: pair", []string{"--applied", "L3-L4:x=200ppm"}, 2, "not a pair"},
		{"applied: twice", []string{"--applied", "L3:x=1ppm", "--applied", "L3:y=1ppm"}, 2, `layer "L3" is given twice`},
		{"applied: not copper", []string{"--applied", "L9:x=1ppm"}, 2, `layer "L9" is not a copper layer`},
		{"applied: file row", []string{"--applied", appliedBad}, 2, `row 3, column "scale_y"`},
		{"applied: missing file", []string{"--applied", filepath.Join(tdir, "none-applied.csv")}, 2, "none-applied.csv"},
		{"history: missing", []string{"--history", filepath.Join(tdir, "none.db")}, 2, "no such history"},
		{"history: not a history", []string{"--history", bad}, 2, "not a regdrift history"},
		{"construction without history", []string{"--construction", "A"}, 2, "--construction needs --history"},
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

// compJSON runs comp with args on job and decodes its JSON summary.
func compJSON(t *testing.T, job string, args ...string) drift.CompSummary {
	t.Helper()
	code, out, errs := run(t, append([]string{"comp", job, "-o", t.TempDir(), "--json", "--accuracy", "1%"}, args...)...)
	if code != 0 {
		t.Fatalf("comp %v: exit %d: %s", args, code, errs)
	}
	var s drift.CompSummary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatalf("JSON: %v\n%s", err, out)
	}
	return s
}

// TestCompMixedPanel: on a panel mixing wide-window hybrids with
// narrow-window couplers, every objective's recommendation predicts at
// least the site yield of keeping the applied artwork (the plain minimax in
// mil lowered it there), the yield objective most of all; a drill budget
// that does not bind changes nothing, and one that binds is kept.
func TestCompMixedPanel(t *testing.T) {
	const job = "testdata/comp-mixed.toml"
	byObj := map[string]drift.CompSummary{}
	for _, o := range []string{"yield", "worst", "rms"} {
		s := compJSON(t, job, "--objective", o)
		byObj[o] = s
		if s.After.SiteYield < s.Before.SiteYield || s.BelowApplied {
			t.Errorf("%s: site yield %.5f → %.5f (below applied %v)", o, s.Before.SiteYield, s.After.SiteYield, s.BelowApplied)
		}
	}
	if y, w := byObj["yield"].After.SiteYield, byObj["worst"].After.SiteYield; y < w {
		t.Errorf("the yield objective's %.6f is below the minimax's %.6f", y, w)
	}
	free := byObj["yield"]
	budget := 1.2 * *free.After.DrillWorstM
	with := compJSON(t, job, "--drill-budget", fmt.Sprintf("%.6fmil", budget/25.4e-6))
	for i := range free.Layers {
		a, b := free.Layers[i], with.Layers[i]
		if a.ScaleXPPM != b.ScaleXPPM || a.ScaleYPPM != b.ScaleYPPM {
			t.Errorf("%s: X %.6f Y %.6f ppm without the budget, %.6f %.6f with it", a.Layer, a.ScaleXPPM, a.ScaleYPPM, b.ScaleXPPM, b.ScaleYPPM)
		}
	}
	tight := 0.8 * *free.After.DrillWorstM
	bound := compJSON(t, job, "--drill-budget", fmt.Sprintf("%.6fmil", tight/25.4e-6))
	if d := *bound.After.DrillWorstM; d > tight*(1+1e-6) {
		t.Errorf("drill registration %.4g m beyond the budget %.4g m", d, tight)
	}
	if !strings.Contains(bound.Common, "drill budget binds") {
		t.Errorf("binding budget: common part %q", bound.Common)
	}
}

// TestCompOneRule: the yield the recommendation predicts (the optimiser's
// closed form over each site's allowed interval) is the yield the site
// evaluator gives the compensated panel, site by site on average.
func TestCompOneRule(t *testing.T) {
	j, err := loadJob("testdata/comp-mixed.toml", nil)
	if err != nil {
		t.Fatal(err)
	}
	cmp, err := drift.Compensate(t.Context(), input(j), nil, &registration.CompSettings{}, &drift.Settings{Accuracy: 0.01, CacheDir: cacheDir(t)})
	if err != nil {
		t.Fatal(err)
	}
	r := cmp.Result
	// Rounding only: the after model adds the change as a contributor, the
	// optimiser shifts each site's mean by the same product.
	if math.Abs(r.YieldAfter-cmp.After.MeanPInSpec()) > 1e-12 || math.Abs(r.YieldBefore-cmp.Before.MeanPInSpec()) > 1e-12 {
		t.Errorf("predicted %.12f → %.12f, evaluator %.12f → %.12f", r.YieldBefore, r.YieldAfter, cmp.Before.MeanPInSpec(), cmp.After.MeanPInSpec())
	}
}

// TestCompApplied: a lot built with +200 ppm on L3 that measured −10 ppm
// moved −209.958 ppm; when the recommendation cancels that layer's own
// measured scale (a tight drill budget forces it here) the new setting is
// (1 + 200 ppm)/(1 − 10 ppm) − 1 = +210.002 ppm and the change +10.000 ppm,
// the convention of the README's history section [calculated here]. The job
// models the material movement (−209.958 ppm) and comp adds the applied
// artwork to it, the sum standing for the product (0.04 ppm off here, inside
// the tolerance).
func TestCompApplied(t *testing.T) {
	s := string(must(os.ReadFile("testdata/comp-mixed.toml")))
	s = s[:strings.Index(s, "[[contributor]]")] + `
[[contributor]]
name    = "L3 material movement"
layers  = ["L3"]
scale_x = "-209.958 ppm"
scale_y = "-209.958 ppm"
`
	job := filepath.Join(t.TempDir(), "applied.toml")
	if err := os.WriteFile(job, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, applied := range []string{"L3:x=+200ppm,y=+200ppm", writeApplied(t, "layer,scale_x [ppm],scale_y [ppm]\nL3,+200,+200\n")} {
		c := compJSON(t, job, "--applied", applied, "--drill-budget", "0.005mil", "--objective", "worst")
		l3 := c.Layers[0]
		// 0.005 mil over the 4.5 in lever arm of the farthest site is 1.1 ppm.
		if l3.Layer != "L3" || math.Abs(l3.SettingXPPM-210.002) > 1.2 || math.Abs(l3.ScaleXPPM-10) > 1.2 {
			t.Errorf("--applied %s: L3 X setting %+.3f ppm, change %+.3f; want +210.002, +10", applied, l3.SettingXPPM, l3.ScaleXPPM)
		}
		if math.Abs(l3.AppliedXPPM-200) > 1e-9 || math.Abs(l3.MovementXPPM+209.958) > 0.05 {
			t.Errorf("applied %g ppm, movement %g ppm; want +200, −209.958", l3.AppliedXPPM, l3.MovementXPPM)
		}
		if l4 := c.Layers[1]; l4.AppliedXPPM != 0 || math.Abs(l4.SettingXPPM-l4.ScaleXPPM) > 1e-9 {
			t.Errorf("L4 (CAD size): applied %g, setting %g, change %g", l4.AppliedXPPM, l4.SettingXPPM, l4.ScaleXPPM)
		}
	}
}

// writeApplied writes an applied-compensation file and returns its path.
func writeApplied(t *testing.T, body string) string {
	p := filepath.Join(t.TempDir(), "applied.csv")
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func must[T any](v T, err error) T {
	if err != nil {
		panic(err)
	}
	return v
}

// TestCompHistory: without targets, comp takes each trace layer's next-lot
// movement from the history (the EWMA run-to-run estimate of
// history.EWMAEstimate over the stored lots); with a lot's targets it says
// whether that lot lies inside the history's individuals-chart limits.
func TestCompHistory(t *testing.T) {
	tmp := t.TempDir()
	db := filepath.Join(tmp, "h.db")
	var coreB, coreA []samples.HistoryLot
	for _, h := range samples.DemoHistory() {
		switch {
		case h.Construction == samples.HistoryCoreB && len(coreB) < 9:
			coreB = append(coreB, h)
		case h.Construction == samples.HistoryCoreA && h.Name == "H041":
			coreA = append(coreA, h)
		}
	}
	files := func(h samples.HistoryLot) (string, string) {
		targets, applied := filepath.Join(tmp, h.Name+".csv"), filepath.Join(tmp, h.Name+"-applied.csv")
		if err := writeFileWith(targets, h.WriteTargets); err != nil {
			t.Fatal(err)
		}
		if err := writeFileWith(applied, h.WriteApplied); err != nil {
			t.Fatal(err)
		}
		return targets, applied
	}
	for _, h := range coreB[:8] {
		targets, applied := files(h)
		if code, _, errs := runPlain(t, "", "history", "add", targets, "--lot", h.Name, "--date", h.Date, "--construction", h.Construction, "--applied", applied, "--db", db); code != 0 {
			t.Fatalf("history add: exit %d: %s", code, errs)
		}
	}
	s := compJSON(t, "../../samples/two-core.toml", "--history", db, "--construction", samples.HistoryCoreB)
	d, err := history.Open(t.Context(), db)
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	for _, l := range s.Layers {
		ss, err := d.Series(t.Context(), history.Filter{Construction: samples.HistoryCoreB, Layer: l.Layer}, registration.ScaleX)
		if err != nil || len(ss) != 1 {
			t.Fatalf("series of %s: %v %d", l.Layer, err, len(ss))
		}
		want := history.EWMAEstimate(ss[0].Values(registration.ScaleX), 0, history.ControllerLambda).Movement
		if math.Abs(l.MovementXPPM-want*1e6) > 1e-9 {
			t.Errorf("%s: movement X %.6f ppm, the history's EWMA %.6f", l.Layer, l.MovementXPPM, want*1e6)
		}
	}
	if !strings.Contains(strings.Join(s.Notes, " "), "from the history") || s.Layers[0].SEXPPM == 0 {
		t.Errorf("notes %q, standard error %v ppm", s.Notes, s.Layers[0].SEXPPM)
	}
	// The ninth lot of the same construction is inside its limits; a lot of
	// the other construction after its laminate change (moving about 115 ppm
	// further in x) is not.
	for _, c := range []struct {
		h      samples.HistoryLot
		inside bool
	}{{coreB[8], true}, {coreA[0], false}} {
		targets, applied := files(c.h)
		s := compJSON(t, "../../samples/two-core.toml", "--history", db, "--construction", samples.HistoryCoreB, "--targets", targets, "--applied", applied)
		var x []drift.HistoryCheck
		for _, h := range s.History {
			if h.Axis == "x" {
				x = append(x, h)
			}
		}
		if len(x) != 2 {
			t.Fatalf("lot %s: history checks %+v", c.h.Name, s.History)
		}
		for _, h := range x {
			t.Logf("lot %s, %s x: movement %+.1f ppm, limits %+.1f … %+.1f", c.h.Name, h.Layer, h.MovementPPM, h.LCLPPM, h.UCLPPM)
			if h.Inside != c.inside || h.Lots != 8 {
				t.Errorf("lot %s, %s x: movement %+.1f ppm, limits %+.1f … %+.1f, inside %v (want %v), %d lots", c.h.Name, h.Layer, h.MovementPPM, h.LCLPPM, h.UCLPPM, h.Inside, c.inside, h.Lots)
			}
		}
	}
}

// TestCompTableWarns: a recommendation below the applied artwork's yield is
// said in the table, and a relative measurement shows no drill column.
func TestCompTableWarns(t *testing.T) {
	lu, err := parseUnits("mil")
	if err != nil {
		t.Fatal(err)
	}
	d := 1e-5
	s := &drift.CompSummary{Objective: "worst", BelowApplied: true,
		Before: drift.CompState{Sites: 1, SiteYield: 0.9, DrillWorstM: &d}, After: drift.CompState{Sites: 1, SiteYield: 0.8, DrillWorstM: &d}}
	var b strings.Builder
	printComp(&b, "t", &drift.Comparison{Result: &registration.CompResult{}}, s, lu, nil)
	if !strings.Contains(b.String(), "WARNING: the recommendation predicts a LOWER site yield") || !strings.Contains(b.String(), "drill worst") {
		t.Errorf("table:\n%s", b.String())
	}
	s.BelowApplied, s.Before.DrillWorstM, s.After.DrillWorstM = false, nil, nil
	b.Reset()
	printComp(&b, "t", &drift.Comparison{Result: &registration.CompResult{}}, s, lu, nil)
	if strings.Contains(b.String(), "WARNING") || strings.Contains(b.String(), "drill worst") || !strings.Contains(b.String(), "relative measurement carries none") {
		t.Errorf("table:\n%s", b.String())
	}
}

// TestCompRelativeNoDrill: with a lot measured L3 against L4 the JSON holds
// no drill registration (the measurement carries none) and the table says
// why.
func TestCompRelativeNoDrill(t *testing.T) {
	var b strings.Builder
	b.WriteString("panel,layer,target,x [in],y [in],dx [um],dy [um]\n")
	for p := 1; p <= 3; p++ {
		n := 0
		for _, y := range []float64{-10, 0, 10} {
			for _, x := range []float64{-7, 0, 7} {
				n++
				eps := (-100 - 10*float64(p)) * 1e-6
				fmt.Fprintf(&b, "P%d,L3-L4,T%d,%g,%g,%.6f,%.6f\n", p, n, x, y, eps*x*25400, eps*y*25400)
			}
		}
	}
	targets := filepath.Join(t.TempDir(), "rel.csv")
	if err := os.WriteFile(targets, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errs := run(t, "comp", "testdata/mixed.toml", "--targets", targets, "-o", t.TempDir(), "--json", "--accuracy", "1%")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if strings.Contains(out, "drill_worst_m") || !strings.Contains(out, `"L3-L4"`) {
		t.Errorf("JSON of a relative measurement:\n%s", out)
	}
	code, out, errs = run(t, "comp", "testdata/mixed.toml", "--targets", targets, "-o", t.TempDir(), "--accuracy", "1%")
	if code != 0 || strings.Contains(out, "drill worst") || !strings.Contains(out, "relative measurement carries none") {
		t.Errorf("exit %d, table:\n%s%s", code, out, errs)
	}
}
