package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// mixedJob is a panel of 3 dB hybrids (a wide window in offset, a small
// margin in dB) beside 20 dB offset couplers (a narrow window in offset, a
// large margin in dB): ranked by margin at the mean offset, the hybrids near
// the centre came first although every 20 dB coupler is less likely in spec.
const mixedJob = "testdata/mixed.toml"

// csvTable is a CSV file read with its header, cells found by column name.
type csvTable struct {
	t    *testing.T
	col  map[string]int
	rows [][]string
}

func readTable(t *testing.T, path string) csvTable {
	t.Helper()
	recs := readCSV(t, path)
	tb := csvTable{t: t, col: map[string]int{}, rows: recs[1:]}
	for i, h := range recs[0] {
		tb.col[h] = i
	}
	return tb
}

func (tb csvTable) str(r int, name string) string {
	c, ok := tb.col[name]
	if !ok {
		tb.t.Fatalf("no column %q", name)
	}
	return tb.rows[r][c]
}

func (tb csvTable) num(r int, name string) float64 {
	v, err := strconv.ParseFloat(tb.str(r, name), 64)
	if err != nil {
		tb.t.Fatalf("row %d %s: %v", r+2, name, err)
	}
	return v
}

// normalInterval is the probability that a normal variable of mean mu and
// standard deviation sd lies in [lo, hi]: Φ((hi−μ)/σ) − Φ((lo−μ)/σ), with
// Φ(z) = (1 + erf(z/√2))/2 (Abramowitz and Stegun, Handbook of Mathematical
// Functions, 26.2.29), from the standard library's math.Erf.
func normalInterval(mu, sd, lo, hi float64) float64 {
	phi := func(z float64) float64 { return 0.5 * (1 + math.Erf(z/math.Sqrt2)) }
	return phi((hi-mu)/sd) - phi((lo-mu)/sd)
}

