package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// variationTerms are twelve invented [[variation]] terms, one on every
// parameter of the same-core hybrid's stripline section (its prepregs
// named P1 and P2 by processJob).
const variationTerms = `
[[variation]]
name = "press P1"
on = "P1"
quantity = "thickness"
panel = { sigma = "0.4 mil" }
shape = { kind = "dome", centre_minus_edge = "0.6 mil" }
site_sigma = "0.1 mil"

[[variation]]
name = "press C2"
on = "C2"
quantity = "thickness"
panel = { sigma = "0.1 mil" }
shape = { kind = "dome", centre_minus_edge = "0.15 mil" }

[[variation]]
name = "press P2"
on = "P2"
quantity = "thickness"
panel = { sigma = "0.4 mil" }
shape = { kind = "dome", centre_minus_edge = "0.6 mil" }

[[variation]]
name = "er P1"
on = "P1"
quantity = "er"
panel = { sigma = 0.03 }

[[variation]]
name = "er C2"
on = "C2"
quantity = "er"
panel = { sigma = 0.03 }

[[variation]]
name = "er P2"
on = "P2"
quantity = "er"
panel = { sigma = 0.03 }

[[variation]]
name = "copper L3"
on = "L3"
quantity = "copper"
panel = { sigma = "0.05 mil" }
shape = { kind = "edge", at_edge = "0.1 mil", decay = "2 in" }

[[variation]]
name = "copper L4"
on = "L4"
quantity = "copper"
panel = { sigma = "0.05 mil" }
shape = { kind = "edge", at_edge = "0.1 mil", decay = "2 in" }

[[variation]]
name = "etched width L3"
on = "L3"
quantity = "width"
panel = { half_width = "0.4 mil", dist = "uniform" }
shape = { kind = "tilt", along = "y", end_to_end = "0.5 mil" }
site_sigma = "0.1 mil"

[[variation]]
name = "etched width L4"
on = "L4"
quantity = "width"
panel = { half_width = "0.4 mil", dist = "uniform" }
shape = { kind = "tilt", along = "y", end_to_end = "0.5 mil" }
site_sigma = "0.1 mil"

[[variation]]
name = "etch L3"
on = "L3"
quantity = "etch"
panel = { sigma = "0.08 mil" }

[[variation]]
name = "etch L4"
on = "L4"
quantity = "etch"
panel = { sigma = "0.08 mil" }
`

