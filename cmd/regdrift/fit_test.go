package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"github.com/regdrift/regdrift/registration/fitreport"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration"
)

// runPlain runs the command line without the solver flags and returns the
// exit status, stdout and stderr.
func runPlain(t *testing.T, stdin string, args ...string) (int, string, string) {
	t.Helper()
	var out, errw bytes.Buffer
	code := realMain(args, strings.NewReader(stdin), &out, &errw)
	return code, out.String(), errw.String()
}

const twoCoreTargets = "../../samples/twocore-targets.csv"

func TestFitCommand(t *testing.T) {
	dir := t.TempDir()
	contrib := filepath.Join(dir, "measured.toml")
	code, out, errs := runPlain(t, "", "fit", twoCoreTargets, "--robust", "-o", dir, "--panel", "18in,24in", "--contributors", contrib, "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var s fitreport.Summary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatalf("JSON: %v\n%s", err, out)
	}
	if len(s.Fits) != 10 || len(s.Lot) != 2 || s.Model != "affine" || s.Robust != "tukey" {
		t.Fatalf("summary: %d fits, %d lots, model %s, robust %s", len(s.Fits), len(s.Lot), s.Model, s.Robust)
	}
	var flagged []string
	for _, f := range s.Fits {
		if f.Terms[registration.ScaleX] == nil || f.StdErr[registration.Skew] == nil || f.Sigma0M == nil || f.RMSM <= 0 || f.MaxM < f.RMSM {
			t.Errorf("fit %s/%s incomplete: %+v", f.Panel, f.Layer, f)
		}
		for _, o := range f.Outliers {
			flagged = append(flagged, f.Panel+"/"+f.Layer+"/"+o)
		}
	}
	// The generator (samples.TwoCoreLot) planted exactly these misreads.
	if want := []string{"P3/L4/T07", "P5/L3/T14"}; !slices.Equal(flagged, want) {
		t.Errorf("outliers %v, want %v", flagged, want)
	}
	for _, name := range []string{"fit.csv", "residuals.csv", "fit.png", "residual-grid-L3.csv", "residual-grid-L4.csv"} {
		if _, err := os.Stat(filepath.Join(dir, name)); err != nil {
			t.Error(err)
		}
	}
	rows := readCSV(t, filepath.Join(dir, "residuals.csv"))
	if len(rows) != 1+160 || rows[0][5] != "dx [mil]" {
		t.Errorf("residuals.csv: %d rows, header %v", len(rows), rows[0])
	}
	// The pooled residual grid reads back as a contributor's residual.
	fh, err := os.Open(filepath.Join(dir, "residual-grid-L3.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	if _, err := registration.ReadGrid(fh, "residual-grid-L3.csv"); err != nil {
		t.Errorf("residual grid: %v", err)
	}

	// Round trip: a job that includes the contributors file gets the lot
	// means and sigmas back (to the six digits written).
	job, err := os.ReadFile("../../samples/two-core.toml")
	if err != nil {
		t.Fatal(err)
	}
	jobPath := filepath.Join(dir, "job.toml")
	if err := os.WriteFile(jobPath, append([]byte("include = [\"measured.toml\"]\n"), job...), 0o644); err != nil {
		t.Fatal(err)
	}
	j, err := loadJob(jobPath, nil)
	if err != nil {
		t.Fatal(err)
	}
	// The sample's L3 and L4 are measured against the drilled holes on the
	// same panels, so they are written jointly: a table of means per layer
	// and the spread as components over both layers. Read back, each layer
	// against the holes has its lot's sigma and L3−L4 the sigma of the
	// per-panel differences.
	lots := map[string]fitreport.LotJSON{}
	for _, l := range s.Lot {
		lots[l.Layer] = l
	}
	if len(s.Differences) != 1 || s.Differences[0].Layer != "L3-L4" {
		t.Fatalf("differences %+v, want one for L3-L4", s.Differences)
	}
	lots["L3-L4"] = s.Differences[0]
	found := 0
	for _, c := range j.Model.Contributors {
		if strings.HasPrefix(c.Name, "measured ") && c.Weights == nil {
			found++
		}
	}
	if found != 2 {
		t.Errorf("%d measured contributors of means in the job, want 2", found)
	}
	for _, pair := range [][2]string{{"L3", "none"}, {"L4", "none"}, {"L3", "L4"}} {
		l := lots[pair[0]]
		if pair[1] == "L4" {
			l = lots["L3-L4"]
		}
		// The job keeps its own contributors too; collapse the measured ones.
		m := &registration.Model{Datum: j.Model.Datum}
		for _, c := range j.Model.Contributors {
			if strings.HasPrefix(c.Name, "measured ") {
				m.Contributors = append(m.Contributors, c)
			}
		}
		r := m.Relative(pair[0], pair[1])
		for k := range l.Mean {
			if l.Sigma[k] == nil {
				continue
			}
			mean, sd := *l.Mean[k], *l.Sigma[k]
			// Six digits written: 1e-5 leaves room for the difference of two
			// rounded means and weights.
			if math.Abs(r.Mean[k]-mean) > 1e-5*math.Abs(*lots["L3"].Mean[k])+1e-5*math.Abs(*lots["L4"].Mean[k]) ||
				math.Abs(math.Sqrt(r.Var[k])-sd) > 1e-5*sd {
				t.Errorf("%s−%s %s: read back %g ± %g, fitted %g ± %g", pair[0], pair[1], registration.TermKind(k), r.Mean[k], math.Sqrt(r.Var[k]), mean, sd)
			}
		}
	}
}

func TestFitCommandTable(t *testing.T) {
	dir := t.TempDir()
	code, out, errs := runPlain(t, "", "fit", twoCoreTargets, "--model", "similarity", "-o", dir, "--units", "um")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	for _, want := range []string{"similarity model", "offset_x [um]", "lot (mean", "wrote " + filepath.Join(dir, "fit.csv")} {
		if !strings.Contains(out, want) {
			t.Errorf("table lacks %q:\n%s", want, out)
		}
	}
}

// TestFitBadInput checks that every kind of bad input exits with status 2,
// names the row and column (or the panel and layer), and leaves no output.
func TestFitBadInput(t *testing.T) {
	const h = "panel,layer,target,x [in],y [in],dx [mil],dy [mil]\n"
	tests := []struct {
		name, csv string
		args      []string
		want      string
	}{
		{"missing column", "panel,layer,target,x [in],y [in],dx [mil]\n", nil, `column "dy"`},
		{"no unit", "panel,layer,target,x,y [in],dx [mil],dy [mil]\n", nil, "needs a unit"},
		{"unknown unit", "panel,layer,target,x [in],y [in],dx [mils2],dy [mil]\n", nil, "unknown length unit"},
		{"not a number", h + "P1,L3,T1,1,1,0.1,0.1\nP1,L3,T2,x1,1,0.1,0.1\n", nil, `row 3, column "x"`},
		{"duplicate target", h + "P1,L3,T1,1,1,0.1,0.1\nP1,L3,T1,2,1,0.1,0.1\n", nil, `row 3, column "target"`},
		{"too few for affine", h + "P1,L3,T1,1,1,0.1,0.1\nP1,L3,T2,2,1,0.1,0.1\n", nil, `panel "P1", layer "L3": too few targets`},
		{"too few for similarity", h + "P2,L4,T1,1,1,0.1,0.1\n", []string{"--model", "similarity"}, `panel "P2", layer "L4": too few targets`},
		{"collinear", h + "P1,L3,T1,1,1,0.1,0.1\nP1,L3,T2,2,2,0.1,0.1\nP1,L3,T3,3,3,0.1,0.1\nP1,L3,T4,4,4,0.1,0.1\n", nil, `panel "P1", layer "L3": ill-conditioned`},
		{"bad model", h + "P1,L3,T1,1,1,0.1,0.1\n", []string{"--model", "quadratic"}, "--model"},
		{"bad datum", h + "P1,L3,T1,1,1,0.1,0.1\n", []string{"--datum", "0,0"}, "--datum"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "out")
			args := append([]string{"fit", "-", "-o", dir, "--contributors", filepath.Join(dir, "c.toml")}, tt.args...)
			code, _, errs := runPlain(t, tt.csv, args...)
			if code != exitBadInput {
				t.Fatalf("exit %d, want 2: %s", code, errs)
			}
			if !strings.Contains(errs, tt.want) {
				t.Errorf("message %q lacks %q", errs, tt.want)
			}
			if ents, _ := os.ReadDir(dir); len(ents) != 0 {
				t.Errorf("bad input left %d files in the output directory", len(ents))
			}
		})
	}
}

