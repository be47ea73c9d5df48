package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/registration/drift"
)

// variantBase is yieldJob without its array, plus a coupon strip part: the
// base that thin variant files include.
func variantBase(t testing.TB) string {
	t.Helper()
	a, c := strings.Index(yieldJob, "[[array]]"), strings.Index(yieldJob, "[[contributor]]")
	if a < 0 || c < a {
		t.Fatal("yieldJob has no [[array]] before its [[contributor]]")
	}
	return yieldJob[:a] + `[[part]]
name     = "strip"
size     = ["8 in", "0.4 in"]
couplers = [
  { name = "T1", section = "hybrid", at = ["1 in", "0.2 in"], angle = "90 deg" },
  { name = "T2", section = "hybrid", at = ["4 in", "0.2 in"], angle = "0 deg" },
  { name = "T3", section = "hybrid", at = ["7 in", "0.2 in"], angle = "90 deg" },
]

` + yieldJob[c:]
}

// Thin variants of variantBase: A keeps yieldJob's one array; B splits it
// into a left half as placed and a right half turned a quarter turn, and
// adds a coupon strip below them.
const (
	variantA = `include = ["base.toml"]

[[array]]
name   = "main"
part   = "module"
count  = [8, 12]
pitch  = ["1.3 in", "1.3 in"]
`
	variantB = `include = ["base.toml"]

[[array]]
name   = "left"
part   = "module"
count  = [4, 12]
pitch  = ["1.3 in", "1.3 in"]
center = ["-2.6 in", "0.4 in"]

[[array]]
name   = "right"
part   = "module"
count  = [4, 12]
pitch  = ["1.3 in", "1.3 in"]
center = ["2.6 in", "0.4 in"]
rotate = "90 deg"

[[array]]
name    = "coupons"
part    = "strip"
count   = [1, 1]
center  = ["0 in", "-8.1 in"]
product = false
`
)

// writeVariants writes base.toml, A.toml and B.toml into one directory and
// returns the paths of A and B.
func writeVariants(t testing.TB) (string, string) {
	t.Helper()
	dir := t.TempDir()
	for name, text := range map[string]string{"base.toml": variantBase(t), "A.toml": variantA, "B.toml": variantB} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return filepath.Join(dir, "A.toml"), filepath.Join(dir, "B.toml")
}

