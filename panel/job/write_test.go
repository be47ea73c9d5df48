package job

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/samples"
)

// writtenRel is the largest relative error of a value written with six
// significant digits: a value in [10^e, 10^(e+1)) rounds by at most
// 0.5·10^(e−5), a relative 5e-6. The factor 1.000001 leaves room for the
// binary rounding of the unit conversion (a few parts in 1e16).
const writtenRel = 5e-6 * 1.000001

func closeWritten(got, want float64) bool {
	return math.Abs(got-want) <= writtenRel*math.Abs(want)
}

// includeJob writes text beside a copy of samples/same-core.toml without its
// own contributors, which includes it, and loads that job.
func includeJob(t *testing.T, text string) *Job {
	t.Helper()
	base, err := samples.FS.ReadFile("same-core.toml")
	if err != nil {
		t.Fatal(err)
	}
	s := string(base)
	s = s[:strings.Index(s, "[[contributor]]")]
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "written.toml"), []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "job.toml"), []byte("include = [\"written.toml\"]\n"+s), 0o644); err != nil {
		t.Fatal(err)
	}
	j, err := Load(filepath.Join(dir, "job.toml"), nil)
	if err != nil {
		t.Fatalf("%v\n%s", err, text)
	}
	return j
}

// testLots are invented lots: an affine lot with every term non-zero, a
// similarity lot measured against another layer, and a translation lot with
// a zero spread (a single panel).
func testLots() []registration.Lot {
	return []registration.Lot{
		{Layer: "L3", Model: registration.Affine, Panels: 5,
			Mean: [registration.NumTerms]float64{3.21e-6, -1.234567e-5, 12.3456e-6, -180.25e-6, -120.125e-6, 7.77777e-6},
			SD:   [registration.NumTerms]float64{1.1e-6, 0.987654e-6, 4.5e-6, 40.4e-6, 35.35e-6, 2.2e-6}},
		{Layer: "L4-L3", Model: registration.Similarity, Panels: 3,
			Mean: [registration.NumTerms]float64{-2e-6, 1e-6, -5e-6, 60e-6, 60e-6, 0},
			SD:   [registration.NumTerms]float64{0.5e-6, 0.25e-6, 1e-6, 5e-6, 5e-6, 0}},
		{Layer: "L5", Model: registration.Translation, Panels: 1,
			Mean: [registration.NumTerms]float64{9.87654e-6, -4.4e-6}},
	}
}

// TestWriteContributors writes invented lots, includes the file in a job
// and checks that every term of every lot reads back as written, under both
// output unit choices. It walks every TermKind, so a term the fit estimates
// but the writer or the loader drops fails here.
func TestWriteContributors(t *testing.T) {
	lots := testLots()
	fits := []registration.Fit{
		{Layer: "L3", DOF: 26, Sigma0: 0.4e-6},
		{Layer: "L3", DOF: 10, Sigma0: 0.8e-6},
		{Layer: "L4-L3", DOF: 0, Sigma0: 9e-6}, // no redundancy: not pooled
	}
	// σ0² = (26·0.4² + 10·0.8²)/36 µm².
	pooledL3 := math.Sqrt((26*0.4e-6*0.4e-6 + 10*0.8e-6*0.8e-6) / 36)
	set := &registration.FitSettings{Model: registration.Affine, Robust: registration.Tukey}
	for _, out := range []unit.Output{unit.MilInch, unit.MicronMM} {
		t.Run(out.String(), func(t *testing.T) {
			var buf bytes.Buffer
			if err := WriteContributors(&buf, "targets.csv", set, fits, lots, out); err != nil {
				t.Fatal(err)
			}
			text := buf.String()
			// Offer the commented-out site_sigma to the loader too.
			text = strings.ReplaceAll(text, "# site_sigma", "site_sigma")
			j := includeJob(t, text)
			if len(j.Model.Contributors) != len(lots) {
				t.Fatalf("%d contributors, want %d", len(j.Model.Contributors), len(lots))
			}
			blocks := strings.Split(text, "[[contributor]]")[1:]
			for i, l := range lots {
				c := j.Model.Contributors[i]
				want := l.Contributor("")
				if len(c.Layers) != 1 || c.Layers[0] != want.Layers[0] {
					t.Errorf("%s: layers %v, want %v", l.Layer, c.Layers, want.Layers)
				}
				for k := registration.TermKind(0); k < registration.NumTerms; k++ {
					key := regexp.MustCompile(`(?m)^` + k.String() + ` +=`)
					if written := key.MatchString(blocks[i]); written != l.Model.Estimates(k) {
						t.Errorf("%s: %v written %v, estimated %v", l.Layer, k, written, l.Model.Estimates(k))
					}
					got, w := c.Terms[k], want.Terms[k]
					if got.Dist != w.Dist || !closeWritten(got.Mean, w.Mean) || !closeWritten(got.Spread, w.Spread) {
						t.Errorf("%s: %v read back as %+v, want %+v", l.Layer, k, got, w)
					}
				}
			}
			if got := j.Model.Contributors[0].SiteSigma; !closeWritten(got, pooledL3) {
				t.Errorf("site_sigma of L3 read back as %g, want %g", got, pooledL3)
			}
			if got := j.Model.Contributors[1].SiteSigma; got != 0 {
				t.Errorf("site_sigma of L4-L3 is %g; a fit without redundancy gives none", got)
			}
			if !strings.Contains(text, "measured relative to L3: this moves L4 against L3") {
				t.Errorf("the relative lot is not explained:\n%s", text)
			}
		})
	}
}