// TestMapWorstAreLeastLikely: on the mixed panel the ten ringed worst sites
// are the ten lowest-probability sites of yield.csv (the same evaluator),
// each site's probability in sites.csv is the normal probability of its
// allowed interval, and the headline's expected count is their sum.
func TestMapWorstAreLeastLikely(t *testing.T) {
	dir := t.TempDir()
	code, stdout, stderr := run(t, "map", mixedJob, "-o", dir, "--width", "600", "--json")
	if code != 0 {
		t.Fatalf("map: exit %d: %s", code, stderr)
	}
	var sum struct {
		Sites          int     `json:"sites"`
		InSpec         int     `json:"in_spec"`
		ExpectedInSpec float64 `json:"expected_in_spec"`
		Sections       []struct {
			Name           string  `json:"name"`
			ExpectedInSpec float64 `json:"expected_in_spec"`
			LowestPInSpec  float64 `json:"lowest_p_in_spec"`
		} `json:"sections"`
		Worst []struct {
			Name    string  `json:"name"`
			Section string  `json:"section"`
			PInSpec float64 `json:"p_in_spec"`
		} `json:"worst"`
		Notes []string `json:"notes"`
	}
	if err := json.Unmarshal([]byte(stdout), &sum); err != nil {
		t.Fatalf("%v: %s", err, stdout)
	}
	ydir := t.TempDir()
	if code, _, stderr := run(t, "yield", mixedJob, "-o", ydir, "--trials", "200"); code != 0 {
		t.Fatalf("yield: exit %d: %s", code, stderr)
	}
	sites := readTable(t, filepath.Join(dir, "sites.csv"))
	yld := readTable(t, filepath.Join(ydir, "yield.csv"))
	if len(sites.rows) != sum.Sites || len(yld.rows) != sum.Sites {
		t.Fatalf("sites.csv %d rows, yield.csv %d, summary %d sites", len(sites.rows), len(yld.rows), sum.Sites)
	}
	// sites.csv and yield.csv print P to 6 decimals and offsets to 4
	// (5e-5 mil); the normal probability of rounded offsets moves by at most
	// the density (≤ 0.4/σ) times that rounding, well under pTol for σ
	// above 0.1 mil.
	const pTol = 2e-6 + 0.4*5e-5/0.1*3
	type site struct {
		name  string
		p     float64
		drift float64
	}
	var all []site
	var expected float64
	inSpec := 0
	for r := range sites.rows {
		name := sites.str(r, "site")
		if yld.str(r, "name") != name {
			t.Fatalf("row %d: sites.csv %s, yield.csv %s", r+2, name, yld.str(r, "name"))
		}
		p := sites.num(r, "p_in_spec")
		if pc := yld.num(r, "p_closed"); math.Abs(p-pc) > 1e-6 {
			t.Errorf("%s: map P %.6f, yield p_closed %.6f", name, p, pc)
		}
		want := normalInterval(yld.num(r, "offset_mean [mil]"), yld.num(r, "offset_sd [mil]"),
			yld.num(r, "allowed_low [mil]"), yld.num(r, "allowed_high [mil]"))
		if math.Abs(p-want) > pTol {
			t.Errorf("%s: P %.6f, normal probability of its allowed interval %.6f", name, p, want)
		}
		if sites.str(r, "in_spec") == "true" {
			inSpec++
		}
		expected += p
		all = append(all, site{name, p, math.Abs(sites.num(r, "drift [dB]"))})
	}
	slices.SortStableFunc(all, func(a, b site) int {
		if a.p != b.p {
			if a.p < b.p {
				return -1
			}
			return 1
		}
		if a.drift > b.drift {
			return -1
		} else if a.drift < b.drift {
			return 1
		}
		return 0
	})
	if len(sum.Worst) != 10 {
		t.Fatalf("%d worst sites, want 10", len(sum.Worst))
	}
	for k, w := range sum.Worst {
		if w.Name != all[k].name {
			t.Errorf("worst %d: %s (P %.6f), the %d-th least likely site is %s (P %.6f)", k+1, w.Name, w.PInSpec, k+1, all[k].name, all[k].p)
		}
		if w.Section != "dc20" {
			t.Errorf("worst %d: %s is a %s; every 20 dB coupler is less likely in spec than any hybrid", k+1, w.Name, w.Section)
		}
	}
	// The case the ranking is for: every site's mean is in spec, yet some
	// are in spec with a probability under 90 %.
	if inSpec != sum.Sites || sum.InSpec != sum.Sites || all[0].p > 0.9 {
		t.Errorf("fixture: %d of %d means in spec (summary %d), lowest P %.4f; want all in spec and P below 0.9", inSpec, sum.Sites, sum.InSpec, all[0].p)
	}
	if math.Abs(sum.ExpectedInSpec-expected) > float64(sum.Sites)*1e-6 {
		t.Errorf("expected in spec %.6f, the sum of sites.csv P %.6f", sum.ExpectedInSpec, expected)
	}
	var secSum float64
	for _, s := range sum.Sections {
		secSum += s.ExpectedInSpec
	}
	if math.Abs(secSum-sum.ExpectedInSpec) > 1e-9 {
		t.Errorf("sections' expected in spec add up to %.9f, the panel's is %.9f", secSum, sum.ExpectedInSpec)
	}
	if len(sum.Notes) == 0 || !strings.Contains(strings.Join(sum.Notes, " "), "design offset") {
		t.Errorf("summary.json does not say whether its offsets include the design offset: %q", sum.Notes)
	}
	// The table says the same.
	code, table, _ := run(t, "map", mixedJob, "-o", t.TempDir(), "--width", "600")
	if code != 0 {
		t.Fatal("map table run failed")
	}
	head := "expected in spec " + strconv.FormatFloat(expected, 'f', 1, 64) + " of " + strconv.Itoa(sum.Sites)
	if !strings.Contains(table, head) || !strings.Contains(table, "worst site: "+sum.Worst[0].Name+" (dc20)") ||
		!strings.Contains(table, "worst offset from design") {
		t.Errorf("table lacks %q, the worst site %s or the offset label:\n%s", head, sum.Worst[0].Name, table)
	}
}

// TestMapStrict: --strict exits 3 when some site is less likely in spec
// than --strict-p (0.9973 by default, mean ± 3σ of a normal variable), 0
// when every site clears the threshold, and 2 for a threshold that is not a
// probability.
func TestMapStrict(t *testing.T) {
	for _, c := range []struct {
		name string
		args []string
		code int
	}{
		{"default threshold", nil, 3},
		{"below the lowest P", []string{"--strict-p", "0.85"}, 0},
		{"above the lowest P", []string{"--strict-p", "0.9"}, 3},
		{"not a probability", []string{"--strict-p", "1.5"}, 2},
		{"zero", []string{"--strict-p", "0"}, 2},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "out")
			args := append([]string{"map", mixedJob, "-o", dir, "--width", "400", "--strict"}, c.args...)
			code, _, stderr := run(t, args...)
			if code != c.code {
				t.Fatalf("exit %d, want %d: %s", code, c.code, stderr)
			}
			if c.code == 3 && !strings.Contains(stderr, "below") {
				t.Errorf("stderr does not name the threshold: %s", stderr)
			}
			if _, err := os.Stat(dir); c.code == 2 && err == nil {
				t.Errorf("a usage error left %s behind", dir)
			}
		})
	}
	// The same-core hybrids of small.toml are all in spec with P ≈ 1.
	if code, _, stderr := run(t, "map", "testdata/small.toml", "-o", t.TempDir(), "--width", "400", "--strict"); code != 0 {
		t.Errorf("small.toml --strict: exit %d: %s", code, stderr)
	}
}