// TestFitRelativeLayer fits a layer measured against another ("L3-L4") and
// checks that its contributor moves the upper layer and says so.
func TestFitRelativeLayer(t *testing.T) {
	var b strings.Builder
	b.WriteString("panel,layer,target,x [in],y [in],dx [um],dy [um]\n")
	v := [registration.NumTerms]float64{registration.ScaleX: -120e-6, registration.OffsetY: 5e-6}
	for p := 1; p <= 3; p++ {
		n := 0
		for _, y := range []float64{-10, 0, 10} {
			for _, x := range []float64{-7, 0, 7} {
				n++
				pos := panel.Vec{X: x * 0.0254, Y: y * 0.0254}
				d := registration.Displace(v, pos, panel.Vec{})
				fmt.Fprintf(&b, "P%d,L3-L4,T%d,%g,%g,%.6f,%.6f\n", p, n, x, y, d.X/1e-6, d.Y/1e-6)
			}
		}
	}
	dir := t.TempDir()
	contrib := filepath.Join(dir, "rel.toml")
	code, out, errs := runPlain(t, b.String(), "fit", "-", "-o", dir, "--contributors", contrib, "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var s fitreport.Summary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	if len(s.Lot) != 1 || s.Lot[0].Layer != "L3-L4" || math.Abs(*s.Lot[0].Mean[registration.ScaleX]+120e-6) > 1e-10 || *s.Lot[0].Sigma[registration.ScaleX] > 1e-10 {
		t.Fatalf("lot %+v", s.Lot)
	}
	toml, err := os.ReadFile(contrib)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(toml), "measured relative to L4") || !strings.Contains(string(toml), `layers = ["L3"]`) {
		t.Errorf("contributors file:\n%s", toml)
	}
}

