package main

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel/section"
)

// TestSweepSensitivities runs sweep --sensitivities on the small job and
// checks the JSON against central differences of direct solves of the
// perturbed section (the derivative's definition), the ranking of the
// excursion impacts, and that sensitivity.csv carries the same numbers in
// dB/mil (1 mil = 2.54e-5 m exactly: NIST Special Publication 811, 2008
// edition, appendix B.9, "Length"; published).
func TestSweepSensitivities(t *testing.T) {
	dir := t.TempDir()
	code, stdout, stderr := run(t, "sweep", "testdata/small.toml", "-o", dir, "--offsets", "-1mil:1mil:1mil", "--sensitivities", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var r struct {
		Length float64 `json:"length_m"`
		Sens   []struct {
			Offset    float64 `json:"offset_m"`
			Parameter string  `json:"parameter"`
			Per       string  `json:"per"`
			Coupling  float64 `json:"d_coupling_db"`
		} `json:"sensitivities"`
		Impacts []struct {
			Parameter string  `json:"parameter"`
			Excursion float64 `json:"excursion"`
			Coupling  float64 `json:"d_coupling_db"`
			Change    float64 `json:"coupling_change_db"`
		} `json:"excursion_impacts"`
	}
	if err := json.Unmarshal([]byte(stdout), &r); err != nil {
		t.Fatal(err)
	}
	j, err := loadJob("testdata/small.toml", nil)
	if err != nil {
		t.Fatal(err)
	}
	s := j.Sections[0]
	params := s.Params()
	if len(r.Sens) != 3*len(params) || len(r.Impacts) != len(params) {
		t.Fatalf("%d sensitivity rows and %d impacts, want %d and %d", len(r.Sens), len(r.Impacts), 3*len(params), len(params))
	}
	for k := 1; k < len(r.Impacts); k++ {
		if math.Abs(r.Impacts[k].Change) > math.Abs(r.Impacts[k-1].Change) {
			t.Errorf("impacts not ranked: %s %.4g after %s %.4g", r.Impacts[k].Parameter, r.Impacts[k].Change, r.Impacts[k-1].Parameter, r.Impacts[k-1].Change)
		}
	}
	// The core between the traces (stackup index 3) dominates a broadside
	// pair's coupling; its default excursion is 10 % of 4 mil.
	if r.Impacts[0].Parameter != "layers[3].thickness" || math.Abs(r.Impacts[0].Excursion-0.4*2.54e-5) > 1e-12 {
		t.Fatalf("first impact %+v, want layers[3].thickness over 0.4 mil", r.Impacts[0])
	}
	// Central difference of two direct solves at the design offset (0), at a
	// fixed coupled length, step 0.1 mil: its truncation error is about
	// h²/6·|C'''| (Burden & Faires, Numerical Analysis, §4.1, the
	// three-point midpoint formula), far below the solve error.
	coupling := func(sec *section.Section) float64 {
		sol, err := section.Solve(sec, 0, &section.Settings{Accuracy: 2e-4})
		if err != nil {
			t.Fatal(err)
		}
		sp := section.NewLines(sol.C, sol.C0).SParams(sec.Frequency, r.Length, sec.ZRef)
		return 20 * math.Log10(cmplxAbs(sp.S31))
	}
	var core section.Param
	for _, p := range params {
		if p.Key == "layers[3].thickness" {
			core = p
		}
	}
	const h = 0.1 * 2.54e-5
	fd := (coupling(s.Perturbed(core, h)) - coupling(s.Perturbed(core, -h))) / (2 * h)
	var got float64
	for _, row := range r.Sens {
		if row.Offset == 0 && row.Parameter == core.Key {
			got = row.Coupling
		}
	}
	// 1 %: the bound the solver's own tests assert for every sensitivity
	// against converged central differences (panel/section sensfd_test.go).
	if math.Abs(got-fd) > 0.01*math.Abs(fd) {
		t.Errorf("d coupling / d core thickness = %.5g dB/m, central difference %.5g dB/m", got, fd)
	}
	t.Logf("d coupling / d core = %.5g dB/mil, central difference %.5g dB/mil", got*2.54e-5, fd*2.54e-5)

	f, err := os.Open(filepath.Join(dir, "sensitivity.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 1+len(r.Sens) || rows[0][2] != "d_coupling [dB/mil]" || rows[0][3] != "d_coupling [dB per unit er]" {
		t.Fatalf("sensitivity.csv: %d rows, header %v", len(rows), rows[0])
	}
	for k, row := range r.Sens {
		col := 2
		scale := 2.54e-5
		if row.Per == "er" {
			col, scale = 3, 1
		}
		v, err := strconv.ParseFloat(rows[1+k][col], 64)
		// 6 significant digits written: 5e-6 relative.
		if err != nil || math.Abs(v-row.Coupling*scale) > 5e-6*math.Abs(row.Coupling*scale)+1e-300 {
			t.Errorf("csv row %d (%s): %q, want %.6g", 1+k, row.Parameter, rows[1+k][col], row.Coupling*scale)
		}
	}
	for _, name := range []string{"sensitivity.csv", "sensitivity.png"} {
		if _, err := os.Stat(filepath.Join(dir, name)); err != nil {
			t.Errorf("missing %s", name)
		}
	}
}

// TestSweepBadExcursions checks that an excursion that is malformed or
// would make a thickness or width non-positive is bad input: exit 2, no
// output written.
func TestSweepBadExcursions(t *testing.T) {
	for _, args := range [][]string{
		{"--sensitivities", "--excursions", "thickness=100%"},
		{"--sensitivities", "--excursions", "width=14mil"},   // far-face width 12.8 mil
		{"--sensitivities", "--excursions", "copper=1.4mil"}, // the copper is 1.4 mil
		{"--sensitivities", "--excursions", "thickness=4mil"},
		{"--sensitivities", "--excursions", "er=2.55"}, // core εr 3.00
		{"--sensitivities", "--excursions", "colour=3"},
		{"--sensitivities", "--excursions", "width=-1mil"},
		{"--excursions", "er=0.05"}, // without --sensitivities
	} {
		dir := filepath.Join(t.TempDir(), "out")
		code, _, stderr := run(t, append([]string{"sweep", "testdata/small.toml", "-o", dir, "--offsets", "-1mil:1mil:1mil"}, args...)...)
		if code != 2 {
			t.Errorf("%v: exit %d, want 2 (%s)", args, code, stderr)
		}
		if _, err := os.Stat(dir); err == nil {
			t.Errorf("%v: left %s behind", args, dir)
		}
		t.Logf("%v: %s", args, stderr)
	}
}

// TestSweepCopperBuild checks that sweep shows a copper layer's foil, each
// plating step and the finished total: 0.5 oz/ft² of copper is 0.6704 mil
// (28.349523125 g / 0.09290304 m² / 8.96 g/cm³ = 34.057 µm per oz: NIST
// Special Publication 811, 2008 edition, appendix B.9, and CRC Handbook of
// Chemistry and Physics, copper; published).
func TestSweepCopperBuild(t *testing.T) {
	data, err := os.ReadFile("testdata/small.toml")
	if err != nil {
		t.Fatal(err)
	}
	old := `{ copper = "L3", thickness = "1.4 mil" }`
	job := strings.Replace(string(data), old, `{ copper = "L3", foil = "0.5 oz", plating = ["0.6 mil", "0.13 mil"] }`, 1)
	if job == string(data) {
		t.Fatal("testdata/small.toml no longer has the L3 line this test edits")
	}
	path := filepath.Join(t.TempDir(), "build.toml")
	if err := os.WriteFile(path, []byte(job), 0o644); err != nil {
		t.Fatal(err)
	}
	code, stdout, stderr := run(t, "sweep", path, "-o", t.TempDir(), "--offsets", "-1mil:1mil:1mil")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	want := "copper L3: foil 0.670 + plating 0.600 + plating 0.130 = 1.400 mil finished"
	if !strings.Contains(stdout, want) {
		t.Errorf("sweep output lacks %q:\n%s", want, stdout)
	}
}
