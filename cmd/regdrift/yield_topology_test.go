package main

import (
	"encoding/json"
	"testing"

	"github.com/regdrift/regdrift/registration/drift"
)

// TestYieldTopologyVariants compares the three builds of the topology
// sample (variation terms in a shared process file) as variants: each
// variant names the term of the largest share of its coupling variance,
// and it is the first row of the coupling budget that yield of that job
// alone reports (one budget).
func TestYieldTopologyVariants(t *testing.T) {
	jobs := []string{"../../samples/topology-one-core.toml", "../../samples/topology-two-core.toml", "../../samples/topology-microstrip.toml"}
	args := append([]string{"yield"}, jobs...)
	code, out, errs := run(t, append(args, "--closed-form", "--json", "--accuracy", "1%", "-o", t.TempDir())...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var cmp drift.VariantComparison
	if err := json.Unmarshal([]byte(out), &cmp); err != nil {
		t.Fatalf("JSON: %v\n%s", err, out)
	}
	if len(cmp.Variants) != 3 {
		t.Fatalf("%d variants", len(cmp.Variants))
	}
	for k, job := range jobs {
		v := cmp.Variants[k]
		if v.Dominant == nil {
			t.Errorf("%s: no dominant term", v.Name)
			continue
		}
		code, out, errs := run(t, "yield", job, "--json", "--accuracy", "1%", "--trials", "100", "-o", t.TempDir())
		if code != 0 {
			t.Fatalf("%s: exit %d: %s", job, code, errs)
		}
		var sum drift.YieldSummary
		if err := json.Unmarshal([]byte(out), &sum); err != nil {
			t.Fatal(err)
		}
		if sum.CouplingBudget == nil || len(sum.CouplingBudget.Panel) == 0 {
			t.Fatalf("%s: no coupling budget", job)
		}
		if got, want := *v.Dominant, sum.CouplingBudget.Panel[0]; got != want {
			t.Errorf("%s: dominant %+v, the job's budget %+v", v.Name, got, want)
		}
		t.Logf("%s: %s %.1f %%", v.Name, v.Dominant.Name, 100*v.Dominant.Share)
	}
}
