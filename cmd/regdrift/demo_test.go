package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestDemo runs the embedded demo end to end and checks what it is there to
// show: every output is written, and the hybrids on two cores drift more than
// the same hybrids on the two faces of one core (common practice: a shared
// core's movement cancels between its faces).
func TestDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("runs every command on three jobs")
	}
	dir := t.TempDir()
	code, stdout, stderr := run(t, "demo", "-o", dir, "--width", "600")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	for _, f := range []string{
		"same-core/map.png", "same-core/sweep.png", "same-core/yield.png", "same-core/sites.csv",
		"two-core/map.png", "two-core/fit/fit.png", "two-core/fit/measured.toml", "two-core/comp/comp.png",
		"offset-coupler/map.png", "offset-coupler/parts.png", "offset-coupler/budget.png",
		"samples/same-core.toml", "samples/twocore-targets.csv",
		"topology-one-core/map.png", "topology-two-core/budget.png", "topology-microstrip/yield.png",
		"topology-microstrip/budget.csv", "topology-foil/sweep-foil.png", "topology-foil/sweep-finished.csv",
		"samples/topology-process.inc.toml",
	} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Errorf("demo did not write %s", f)
		}
	}
	if n := strings.Count(stdout, "  map "); n != 3 {
		t.Errorf("%d map lines in\n%s", n, stdout)
	}
	// The topology comparison prints one line per build, and the foil
	// study shows that a spacing drawn with the base foil as the trace
	// height misses the spec (common practice: the finished trace height
	// includes the plating).
	for _, b := range []string{"broadside, one core", "broadside, two cores", "edge-coupled microstrip", "most parts in spec:", "drawn from the foil sweep"} {
		if !strings.Contains(stdout, b) {
			t.Errorf("no %q in\n%s", b, stdout)
		}
	}
	foilMiss(t, stdout)
	// The shared core's movement cancels between its faces: the two-core
	// build's largest offset and its largest drift are both well above the
	// same-core build's.
	largest := func(name string) (offset, drift float64) {
		b, err := os.ReadFile(filepath.Join(dir, name, "summary.json"))
		if err != nil {
			t.Fatal(err)
		}
		var s struct {
			Drift struct{ Min, Max float64 } `json:"drift_db"`
			Off   struct{ Min, Max float64 } `json:"offset_m"`
		}
		if err := json.Unmarshal(b, &s); err != nil {
			t.Fatal(err)
		}
		return math.Max(math.Abs(s.Off.Min), math.Abs(s.Off.Max)), math.Max(math.Abs(s.Drift.Min), math.Abs(s.Drift.Max))
	}
	oa, da := largest("same-core")
	ob, db := largest("two-core")
	if !(ob > 2*oa) {
		t.Errorf("largest offset: same core %.3g m, two cores %.3g m; want the two-core build well above", oa, ob)
	}
	if !(db > 2*da) {
		t.Errorf("largest drift: same core %.3g dB, two cores %.3g dB; want the two-core build well above", da, db)
	}
}

// foilMiss checks the demo's foil line: the finished part drawn from the
// foil sweep is off the nominal coupling by more than the 0.5 dB spec
// tolerance of samples/topology-microstrip.toml.
func foilMiss(t *testing.T, stdout string) {
	t.Helper()
	i := strings.Index(stdout, "drawn from the foil sweep")
	if i < 0 {
		return
	}
	line := stdout[i:]
	line = line[:strings.IndexByte(line, '\n')]
	var off float64
	j := strings.Index(line, "dB (")
	if j < 0 {
		t.Fatalf("foil line %q", line)
	}
	if _, err := fmt.Sscanf(line[j+len("dB ("):], "%g", &off); err != nil {
		t.Fatalf("foil line %q: %v", line, err)
	}
	if math.Abs(off) <= 0.5 {
		t.Errorf("the foil-drawn part misses by %+.3f dB, within the 0.5 dB tolerance: %q", off, line)
	}
}
