package job

import (
	"math"
	"strconv"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/samples"
)

// withTopCopper returns the demo job with its top copper layer L1 written as line.
func withTopCopper(t *testing.T, line string) []byte {
	t.Helper()
	data, err := samples.FS.ReadFile("same-core.toml")
	if err != nil {
		t.Fatal(err)
	}
	old := `{ copper = "L1", thickness = "1.9 mil" }`
	if !strings.Contains(string(data), old) {
		t.Fatal("the demo job no longer has the L1 line this test edits")
	}
	return []byte(strings.Replace(string(data), old, line, 1))
}

func topCopper(t *testing.T, line string) section.Layer {
	t.Helper()
	j, err := Parse(withTopCopper(t, line), "job.toml", ".")
	if err != nil {
		t.Fatal(err)
	}
	return j.Stackup.Layers[0]
}

// TestFoilAndPlating checks that a copper layer given as foil plus plating
// loads to the foil, each step and their exact sum, in oz and in lengths,
// and that writing the loaded values back as lengths reads the same layer.
//
// Reference values (published, exact by definition): 1 oz = 28.349523125 g,
// 1 ft = 0.3048 m, 1 mil = 2.54e-5 m (NIST Special Publication 811, 2008
// edition, appendix B.9, "Length", "Mass" and "Mass divided by area");
// copper 8.96 g/cm³ (CRC Handbook of Chemistry and Physics, "Physical
// constants of inorganic compounds", copper; published). 1 oz/ft² of copper
// is then 28.349523125e-3 / 0.3048² / 8960 m = 34.057 µm = 1.3408 mil.
func TestFoilAndPlating(t *testing.T) {
	const mil = 2.54e-5
	oz := 28.349523125e-3 / (0.3048 * 0.3048) / 8960
	if math.Abs(oz-34.057e-6) > 0.0005e-6 {
		t.Fatalf("1 oz/ft² of copper = %.4g µm, want 34.057 µm", oz*1e6)
	}
	// Tolerance: the conversions are a product of exact decimal factors,
	// each rounded once to float64, so a few ulps (4 × 2.2e-16 relative).
	const rel = 4 * 2.2e-16
	near := func(got, want float64) bool { return math.Abs(got-want) <= rel*math.Abs(want) }

	tests := []struct {
		name, line string
		foil       float64
		plating    []float64
	}{
		{"oz", `{ copper = "L1", foil = "0.5 oz", plating = ["1.0 mil", "0.3 mil"] }`, 0.5 * oz, []float64{1.0 * mil, 0.3 * mil}},
		{"oz no space", `{ copper = "L1", foil = "1oz" }`, oz, nil},
		{"lengths", `{ copper = "L1", foil = "17.5 um", plating = ["25 um", "7.5 um"] }`, 17.5e-6, []float64{25e-6, 7.5e-6}},
		{"mm", `{ copper = "L1", foil = "0.018 mm", plating = ["0.025 mm"] }`, 18e-6, []float64{25e-6}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			l := topCopper(t, tt.line)
			if !near(l.Foil, tt.foil) || len(l.Plating) != len(tt.plating) {
				t.Fatalf("foil %g m, plating %v; want %g m, %v", l.Foil, l.Plating, tt.foil, tt.plating)
			}
			sum := l.Foil
			for k, p := range l.Plating {
				if !near(p, tt.plating[k]) {
					t.Errorf("plating[%d] = %g m, want %g m", k, p, tt.plating[k])
				}
				sum += p
			}
			// The finished thickness is the sum of the loaded parts, exactly.
			if l.Thickness != sum {
				t.Errorf("finished thickness %g m, want the sum %g m exactly", l.Thickness, sum)
			}
			// Round trip: the loaded values written back as lengths in
			// metres (shortest exact decimal) load to the same layer.
			steps := make([]string, len(l.Plating))
			for k, p := range l.Plating {
				steps[k] = strconv.Quote(strconv.FormatFloat(p, 'g', -1, 64) + " m")
			}
			line := `{ copper = "L1", foil = "` + strconv.FormatFloat(l.Foil, 'g', -1, 64) + ` m", plating = [` + strings.Join(steps, ", ") + `] }`
			back := topCopper(t, line)
			if back.Foil != l.Foil || back.Thickness != l.Thickness || len(back.Plating) != len(l.Plating) {
				t.Fatalf("round trip %s: got %+v, want %+v", line, back, l)
			}
			for k := range l.Plating {
				if back.Plating[k] != l.Plating[k] {
					t.Errorf("round trip plating[%d] = %g, want %g", k, back.Plating[k], l.Plating[k])
				}
			}
		})
	}
}

// TestMaskLoads checks that a mask over an edge-coupled microstrip loads
// with its three values.
func TestMaskLoads(t *testing.T) {
	data := []byte(`title = "mask"
[panel]
size   = ["18 in", "24 in"]
border = "0.8 in"
datum  = ["0 in", "0 in"]

[stackup]
layers = [
  { copper = "L1", foil = "0.5 oz", plating = ["1.0 mil"] },
  { core = "10 mil", er = 3.48, name = "K1" },
  { copper = "L2", thickness = "1.4 mil" },
]
mask = { thickness = "0.8 mil", over_copper = "0.5 mil", er = 3.8 }

[[section]]
name   = "edge"
traces = [
  { layer = "L1", width = "20 mil", etch = "0.5 mil", x = "-15 mil" },
  { layer = "L1", width = "20 mil", etch = "0.5 mil", x = "15 mil" },
]
grounds   = ["L2"]
frequency = "2 GHz"
length    = "quarter-wave"
z_ref     = "50 ohm"
spec      = { coupling = "-20 dB", tolerance = "1 dB" }

[[part]]
name     = "module"
size     = ["0.55 in", "0.80 in"]
couplers = [{ name = "E1", section = "edge", at = ["0.2 in", "0.4 in"] }]

[[array]]
part   = "module"
count  = [2, 2]
pitch  = ["0.58 in", "0.85 in"]
center = ["0 in", "0 in"]
`)
	j, err := Parse(data, "mask.toml", ".")
	if err != nil {
		t.Fatal(err)
	}
	const mil = 2.54e-5
	m := j.Sections[0].Stackup.Mask
	if m == nil || math.Abs(m.OverLaminate-0.8*mil) > 1e-15 || math.Abs(m.OverCopper-0.5*mil) > 1e-15 || m.Er != 3.8 {
		t.Fatalf("mask %+v, want 0.8 mil, 0.5 mil, er 3.8", m)
	}
	if j.Stackup.Layers[1].Name != "K1" {
		t.Errorf("dielectric name %q, want K1", j.Stackup.Layers[1].Name)
	}
}
