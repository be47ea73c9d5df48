package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel/section"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

// run runs the command line with a private solve cache and returns the exit
// status, stdout and stderr.
func run(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errw bytes.Buffer
	args = append(args, "--cache-dir", cacheDir(t))
	code := realMain(args, strings.NewReader(""), &out, &errw)
	return code, out.String(), errw.String()
}

var sharedCache string

// cacheDir is one cache for the whole test binary, so that the curves of a
// job are solved once.
func cacheDir(t *testing.T) string {
	if sharedCache == "" {
		d, err := os.MkdirTemp("", "regdrift-test-cache")
		if err != nil {
			t.Fatal(err)
		}
		sharedCache = d
	}
	return sharedCache
}

func TestMain(m *testing.M) {
	if args := os.Getenv("REGDRIFT_TEST_CHILD"); args != "" {
		childMain(args)
	}
	flag.Parse()
	code := m.Run()
	if sharedCache != "" {
		os.RemoveAll(sharedCache)
	}
	os.Exit(code)
}

func readCSV(t *testing.T, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return recs
}

func TestMapGolden(t *testing.T) {
	dir := t.TempDir()
	code, stdout, stderr := run(t, "map", "testdata/small.toml", "-o", dir, "--width", "600")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	for _, f := range []string{"sites.csv", "summary.json", "map.png"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Errorf("missing %s", f)
		}
	}
	if !strings.Contains(stdout, "hybrid") || !strings.Contains(stdout, "worst site") {
		t.Errorf("table: %s", stdout)
	}
	got, _ := os.ReadFile(filepath.Join(dir, "sites.csv"))
	golden := "testdata/small-sites.golden.csv"
	if *update {
		os.WriteFile(golden, got, 0o644)
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	if msg := csvDiff(got, want); msg != "" {
		os.WriteFile("testdata/small-sites.actual.csv", got, 0o644)
		t.Errorf("sites.csv differs from %s: %s; actual output written to testdata/small-sites.actual.csv", golden, msg)
	}
}

// goldenTol is the tolerance of numeric cells against the golden file: the
// last printed digit (4 decimals), so that a change of solver settings within
// the accuracy asked for does not fail the test but any change of the model does.
const goldenTol = 2e-4

// csvDiff compares two CSV files cell by cell, numbers within goldenTol, and
// describes the first difference.
func csvDiff(got, want []byte) string {
	g, err1 := csv.NewReader(bytes.NewReader(got)).ReadAll()
	w, err2 := csv.NewReader(bytes.NewReader(want)).ReadAll()
	if err1 != nil || err2 != nil {
		return fmt.Sprintf("unreadable: %v %v", err1, err2)
	}
	if len(g) != len(w) {
		return fmt.Sprintf("%d rows, want %d", len(g), len(w))
	}
	for i := range g {
		if len(g[i]) != len(w[i]) {
			return fmt.Sprintf("row %d: %d cells, want %d", i+1, len(g[i]), len(w[i]))
		}
		for k := range g[i] {
			a, b := g[i][k], w[i][k]
			if a == b {
				continue
			}
			x, errA := strconv.ParseFloat(a, 64)
			y, errB := strconv.ParseFloat(b, 64)
			if errA == nil && errB == nil && math.Abs(x-y) <= goldenTol {
				continue
			}
			return fmt.Sprintf("row %d column %q: %q, want %q", i+1, w[0][k], a, b)
		}
	}
	return ""
}

