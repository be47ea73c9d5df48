package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/registration/drift"
)

// smallJob returns testdata/small.toml with the replacements old→new, written
// into dir as job.toml, and its path.
func smallJob(t *testing.T, dir string, repl ...string) string {
	t.Helper()
	src, err := os.ReadFile("testdata/small.toml")
	if err != nil {
		t.Fatal(err)
	}
	s := string(src)
	for i := 0; i+1 < len(repl); i += 2 {
		if !strings.Contains(s, repl[i]) {
			t.Fatalf("small.toml has no %q", repl[i])
		}
		s = strings.Replace(s, repl[i], repl[i+1], 1)
	}
	p := filepath.Join(dir, "job.toml")
	if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestYieldMeanOfAllGoodIsOne: when every site passes on every panel the
// mean site yield is exactly 1. With 40 sites, adding 1/40 forty times in
// floating point gives 1.0000000000000004 (IEEE 754 double rounding,
// checked below), which yield --json used to print.
func TestYieldMeanOfAllGoodIsOne(t *testing.T) {
	const n = 40
	naive := 0.0
	for range n {
		naive += 1.0 / n
	}
	if naive <= 1 {
		t.Fatalf("precondition: adding 1/%d %d times gives %.17g, not above 1; pick another count", n, n, naive)
	}
	dir := t.TempDir()
	job := smallJob(t, dir, `count  = [2, 2]`, `count  = [4, 5]`, `pitch  = ["9 in", "14 in"]`, `pitch  = ["2.5 in", "3 in"]`)
	code, out, stderr := run(t, "yield", job, "-o", filepath.Join(dir, "out"), "--trials", "200", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var s struct {
		Sites               int     `json:"sites"`
		SiteYieldMean       float64 `json:"site_yield_mean"`
		SiteYieldMeanClosed float64 `json:"site_yield_mean_closed"`
		PartYieldMean       float64 `json:"part_yield_mean"`
		Sections            []struct {
			SiteYieldMean float64 `json:"site_yield_mean"`
		} `json:"sections"`
	}
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	if s.Sites != n {
		t.Fatalf("%d sites, want %d", s.Sites, n)
	}
	yc := readTable(t, filepath.Join(dir, "out", "yield.csv"))
	for r := range yc.rows {
		if yc.num(r, "p_mc") != 1 {
			t.Fatalf("fixture: site %s has Monte Carlo yield %s; want every site good", yc.str(r, "name"), yc.str(r, "p_mc"))
		}
	}
	if s.SiteYieldMean != 1 || s.PartYieldMean != 1 || s.Sections[0].SiteYieldMean != 1 {
		t.Errorf("every site good on every panel: site yield %.17g, part yield %.17g, section %.17g; want exactly 1",
			s.SiteYieldMean, s.PartYieldMean, s.Sections[0].SiteYieldMean)
	}
	if s.SiteYieldMeanClosed > 1 || s.SiteYieldMeanClosed < 0 {
		t.Errorf("closed-form mean site yield %.17g outside [0, 1]", s.SiteYieldMeanClosed)
	}
}

// TestYieldNoPartsNoWorstParts: a panel with no parts counted (every site
// of a job belongs to a part today, but a variant of coupon strips alone
// counts none) gets no empty "worst parts:" list and no part yield of 0 %.
func TestYieldNoPartsNoWorstParts(t *testing.T) {
	lu, err := parseUnits("mil")
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	printYield(&b, "no parts", &drift.YieldSummary{Trials: 100, Sites: 2, SiteYieldMean: 1, SiteYieldMeanClosed: 1}, lu, nil)
	out := b.String()
	if strings.Contains(out, "worst parts:") || !strings.Contains(out, "belong to no part") {
		t.Errorf("a summary without parts:\n%s", out)
	}
	b.Reset()
	printYield(&b, "parts", &drift.YieldSummary{Trials: 100, Sites: 2, Parts: 1, PartYieldMean: 1,
		WorstParts: []drift.WorstPart{{Name: "P1", PartYield: 1, WorstSite: "S1", WorstSiteYield: 1}}}, lu, nil)
	if !strings.Contains(b.String(), "worst parts:") || !strings.Contains(b.String(), "P1") {
		t.Errorf("a summary with a part lost its worst parts:\n%s", b.String())
	}
}

// TestYieldBudgetSaysWhatItLeavesOut: the budget table lists the largest
// terms and, when it leaves some out, says how many of how many there are.
func TestYieldBudgetSaysWhatItLeavesOut(t *testing.T) {
	many := `
[[contributor]]
name     = "lamination"
layers   = ["L4"]
offset_x = { sigma = "0.2 mil" }
offset_y = { sigma = "0.2 mil" }
rotation = { sigma = "10 urad" }
scale_x  = { sigma = "10 ppm" }
scale_y  = { sigma = "10 ppm" }
skew     = { sigma = "5 ppm" }
`
	for _, c := range []struct {
		name  string
		extra string
	}{{"few terms", ""}, {"many terms", many}} {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			src, _ := os.ReadFile("testdata/small.toml")
			job := filepath.Join(dir, "job.toml")
			os.WriteFile(job, append(src, c.extra...), 0o644)
			code, out, stderr := run(t, "yield", job, "-o", filepath.Join(dir, "out"), "--trials", "100")
			if code != 0 {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			bc := readTable(t, filepath.Join(dir, "out", "budget.csv"))
			terms := 0
			for r := range bc.rows {
				if bc.str(r, "scope") == "panel" {
					terms++
				}
			}
			m := regexp.MustCompile(`the (\d+) largest of (\d+) terms`).FindStringSubmatch(out)
			switch {
			case terms > budgetRows && (m == nil || m[1] != strconv.Itoa(budgetRows) || m[2] != strconv.Itoa(terms)):
				t.Errorf("budget.csv has %d panel terms, the table shows %d without saying so:\n%s", terms, budgetRows, out)
			case terms <= budgetRows && m != nil:
				t.Errorf("all %d terms shown, yet the table says %q", terms, m[0])
			}
			if c.extra != "" && terms <= budgetRows {
				t.Errorf("fixture: %d panel terms, want more than %d", terms, budgetRows)
			}
		})
	}
}
