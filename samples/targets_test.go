package samples

import (
	"bytes"
	"flag"
	"math"
	"os"
	"slices"
	"testing"

	"github.com/regdrift/regdrift/registration"
)

var update = flag.Bool("update", false, "rewrite twocore-targets.csv from samples.TwoCoreLot")

// TestTwoCoreTargetsFile regenerates the demo measurement set and compares it
// byte for byte with the committed file (go test -update rewrites it).
func TestTwoCoreTargetsFile(t *testing.T) {
	var b bytes.Buffer
	if err := TwoCoreLot().Write(&b); err != nil {
		t.Fatal(err)
	}
	const name = "twocore-targets.csv"
	if *update {
		if err := os.WriteFile(name, b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	got, err := os.ReadFile(name)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, b.Bytes()) {
		os.WriteFile(name+".new", b.Bytes(), 0o644)
		t.Fatalf("%s differs from samples.TwoCoreLot().Write (wrote %s.new; run go test -update if the change is intended)", name, name)
	}
}

// TestTwoCoreTargetsFit checks that the invented set is what its generator
// says: 9 to 25 targets per panel and layer, a robust fit flags exactly the
// planted misreads, and the lot means lie within a few standard errors of
// the generator's means (the spread of five panels, SD/√5).
func TestTwoCoreTargetsFit(t *testing.T) {
	var b bytes.Buffer
	lot := TwoCoreLot()
	if err := lot.Write(&b); err != nil {
		t.Fatal(err)
	}
	ts, err := registration.ReadTargets(&b, "twocore-targets.csv")
	if err != nil {
		t.Fatal(err)
	}
	fits, err := registration.FitAll(ts, &registration.FitSettings{Robust: registration.Tukey})
	if err != nil {
		t.Fatal(err)
	}
	var flagged []string
	for _, f := range fits {
		if f.N < 9 || f.N > 25 {
			t.Errorf("panel %s layer %s: %d targets", f.Panel, f.Layer, f.N)
		}
		for _, o := range f.Outliers {
			flagged = append(flagged, f.Panel+"/"+f.Layer+"/"+o)
		}
	}
	var want []string
	for _, m := range lot.Misses {
		want = append(want, m.Panel+"/"+m.Layer+"/"+m.Target)
	}
	slices.Sort(flagged)
	slices.Sort(want)
	if !slices.Equal(flagged, want) {
		t.Errorf("outliers %v, want %v", flagged, want)
	}
	for i, l := range registration.LotStats(fits) {
		g := lot.Layers[i]
		for k := range l.Mean {
			se := g.SD[k] / math.Sqrt(float64(lot.Panels))
			if math.Abs(l.Mean[k]-g.Mean[k]) > 3.5*se {
				t.Errorf("%s %s: lot mean %g, generator %g ± %g", l.Layer, registration.TermKind(k), l.Mean[k], g.Mean[k], se)
			}
		}
	}
}