// TestMapAnalytic checks the per-site offsets of the small job against the
// model worked by hand, and the per-site coupling against a direct solve of
// the cross-section at that offset.
func TestMapAnalytic(t *testing.T) {
	dir := t.TempDir()
	if code, _, stderr := run(t, "map", "testdata/small.toml", "-o", dir, "--width", "600", "--units", "um"); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	recs := readCSV(t, filepath.Join(dir, "sites.csv"))
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	num := func(r []string, name string) float64 {
		i, ok := col[name]
		if !ok {
			t.Fatalf("no column %q in %v", name, recs[0])
		}
		v, err := strconv.ParseFloat(r[i], 64)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	j, err := loadJob("testdata/small.toml", nil)
	if err != nil {
		t.Fatal(err)
	}
	set := &section.Settings{Accuracy: 1e-3}
	for _, r := range recs[1:] {
		x, y := num(r, "x [mm]")*1e-3, num(r, "y [mm]")*1e-3
		angle := num(r, "angle [deg]")
		// Upper L3: +300 ppm in x, −200 ppm in y; lower L4: +0.5 mil in x.
		// Lines along y (90°): n = −x̂, δ = −(300e-6·x − 12.7 µm).
		// Lines along x (0°): n = ŷ, δ = −200e-6·y.
		var want float64
		switch angle {
		case 90:
			want = -(300e-6*x - 12.7e-6)
		case 0:
			want = -200e-6 * y
		default:
			t.Fatalf("angle %v", angle)
		}
		got := num(r, "offset_across [um]") * 1e-6
		if math.Abs(got-want) > 0.0001e-6+1e-9*math.Abs(want) {
			t.Errorf("site %s: offset %.6g m, want %.6g m", r[0], got, want)
		}
		sol, err := section.Solve(j.Sections[0], got, set)
		if err != nil {
			t.Fatal(err)
		}
		p := section.NewLines(sol.C, sol.C0)
		// The curve's length is the quarter wave at the design offset; use it here too.
		curveLen := 0.0
		{
			c, _, err := section.CachedSweep(t.Context(), j.Sections[0], section.DefaultOffsets(j.Sections[0], 0), set, cacheDir(t), false)
			if err != nil {
				t.Fatal(err)
			}
			curveLen = c.Length
		}
		sp := p.SParams(j.Sections[0].Frequency, curveLen, j.Sections[0].ZRef)
		direct := 20 * math.Log10(cmplxAbs(sp.S31))
		if d := num(r, "coupling [dB]") - direct; math.Abs(d) > 0.002 {
			t.Errorf("site %s: coupling %.4f dB from the curve, %.4f dB from a direct solve", r[0], num(r, "coupling [dB]"), direct)
		}
	}
}

func cmplxAbs(z complex128) float64 { return math.Hypot(real(z), imag(z)) }

// TestMapJSON checks the JSON summary against sites.csv of the same run:
// the counts, the offset and drift ranges and their root mean squares, and
// the worst sites in order of their probability of being in spec.
func TestMapJSON(t *testing.T) {
	dir := t.TempDir()
	code, stdout, stderr := run(t, "map", "testdata/small.toml", "-o", dir, "--width", "600", "--json", "--units", "um")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var s struct {
		Sites   int                             `json:"sites"`
		InSpec  int                             `json:"in_spec"`
		OffsetM struct{ Min, Max, RMS float64 } `json:"offset_m"`
		DriftDB struct{ Min, Max, RMS float64 } `json:"drift_db"`
		Worst   []struct {
			Name     string  `json:"name"`
			XM       float64 `json:"x_m"`
			MarginDB float64 `json:"margin_db"`
			PInSpec  float64 `json:"p_in_spec"`
		} `json:"worst"`
	}
	if err := json.Unmarshal([]byte(stdout), &s); err != nil {
		t.Fatalf("%v: %s", err, stdout)
	}
	recs := readCSV(t, filepath.Join(dir, "sites.csv"))
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	num := func(r []string, name string) float64 {
		v, err := strconv.ParseFloat(r[col[name]], 64)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		return v
	}
	rows := recs[1:]
	inSpec := 0
	offLo, offHi, driftLo, driftHi := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	var offSS, driftSS float64
	margin := map[string]float64{}
	for _, r := range rows {
		if r[col["in_spec"]] == "true" {
			inSpec++
		}
		o, d := num(r, "offset_across [um]")*1e-6, num(r, "drift [dB]")
		offLo, offHi, driftLo, driftHi = math.Min(offLo, o), math.Max(offHi, o), math.Min(driftLo, d), math.Max(driftHi, d)
		offSS, driftSS = offSS+o*o, driftSS+d*d
		margin[r[0]] = num(r, "margin [dB]")
	}
	n := float64(len(rows))
	if s.Sites != len(rows) || s.InSpec != inSpec || len(s.Worst) != len(rows) {
		t.Errorf("summary: %d sites, %d in spec, %d worst; sites.csv: %d rows, %d in spec", s.Sites, s.InSpec, len(s.Worst), len(rows), inSpec)
	}
	// sites.csv rounds to 4 decimals: 5e-5 µm and 5e-5 dB; the RMS of
	// rounded values differs by at most as much.
	const offTol, dbTol = 5e-11, 5e-5
	for _, c := range []struct {
		name      string
		got, want float64
		tol       float64
	}{
		{"offset min", s.OffsetM.Min, offLo, offTol}, {"offset max", s.OffsetM.Max, offHi, offTol},
		{"offset rms", s.OffsetM.RMS, math.Sqrt(offSS / n), offTol},
		{"drift min", s.DriftDB.Min, driftLo, dbTol}, {"drift max", s.DriftDB.Max, driftHi, dbTol},
		{"drift rms", s.DriftDB.RMS, math.Sqrt(driftSS / n), dbTol},
	} {
		if math.Abs(c.got-c.want) > c.tol {
			t.Errorf("%s: summary %.9g, sites.csv %.9g", c.name, c.got, c.want)
		}
	}
	for k, w := range s.Worst {
		if math.Abs(w.MarginDB-margin[w.Name]) > dbTol {
			t.Errorf("worst %d %s: margin %.5f dB, sites.csv %.5f", k+1, w.Name, w.MarginDB, margin[w.Name])
		}
		if k > 0 && w.PInSpec < s.Worst[k-1].PInSpec {
			t.Errorf("worst sites out of order at %d: P %.6f after %.6f", k+1, w.PInSpec, s.Worst[k-1].PInSpec)
		}
	}
}

func TestMapBadInputLeavesNothing(t *testing.T) {
	src, _ := os.ReadFile("testdata/small.toml")
	bad := strings.Replace(string(src), `border = "0.5 in"`, `border = 0.5`, 1)
	dir := t.TempDir()
	job := filepath.Join(dir, "bad.toml")
	os.WriteFile(job, []byte(bad), 0o644)
	out := filepath.Join(dir, "out")
	code, _, stderr := run(t, "map", job, "-o", out)
	if code != 2 {
		t.Fatalf("exit %d, want 2: %s", code, stderr)
	}
	if !strings.Contains(stderr, "bad.toml:7: panel.border") {
		t.Errorf("message %q does not name file, line and key", stderr)
	}
	if ents, _ := os.ReadDir(out); len(ents) != 0 {
		t.Errorf("output left behind: %v", ents)
	}
}

func TestUsage(t *testing.T) {
	tests := []struct {
		args []string
		code int
	}{
		{[]string{"map", "-h"}, 0},
		{[]string{"map"}, 2},
		{[]string{"map", "testdata/small.toml", "--show", "colour"}, 2},
		{[]string{"nosuch"}, 2},
		{[]string{"version"}, 0},
		{[]string{"map", "--nosuchflag", "x"}, 2},
	}
	for _, tt := range tests {
		var out, errw bytes.Buffer
		if code := realMain(tt.args, nil, &out, &errw); code != tt.code {
			t.Errorf("%v: exit %d, want %d (%s)", tt.args, code, tt.code, errw.String())
		}
	}
}