// TestWriteCompensation writes an invented compensation, includes the file
// in a job and checks that each layer's contributor reads back as the
// result's own contributors.
func TestWriteCompensation(t *testing.T) {
	res := &registration.CompResult{Objective: registration.Worst, Common: "smallest compensation",
		Layers: []registration.LayerComp{
			{Layer: "L3", X: registration.AxisComp{Scale: 180.2e-6, Factor: 1.0001802, Net: 180.16757e-6},
				Y: registration.AxisComp{Scale: 120e-6, Factor: 1.00012, Net: 119.985e-6}},
			{Layer: "L4", X: registration.AxisComp{Scale: -5e-6, Factor: 0.999995, Net: -4.99e-6},
				Y: registration.AxisComp{Scale: 0, Factor: 1, Net: 0}},
		}}
	var buf bytes.Buffer
	if err := WriteCompensation(&buf, "job.toml", res); err != nil {
		t.Fatal(err)
	}
	j := includeJob(t, buf.String())
	want := res.Contributors()
	if len(j.Model.Contributors) != len(want) {
		t.Fatalf("%d contributors, want %d", len(j.Model.Contributors), len(want))
	}
	for i, w := range want {
		c := j.Model.Contributors[i]
		if c.Name != w.Name || len(c.Layers) != 1 || c.Layers[0] != w.Layers[0] || c.SiteSigma != 0 || c.Residual != nil {
			t.Errorf("contributor %d: %q %v, want %q %v", i, c.Name, c.Layers, w.Name, w.Layers)
		}
		for k := range c.Terms {
			g, e := c.Terms[k], w.Terms[k]
			if g.Dist != e.Dist || g.Spread != e.Spread || !closeWritten(g.Mean, e.Mean) {
				t.Errorf("%s: %v read back as %+v, want %+v", w.Name, registration.TermKind(k), g, e)
			}
		}
	}
}

// TestWriteJointContributors writes a lot of two layers measured against the
// drilled holes on the same panels, includes it in a job and checks that the
// model read back gives the L3−L4 offset and each layer's movement against
// the holes the spread of the lot's own contributors.
func TestWriteJointContributors(t *testing.T) {
	// Invented per-panel terms: a shared drill scale error of tens of ppm and
	// a few ppm of each layer's own movement.
	shared := []float64{31e-6, -47e-6, 12e-6, 66e-6, -20e-6, 3e-6}
	own3 := []float64{2e-6, -4e-6, 5e-6, -1e-6, 3e-6, -6e-6}
	own4 := []float64{-3e-6, 1e-6, 4e-6, -5e-6, 2e-6, 0.5e-6}
	var fits []registration.Fit
	for p := range shared {
		for _, l := range []struct {
			name string
			own  []float64
		}{{"L3", own3}, {"L4", own4}} {
			f := registration.Fit{Panel: string(rune('A' + p)), Layer: l.name, Model: registration.Similarity}
			f.Terms[registration.ScaleX] = 150e-6 + shared[p] + l.own[p]
			f.Terms[registration.ScaleY] = f.Terms[registration.ScaleX]
			f.Terms[registration.OffsetX] = 10e-6*float64(p) + l.own[p]
			fits = append(fits, f)
		}
	}
	lots := registration.LotStats(fits)
	want := &registration.Model{}
	for _, c := range registration.LotContributors(fits, lots, LotLabel).Contributors {
		want.Contributors = append(want.Contributors, c.Contributor)
	}
	var buf bytes.Buffer
	if err := WriteContributors(&buf, "targets.csv", &registration.FitSettings{Model: registration.Similarity}, fits, lots, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	text := buf.String()
	if !strings.Contains(text, "weights = [") || !strings.Contains(text, "L3, L4 measured on the same 6 panels") {
		t.Errorf("no joint components written:\n%s", text)
	}
	j := includeJob(t, text)
	for _, pair := range [][2]string{{"L3", "L4"}, {"L3", "drill"}, {"L4", "drill"}} {
		g, w := j.Model.Relative(pair[0], pair[1]), want.Relative(pair[0], pair[1])
		a, b := want.Relative(pair[0], "drill"), want.Relative(pair[1], "drill")
		for k := range w.Var {
			// Each layer's mean is written on its own, so the difference is
			// off by up to the rounding of both.
			meanTol := writtenRel * (math.Abs(a.Mean[k]) + math.Abs(b.Mean[k]))
			// Each variance is a product of a written weight difference
			// squared and a written sigma squared: four values rounded to
			// six digits, so within 4·writtenRel, doubled for the difference
			// of two nearly equal weights.
			if math.Abs(g.Var[k]-w.Var[k]) > 8*writtenRel*w.Var[k]+1e-30 || math.Abs(g.Mean[k]-w.Mean[k]) > meanTol {
				t.Errorf("%s−%s %v: read back mean %g var %g, want %g, %g", pair[0], pair[1], registration.TermKind(k), g.Mean[k], g.Var[k], w.Mean[k], w.Var[k])
			}
		}
	}
}