// processJob returns the job at path with its prepregs named and the
// twelve variation terms appended, written beside it.
func processJob(t testing.TB, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	for _, n := range []string{"P1", "P2"} {
		old := `{ prepreg = "26 mil", er = 3.55 }`
		if !strings.Contains(s, old) {
			t.Fatalf("%s has no %s", path, old)
		}
		s = strings.Replace(s, old, `{ prepreg = "26 mil", er = 3.55, name = "`+n+`" }`, 1)
	}
	p := filepath.Join(filepath.Dir(path), "process-"+filepath.Base(path))
	if err := os.WriteFile(p, []byte(s+variationTerms), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestMapVariation runs map on the same-core demo with twelve variation
// terms: sites.csv gains the drift of each source and term (and they sum
// to the drift), summary.json splits the worst site's drift, and --show
// draws one group or one named term; an unknown term is a usage error.
func TestMapVariation(t *testing.T) {
	dir := t.TempDir()
	src, _ := os.ReadFile("../../samples/same-core.toml")
	base := filepath.Join(dir, "same-core.toml")
	os.WriteFile(base, src, 0o644)
	job := processJob(t, base)
	out := t.TempDir()
	code, stdout, errs := run(t, "map", job, "--accuracy", "1%", "-o", out, "--width", "600")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if !strings.Contains(stdout, "its drift: registration") {
		t.Errorf("the table does not split the worst drift:\n%s", stdout)
	}
	// With process terms the count beside the expected one judges each
	// site at its mean offset and every term at its mean, and says so.
	if !strings.Contains(stdout, "in spec at the mean offset and mean process)") {
		t.Errorf("the headline does not say what the count of sites in spec judges:\n%s", stdout)
	}
	rows := readCSV(t, filepath.Join(out, "sites.csv"))
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	for _, h := range []string{"drift_registration [dB]", "drift_variation [dB]", "sd_variation [dB]", "drift_second_order [dB]", "drift press C2 [dB]", "drift etch L4 [dB]"} {
		if _, ok := col[h]; !ok {
			t.Fatalf("sites.csv has no column %q: %v", h, rows[0])
		}
	}
	num := func(r []string, h string) float64 {
		v, err := strconv.ParseFloat(r[col[h]], 64)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	// Written to 4 decimals: the parts sum to the whole within the
	// rounding of the numbers added, 5e-5 dB each (3 and 14 of them).
	for _, r := range rows[1:] {
		reg, vari := num(r, "drift_registration [dB]"), num(r, "drift_variation [dB]")
		if d := reg + vari - num(r, "drift [dB]"); d > 3*5e-5 || d < -3*5e-5 {
			t.Fatalf("site %s: registration %g + variation %g ≠ drift %g", r[0], reg, vari, num(r, "drift [dB]"))
		}
		terms := num(r, "drift_second_order [dB]")
		for h, i := range col {
			if strings.HasPrefix(h, "drift ") && h != "drift [dB]" {
				v, _ := strconv.ParseFloat(r[i], 64)
				terms += v
			}
		}
		if d := terms - vari; d > 14*5e-5 || d < -14*5e-5 {
			t.Fatalf("site %s: the terms and the second-order part sum to %g, the variation drift is %g", r[0], terms, vari)
		}
	}
	b, _ := os.ReadFile(filepath.Join(out, "summary.json"))
	var sum struct {
		Worst []struct {
			DriftDB float64 `json:"drift_db"`
			Sources *struct {
				Registration float64 `json:"registration_db"`
				Variation    float64 `json:"variation_db"`
				Terms        []struct{ Name string }
			} `json:"drift_sources"`
		}
	}
	if err := json.Unmarshal(b, &sum); err != nil || len(sum.Worst) == 0 || sum.Worst[0].Sources == nil || len(sum.Worst[0].Sources.Terms) != 12 {
		t.Fatalf("summary.json worst sites: %s (%v)", b, err)
	}
	for _, show := range []string{"registration", "variation", "term:press P1"} {
		if code, _, errs := run(t, "map", job, "--accuracy", "1%", "-o", t.TempDir(), "--width", "600", "--show", show); code != 0 {
			t.Errorf("--show %s: exit %d: %s", show, code, errs)
		}
	}
	if code, _, errs := run(t, "map", job, "--accuracy", "1%", "-o", t.TempDir(), "--show", "term:no such term"); code != 2 || !strings.Contains(errs, "no such term") {
		t.Errorf("--show term:no such term: exit %d: %s", code, errs)
	}
}

// BenchmarkMap10kVariation is BenchmarkMap10k with the twelve variation
// terms: curves and sensitivities cached. As written two of them have a
// uniform panel part, which the closed form takes exactly as a box
// (uniform); the same job with those two parts normal of the same
// variance shows what the exact box costs (normal).
func BenchmarkMap10kVariation(b *testing.B) {
	uniform := processJob(b, bigJob(b))
	src, err := os.ReadFile(uniform)
	if err != nil {
		b.Fatal(err)
	}
	const box = `panel = { half_width = "0.4 mil", dist = "uniform" }`
	if strings.Count(string(src), box) != 2 {
		b.Fatal("the variation terms no longer hold the two uniform panel parts")
	}
	normal := filepath.Join(filepath.Dir(uniform), "normal-"+filepath.Base(uniform))
	// σ = 0.4 mil/√3, the uniform's own standard deviation.
	if err := os.WriteFile(normal, []byte(strings.ReplaceAll(string(src), box, `panel = { sigma = "0.23094 mil" }`)), 0o644); err != nil {
		b.Fatal(err)
	}
	for _, c := range []struct{ name, job string }{{"uniform", uniform}, {"normal", normal}} {
		b.Run(c.name, func(b *testing.B) { benchMap(b, c.job) })
	}
}

// BenchmarkYieldVariation times "regdrift yield" on the same-core demo
// (1,456 sites) with the twelve variation terms and 1,000 panels, curves
// cached: closed form, Monte Carlo, coupling budget and figures.
func BenchmarkYieldVariation(b *testing.B) {
	dir := b.TempDir()
	src, err := os.ReadFile("../../samples/same-core.toml")
	if err != nil {
		b.Fatal(err)
	}
	base := filepath.Join(dir, "same-core.toml")
	if err := os.WriteFile(base, src, 0o644); err != nil {
		b.Fatal(err)
	}
	job := processJob(b, base)
	benchCommand(b, "yield", job, "-o", b.TempDir(), "--trials", "1000", "--cache-dir", b.TempDir())
}

// TestMapIdleVariationTerms: a process file shared by several jobs names
// etched widths and a mask coat that this job lacks (no trace on L1, no
// mask on a stripline): the terms load, move nothing, and map says so in
// one warning line naming them all.
func TestMapIdleVariationTerms(t *testing.T) {
	dir := t.TempDir()
	src, _ := os.ReadFile("../../samples/same-core.toml")
	job := filepath.Join(dir, "job.toml")
	idle := `
[[variation]]
name = "L1 etch"
on = "L1"
quantity = "width"
panel = { sigma = "0.2 mil" }

[[variation]]
name = "mask coat"
on = "mask"
quantity = "mask"
panel = { sigma = "0.1 mil" }
`
	if err := os.WriteFile(job, append(src, idle...), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, errs := run(t, "map", job, "--accuracy", "1%", "-o", t.TempDir(), "--width", "600")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if n := strings.Count(errs, "move nothing of any section used"); n != 1 || !strings.Contains(errs, `"L1 etch" on L1, "mask coat" on mask`) {
		t.Errorf("want one warning naming both idle terms, got:\n%s", errs)
	}
}