// TestFitApplied: a lot built with +200 ppm that measured −10 ppm (three
// panels at −9, −10 and −11 ppm, exact targets) moved
// (1 − 10 ppm)/(1 + 200 ppm) − 1 = −209.958 ppm; the setting that cancels it
// is 1/(1 + m) − 1 = +210.002 ppm, a change of 1/(1 − 10 ppm) − 1 =
// +10.0001 ppm from the applied artwork, with standard error 1 ppm/√3
// (calculated here; the README's history section works the same example).
func TestFitApplied(t *testing.T) {
	var b strings.Builder
	b.WriteString("panel,layer,target,x [in],y [in],dx [mil],dy [mil]\n")
	pts := [][2]float64{{-8, -10}, {8, -10}, {8, 10}, {-8, 10}, {0, -10}, {0, 10}, {-8, 0}, {8, 0}}
	for p, eps := range []float64{-9e-6, -10e-6, -11e-6} {
		for i, pt := range pts {
			fmt.Fprintf(&b, "P%d,L3,T%d,%g,%g,%.9f,%.9f\n", p+1, i+1, pt[0], pt[1], eps*pt[0]*1000, eps*pt[1]*1000)
		}
	}
	targets := filepath.Join(t.TempDir(), "targets.csv")
	if err := os.WriteFile(targets, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errs := runPlain(t, "", "fit", targets, "-o", t.TempDir(), "--json", "--applied", "L3:x=+200ppm,y=+200ppm")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var s fitreport.Summary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	if len(s.Artwork) != 1 {
		t.Fatalf("artwork %+v", s.Artwork)
	}
	a := s.Artwork[0]
	// The fit of exact targets is exact to rounding: 1e-6 ppm.
	for _, c := range []struct {
		name      string
		got, want float64
	}{{"movement", a.MovementXPPM, ((1-10e-6)/(1+200e-6) - 1) * 1e6}, {"setting", a.SettingXPPM, ((1+200e-6)/(1-10e-6) - 1) * 1e6},
		{"change", a.ChangeXPPM, (1/(1-10e-6) - 1) * 1e6}, {"se", a.SEXPPM, 1 / math.Sqrt(3)}, {"applied", a.AppliedYPPM, 200}} {
		if math.Abs(c.got-c.want) > 1e-6 {
			t.Errorf("%s %.6f ppm, want %.6f", c.name, c.got, c.want)
		}
	}
	if math.Abs(a.SettingXPPM-210.002) > 0.001 || math.Abs(a.ChangeXPPM-10.000) > 0.001 {
		t.Errorf("setting %+.4f, change %+.4f; the README says +210.00 and +10.00", a.SettingXPPM, a.ChangeXPPM)
	}
	code, out, _ = runPlain(t, "", "fit", targets, "-o", t.TempDir(), "--applied", "L3:x=+200ppm,y=+200ppm")
	if code != 0 || !strings.Contains(out, "+210.00") || !strings.Contains(out, "movement") {
		t.Errorf("exit %d, table lacks the artwork:\n%s", code, out)
	}
	applied := filepath.Join(t.TempDir(), "applied.csv")
	os.WriteFile(applied, []byte("layer,scale_x [ppm],scale_y [ppm]\nL3,+200,+200\nL5,+100,+100\n"), 0o644)
	code, _, errs = runPlain(t, "", "fit", targets, "-o", filepath.Join(t.TempDir(), "out"), "--applied", applied)
	if code != 2 || !strings.Contains(errs, `row 3, column "layer"`) || !strings.Contains(errs, `"L5"`) {
		t.Errorf("applied layer the targets lack: exit %d, %s", code, errs)
	}
}

// TestFitSpillSameOutputs runs fit on the same files with the targets held
// in memory and spilled to the temporary file after every few targets
// (registration.SpillBudget): every output, fit.csv, residuals.csv, the
// grids, fit.png, the contributors file and the JSON or the table, must be
// the same to the byte, under every option that touches the targets, and
// no temporary file may be left behind, after success or bad input.
func TestFitSpillSameOutputs(t *testing.T) {
	tmp := t.TempDir()
	t.Setenv("TMPDIR", tmp)
	big := writeBigTargets(t, t.TempDir(), 6, 2, 400)
	inputs := []struct{ path, applied string }{{twoCoreTargets, "L3:x=+200ppm,y=+150ppm"}, {big, "L1:x=+200ppm,y=+150ppm"}}
	options := [][]string{
		nil,
		{"--robust", "--json"},
		{"--robust", "--weight", "huber", "--model", "similarity", "--origin", "0.5in,-0.25in", "--panel", "18in,24in"},
		{"--model", "translation", "--flip-y", "--datum", "1in,2in", "--json"},
		{"--robust", "--applied", ""},
	}
	run := func(budget int, in string, args []string) (string, string) {
		t.Helper()
		old := registration.SpillBudget
		registration.SpillBudget = budget
		defer func() { registration.SpillBudget = old }()
		out := filepath.Join(t.TempDir(), "out")
		all := append([]string{"fit", in, "-o", out, "--contributors", filepath.Join(out, "lot.toml"), "--width", "600"}, args...)
		code, stdout, errs := runPlain(t, "", all...)
		if code != 0 {
			t.Fatalf("%v: exit %d: %s", all, code, errs)
		}
		if ents, _ := os.ReadDir(tmp); len(ents) != 0 {
			t.Errorf("%v: %d files left in the temporary directory", all, len(ents))
		}
		return out, strings.ReplaceAll(stdout, out, "OUT")
	}
	for _, in := range inputs {
		for _, opt := range options {
			opt = slices.Clone(opt)
			if k := slices.Index(opt, ""); k >= 0 {
				opt[k] = in.applied
			}
			memDir, memOut := run(1<<30, in.path, opt)
			spillDir, spillOut := run(64, in.path, opt)
			if memOut != spillOut {
				t.Errorf("%s %v: standard output differs:\n%s\n%s", in.path, opt, memOut, spillOut)
			}
			ents, err := os.ReadDir(memDir)
			if err != nil || len(ents) < 5 {
				t.Fatalf("%s %v: outputs %v, %v", in.path, opt, ents, err)
			}
			for _, e := range ents {
				a, _ := os.ReadFile(filepath.Join(memDir, e.Name()))
				b, err := os.ReadFile(filepath.Join(spillDir, e.Name()))
				if err != nil || !bytes.Equal(a, b) {
					t.Errorf("%s %v: %s differs when the targets are spilled (%v)", in.path, opt, e.Name(), err)
				}
			}
		}
	}
	// Bad input found after the spill (a duplicate at the end of the file)
	// leaves neither outputs nor the temporary file.
	data, err := os.ReadFile(big)
	if err != nil {
		t.Fatal(err)
	}
	old := registration.SpillBudget
	registration.SpillBudget, data = 64, append(data, "P001,L1,T00001,1,1,0,0\n"...)
	defer func() { registration.SpillBudget = old }()
	out := filepath.Join(t.TempDir(), "out")
	code, _, errs := runPlain(t, string(data), "fit", "-", "-o", out)
	if code != exitBadInput || !strings.Contains(errs, "duplicate target") {
		t.Errorf("duplicate after the spill: exit %d, %s", code, errs)
	}
	if ents, _ := os.ReadDir(out); len(ents) != 0 {
		t.Errorf("bad input left %d outputs", len(ents))
	}
	if ents, _ := os.ReadDir(tmp); len(ents) != 0 {
		t.Errorf("bad input left %d files in the temporary directory", len(ents))
	}
}