// TestYieldVariants: the comparison of two thin variants of one base gives,
// per variant and per array, the numbers of separate yield runs of each file
// with the same seed (the same computation, run once per variant), and the
// files it writes.
func TestYieldVariants(t *testing.T) {
	a, b := writeVariants(t)
	dir := t.TempDir()
	code, out, errs := run(t, "yield", a, b, "--accuracy", "1%", "--trials", "2000", "--seed", "7", "-o", dir, "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var cmp drift.VariantComparison
	if err := json.Unmarshal([]byte(out), &cmp); err != nil {
		t.Fatal(err)
	}
	if cmp.Trials != 2000 || cmp.Seed != 7 || len(cmp.Variants) != 2 || cmp.Variants[0].Name != "A" || cmp.Variants[1].Name != "B" {
		t.Fatalf("comparison header %+v", cmp)
	}
	for _, f := range []string{"variants.csv", "variants.json", "variants.png"} {
		if st, err := os.Stat(filepath.Join(dir, f)); err != nil || st.Size() == 0 {
			t.Errorf("%s missing or empty: %v", f, err)
		}
	}
	for k, path := range []string{a, b} {
		code, out, errs := run(t, "yield", path, "--accuracy", "1%", "--trials", "2000", "--seed", "7", "-o", t.TempDir(), "--json")
		if code != 0 {
			t.Fatalf("%s alone: exit %d: %s", path, code, errs)
		}
		var sum drift.YieldSummary
		if err := json.Unmarshal([]byte(out), &sum); err != nil {
			t.Fatal(err)
		}
		v := cmp.Variants[k]
		if v.Sites != sum.Sites || v.Parts != sum.Parts || v.Coupons != sum.Coupons ||
			*v.SiteYieldMean != sum.SiteYieldMean || v.SiteYieldMeanClosed != sum.SiteYieldMeanClosed ||
			*v.PartYieldMean != sum.PartYieldMean || *v.GoodPartsPerPanel != sum.GoodPartsPerPanel {
			t.Errorf("%s: comparison sites %d parts %d coupons %d site yield %v (closed %v) part yield %v good parts %+v; alone %d %d %d %v (%v) %v %+v",
				v.Name, v.Sites, v.Parts, v.Coupons, *v.SiteYieldMean, v.SiteYieldMeanClosed, *v.PartYieldMean, *v.GoodPartsPerPanel,
				sum.Sites, sum.Parts, sum.Coupons, sum.SiteYieldMean, sum.SiteYieldMeanClosed, sum.PartYieldMean, sum.GoodPartsPerPanel)
		}
		if len(v.Arrays) != len(sum.Arrays) {
			t.Fatalf("%s: %d arrays in the comparison, %d alone", v.Name, len(v.Arrays), len(sum.Arrays))
		}
		for i, g := range v.Arrays {
			h := sum.Arrays[i]
			if g.Name != h.Name || g.Sites != h.Sites || *g.SiteYieldMean != *h.SiteYieldMean || *g.PartYieldMean != *h.PartYieldMean ||
				*g.GoodPartsMean != *h.GoodPartsMean || g.PartYieldBounds != h.PartYieldBounds {
				t.Errorf("%s array %s: comparison %s %d %v %v %v %v, alone %s %d %v %v %v %v", v.Name, g.Name,
					g.Name, g.Sites, *g.SiteYieldMean, *g.PartYieldMean, *g.GoodPartsMean, g.PartYieldBounds,
					h.Name, h.Sites, *h.SiteYieldMean, *h.PartYieldMean, *h.GoodPartsMean, h.PartYieldBounds)
			}
		}
	}
	// The table prints the same numbers.
	code, table, errs := run(t, "yield", a, b, "--accuracy", "1%", "--trials", "2000", "--seed", "7", "-o", t.TempDir())
	if code != 0 {
		t.Fatalf("table: exit %d: %s", code, errs)
	}
	for _, want := range []string{"2 placement variants", "left", "right", "coupons, not counted",
		"a turn is recommended when its gain exceeds 0.50 %", "(+1 coupons)"} {
		if !strings.Contains(table, want) {
			t.Errorf("table does not say %q:\n%s", want, table)
		}
	}
}

// TestYieldVariantsClosedForm: without a Monte Carlo the site yields are the
// closed-form ones of a Monte Carlo comparison, and the Monte Carlo part
// yields lie within the closed-form bounds (Fréchet), up to three binomial
// standard errors of the Monte Carlo (about 0.3 % two-sided chance of a
// false alarm per check for a normal estimate).
func TestYieldVariantsClosedForm(t *testing.T) {
	a, b := writeVariants(t)
	code, out, errs := run(t, "yield", a, b, "--accuracy", "1%", "--closed-form", "-o", t.TempDir(), "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var cf drift.VariantComparison
	if err := json.Unmarshal([]byte(out), &cf); err != nil {
		t.Fatal(err)
	}
	const trials = 4000
	code, out, errs = run(t, "yield", a, b, "--accuracy", "1%", "--trials", "4000", "-o", t.TempDir(), "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var mc drift.VariantComparison
	if err := json.Unmarshal([]byte(out), &mc); err != nil {
		t.Fatal(err)
	}
	if cf.Trials != 0 {
		t.Errorf("closed form reports %d trials", cf.Trials)
	}
	for k, v := range cf.Variants {
		m := mc.Variants[k]
		if v.SiteYieldMean != nil || v.PartYieldMean != nil || v.GoodPartsPerPanel != nil {
			t.Errorf("%s: closed form carries Monte Carlo figures %+v", v.Name, v)
		}
		if v.SiteYieldMeanClosed != m.SiteYieldMeanClosed || v.PartYieldBounds != m.PartYieldBounds {
			t.Errorf("%s: closed form %+v, with Monte Carlo %+v", v.Name, v, m)
		}
		check := func(what string, p float64, bounds [2]float64) {
			se := math.Sqrt(p * (1 - p) / trials)
			if !(bounds[0] <= bounds[1]) || p < bounds[0]-3*se || p > bounds[1]+3*se {
				t.Errorf("%s %s: Monte Carlo %.5f (se %.5f) outside the bounds %v", v.Name, what, p, se, bounds)
			}
		}
		check("part yield", *m.PartYieldMean, v.PartYieldBounds)
		for i, g := range v.Arrays {
			check("array "+g.Name, *m.Arrays[i].PartYieldMean, g.PartYieldBounds)
		}
	}
}

// TestYieldCoupons: a product = false array is mapped and reported, but
// counts in no part total: B has 96 products and 1 coupon part; its good
// parts per panel are the sum of its product arrays' expected good parts (an
// identity of expectations that holds exactly for the Monte Carlo counts);
// the coupon strip, the part with the lowest yield on the panel, is not
// among the worst parts.
func TestYieldCoupons(t *testing.T) {
	_, b := writeVariants(t)
	code, out, errs := run(t, "yield", b, "--accuracy", "1%", "--trials", "2000", "-o", t.TempDir(), "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var sum drift.YieldSummary
	if err := json.Unmarshal([]byte(out), &sum); err != nil {
		t.Fatal(err)
	}
	if sum.Parts != 96 || sum.Coupons != 1 || sum.Sites != 195 {
		t.Fatalf("parts %d, coupons %d, sites %d; want 96, 1, 195", sum.Parts, sum.Coupons, sum.Sites)
	}
	var products, coupon float64
	var strip *drift.YieldArray
	for i, g := range sum.Arrays {
		if g.Product {
			products += *g.GoodPartsMean
		} else {
			coupon += *g.GoodPartsMean
			strip = &sum.Arrays[i]
		}
	}
	if strip == nil || strip.Name != "coupons" || strip.Parts != 1 || strip.Sites != 3 {
		t.Fatalf("coupon array %+v", strip)
	}
	// Sums of counts over 2000 panels: equal to rounding of the sums.
	if d := math.Abs(products - sum.GoodPartsPerPanel.Mean); d > 1e-9 {
		t.Errorf("good parts per panel %.6f, products' sum %.6f (coupons %.6f)", sum.GoodPartsPerPanel.Mean, products, coupon)
	}
	if d := math.Abs(sum.PartYieldMean - products/96); d > 1e-12 {
		t.Errorf("part yield %.6f, want good products / 96 = %.6f", sum.PartYieldMean, products/96)
	}
	if sum.GoodPartsPerPanel.Max > 96 {
		t.Errorf("up to %d good parts per panel of 96", sum.GoodPartsPerPanel.Max)
	}
	lowest := true
	for _, g := range sum.Arrays {
		lowest = lowest && *strip.PartYieldMean <= *g.PartYieldMean
	}
	if !lowest {
		t.Fatalf("the coupon strip is not the part of lowest yield: %+v; the check below would prove nothing", sum.Arrays)
	}
	for _, p := range sum.WorstParts {
		if strings.HasPrefix(p.Name, "coupons ") {
			t.Errorf("coupon %s among the worst parts", p.Name)
		}
	}
	if len(sum.WorstParts) == 0 || !strings.HasPrefix(sum.WorstParts[0].Name, "left ") && !strings.HasPrefix(sum.WorstParts[0].Name, "right ") {
		t.Errorf("worst parts %+v: want named arrays in the part names", sum.WorstParts)
	}
}

// TestYieldVariantsUsage: command-line mistakes of a comparison are usage
// errors (exit 2) that leave nothing behind; a bad variant file names itself.
func TestYieldVariantsUsage(t *testing.T) {
	a, b := writeVariants(t)
	broken := filepath.Join(filepath.Dir(a), "broken.toml")
	if err := os.WriteFile(broken, []byte(strings.Replace(variantA, `name   = "main"`, `name   = "main"
product = "no"`, 1)), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tt := range []struct {
		name  string
		args  []string
		words []string
	}{
		{"closed form of one job", []string{a, "--closed-form"}, []string{"--closed-form", "two or more"}},
		{"stdin twice", []string{"-", "-"}, []string{"standard input"}},
		{"turn gain not a percentage", []string{a, b, "--turn-gain", "0.5"}, []string{"--turn-gain"}},
		{"bad variant", []string{a, broken}, []string{"broken.toml", "array[0].product"}},
	} {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			code, _, errs := run(t, append(append([]string{"yield"}, tt.args...), "--accuracy", "1%", "-o", dir)...)
			if code != exitBadInput {
				t.Fatalf("exit %d, want %d: %s", code, exitBadInput, errs)
			}
			for _, w := range tt.words {
				if !strings.Contains(errs, w) {
					t.Errorf("message %q does not say %q", errs, w)
				}
			}
			if ents, _ := os.ReadDir(dir); len(ents) != 0 {
				t.Errorf("a failed run left %d files behind", len(ents))
			}
		})
	}
}
