package main

import (
	"encoding/json"
	pngdec "image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestSweepSectionPicture checks that sweep writes the cross-section
// picture: section.png for a job of one section, section-NAME.png for a job
// of several (so that sweeps of each into one directory keep every picture),
// with and without the mesh, as a PNG that decodes to the figure's width.
func TestSweepSectionPicture(t *testing.T) {
	for _, tt := range []struct {
		name string
		args []string
		file string
	}{
		{"stripline", []string{"testdata/small.toml", "--offsets", "-2mil:2mil:1mil"}, "section.png"},
		{"stripline mesh", []string{"testdata/small.toml", "--offsets", "-2mil:2mil:1mil", "--mesh"}, "section.png"},
		{"microstrip mask mesh", []string{"testdata/micro-mask.toml", "--section", "edge wide", "--offsets", "33mil:35mil:1mil", "--mesh"}, "section-edge_wide.png"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			code, _, stderr := run(t, append([]string{"sweep", "-o", dir}, tt.args...)...)
			if code != 0 {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			f, err := os.Open(filepath.Join(dir, tt.file))
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			img, err := pngdec.Decode(f)
			if err != nil {
				t.Fatal(err)
			}
			if b := img.Bounds(); b.Dx() != 1800 || b.Dy() < 400 {
				t.Errorf("%s is %v", tt.file, b)
			}
		})
	}
}

// TestSweepSectionBadInput checks that --mesh leaves the bad-input path as
// it was: a bad offset is a usage error, exit 2, and nothing is written.
func TestSweepSectionBadInput(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "out")
	// The traces of the edge-coupled pair touch at a 20 mil offset.
	code, _, stderr := run(t, "sweep", "testdata/micro-mask.toml", "-o", dir, "--offsets", "20mil:22mil:1mil", "--mesh")
	if code != 2 || !strings.Contains(stderr, "--offsets") {
		t.Errorf("exit %d, stderr %q; want 2 naming --offsets", code, stderr)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("left output behind: %v", ents)
	}
}

// TestSweepJSONCopper checks the copper build in sweep --json: the foil of
// 0.5 oz/ft² is 0.5·(28.349523125 g / 0.09290304 m²)/(8.96 g/cm³) (the
// ounce and the foot are exact by definition, NIST SP 811 appendix B; the
// density is the handbook value the package states), the plating steps are
// the job's, and the finished thickness is their sum to rounding.
func TestSweepJSONCopper(t *testing.T) {
	code, stdout, stderr := run(t, "sweep", "testdata/micro-mask.toml", "-o", t.TempDir(), "--offsets", "33mil:35mil:1mil", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var r struct {
		Section string `json:"section"`
		Copper  []struct {
			Layer     string    `json:"layer"`
			FoilM     *float64  `json:"foil_m"`
			PlatingM  []float64 `json:"plating_m"`
			FinishedM float64   `json:"finished_m"`
		} `json:"copper"`
	}
	if err := json.Unmarshal([]byte(stdout), &r); err != nil {
		t.Fatal(err)
	}
	const mil = 25.4e-6
	foil := 0.5 * 28.349523125e-3 / 0.09290304 / 8960
	if len(r.Copper) != 2 || r.Copper[0].Layer != "L1" || r.Copper[1].Layer != "L2" {
		t.Fatalf("copper %+v, want L1 and L2", r.Copper)
	}
	l1, l2 := r.Copper[0], r.Copper[1]
	// 1e-15 m: a few ulps of a 50 µm thickness.
	const tol = 1e-15
	if l1.FoilM == nil || math.Abs(*l1.FoilM-foil) > tol || len(l1.PlatingM) != 2 ||
		math.Abs(l1.PlatingM[0]-1.0*mil) > tol || math.Abs(l1.PlatingM[1]-0.3*mil) > tol ||
		math.Abs(l1.FinishedM-(foil+1.3*mil)) > tol {
		t.Errorf("L1 %+v, want foil %g m + 1.0 + 0.3 mil", l1, foil)
	}
	if l2.FoilM != nil || l2.PlatingM != nil || math.Abs(l2.FinishedM-1.4*mil) > tol {
		t.Errorf("L2 %+v, want 1.4 mil finished only", l2)
	}
}
