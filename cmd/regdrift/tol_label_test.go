package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel/unit"
)

// edgeSection is an edge-coupled stripline pair: two 8 mil traces on L3,
// 14 mil apart centre to centre (a 6 mil gap), inserted into the mixed job.
const edgeSection = `[[section]]
name      = "edge"
traces    = [
  { layer = "L3", width = "8 mil", etch = "0.6 mil", x = "-7 mil" },
  { layer = "L3", width = "8 mil", etch = "0.6 mil", x = "7 mil" },
]
grounds   = ["L2", "L5"]
frequency = "2.45 GHz"
length    = "quarter-wave"
spec      = { coupling = "-9.5 dB", tolerance = "0.5 dB" }

`

// TestTolSameLayerIsSpacing: for two traces on one layer the tolerance is
// on their spacing (the gap), which registration cannot move; tol says so
// in the table and the JSON instead of calling it the offset of an upper
// trace, and a broadside pair stays a registration tolerance.
func TestTolSameLayerIsSpacing(t *testing.T) {
	src, err := os.ReadFile(mixedJob)
	if err != nil {
		t.Fatal(err)
	}
	s := string(src)
	i := strings.Index(s, "[[part]]")
	job := filepath.Join(t.TempDir(), "edge.toml")
	if err := os.WriteFile(job, []byte(s[:i]+edgeSection+s[i:]), 0o644); err != nil {
		t.Fatal(err)
	}
	code, table, stderr := run(t, "tol", job, "-o", t.TempDir())
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	edge := table[strings.Index(table, "section edge"):]
	for _, want := range []string{"both traces are on L3", "not a registration tolerance", "spacing 14.000 ±", "gap 6.000 ±"} {
		if !strings.Contains(edge, want) {
			t.Errorf("edge section's table lacks %q:\n%s", want, edge)
		}
	}
	if strings.Contains(edge[:strings.Index(edge, "\n\n")], "drawing tolerance: design offset") {
		t.Errorf("edge section still reads as a registration tolerance:\n%s", edge)
	}
	code, out, stderr := run(t, "tol", job, "-o", t.TempDir(), "--json")
	if code != 0 {
		t.Fatalf("--json: exit %d: %s", code, stderr)
	}
	var r struct {
		Sections []struct {
			Name     string   `json:"name"`
			OffsetIs string   `json:"offset_is"`
			GapM     *float64 `json:"gap_m"`
		} `json:"sections"`
	}
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	for _, sec := range r.Sections {
		switch sec.Name {
		case "edge":
			// The gap between the feet: spacing 14 mil less the 8 mil width
			// (calculated here from the section above).
			if sec.OffsetIs != "spacing" || sec.GapM == nil || math.Abs(*sec.GapM-6*unit.Mil) > 1e-12 {
				t.Errorf("edge: offset_is %q, gap %v; want spacing and 6 mil", sec.OffsetIs, sec.GapM)
			}
		default:
			if sec.OffsetIs != "registration" || sec.GapM != nil {
				t.Errorf("%s: offset_is %q, gap %v; want registration and no gap", sec.Name, sec.OffsetIs, sec.GapM)
			}
		}
	}
}
