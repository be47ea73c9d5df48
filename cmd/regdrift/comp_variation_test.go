package main

import (
	"encoding/json"
	"math"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/registration/drift"
)

// TestCompWithVariation runs comp on the topology sample broadside across
// two cores, whose process file carries variation terms beside the
// registration contributors: the compensation runs, says the variation
// terms are not compensable, predicts a site yield after at least that of
// keeping the artwork, and its yield before is the closed-form site yield
// of `yield` on the same job (one evaluator, process terms included).
func TestCompWithVariation(t *testing.T) {
	job := "../../samples/topology-two-core.toml"
	code, out, errs := run(t, "comp", job, "-o", t.TempDir(), "--json", "--accuracy", "1%")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var s drift.CompSummary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatalf("JSON: %v\n%s", err, out)
	}
	note := false
	for _, n := range s.Notes {
		note = note || strings.Contains(n, "artwork scale does not compensate")
	}
	if !note {
		t.Errorf("no note on the variation terms in %q", s.Notes)
	}
	if s.After.SiteYield < s.Before.SiteYield {
		t.Errorf("site yield %.5f after compensation, %.5f keeping the artwork", s.After.SiteYield, s.Before.SiteYield)
	}
	code, out, errs = run(t, "yield", job, "-o", t.TempDir(), "--json", "--accuracy", "1%", "--trials", "200")
	if code != 0 {
		t.Fatalf("yield: exit %d: %s", code, errs)
	}
	var y struct {
		Closed float64 `json:"site_yield_mean_closed"`
	}
	if err := json.Unmarshal([]byte(out), &y); err != nil {
		t.Fatal(err)
	}
	// The same sites, terms and curve: equal but for the order of a sum.
	if math.Abs(y.Closed-s.Before.SiteYield) > 1e-12 {
		t.Errorf("comp's yield before %.12f, yield's closed form %.12f", s.Before.SiteYield, y.Closed)
	}
	t.Logf("site yield %.4f -> %.4f (yield's closed form %.4f)", s.Before.SiteYield, s.After.SiteYield, y.Closed)
}
