package main

import (
	"context"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render/figure"
	"github.com/regdrift/regdrift/samples"
)

type demoFlags struct {
	out    string
	width  int
	solver solverFlags
}

// demoJobs are the embedded demo jobs in the order the demo runs them.
// Jobs of one design share the colour scale of their maps.
var demoJobs = []struct{ file, what, targets, design string }{
	{"same-core.toml", "3 dB hybrids, traces on the two faces of one core", "", "hybrid"},
	{"two-core.toml", "the same hybrids, traces on two cores (more drift toward the panel edges)", "twocore-targets.csv", "hybrid"},
	{"offset-coupler.toml", "10 dB offset-broadside couplers, 12 x 18 in, one array turned 90 deg", "", "dc10"},
}

// flags declares the command's flags on fs.
func (f *demoFlags) flags(fs *pflag.FlagSet) {
	addOutDir(fs, &f.out)
	fs.IntVar(&f.width, "width", 2400, "width of the maps in pixels")
	f.solver.add(fs)
}

func (f *demoFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 0 {
		return usageErr("demo takes no arguments")
	}
	dir := filepath.Join(f.out, "samples")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	err := fs.WalkDir(samples.FS, ".", func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || strings.HasSuffix(p, ".go") {
			return err
		}
		b, err := samples.FS.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(dir, p), b, 0o644)
	})
	if err != nil {
		return fmt.Errorf("copying the samples: %w", err)
	}
	fmt.Fprintf(std.out, "regdrift demo: invented scenarios, copied to %s\n", dir)
	set, err := f.solver.settings(std)
	if err != nil {
		return err
	}
	lu, _ := parseUnits("mil")
	// Analyse every job first, so that the maps of one design (the hybrid on
	// one core and on two) share a colour scale and show which drifts more.
	analyses := make([]*drift.Analysis, len(demoJobs))
	ranges := map[string]*[2]float64{}
	for k, dj := range demoJobs {
		j, err := loadJob(filepath.Join(dir, dj.file), nil)
		if err != nil {
			return err
		}
		if analyses[k], err = drift.Analyse(ctx, input(j), set); err != nil {
			return err
		}
		lo, hi, err := figure.ShownRange(analyses[k], figure.MapOptions{Show: "drift"})
		if err != nil {
			return err
		}
		r, ok := ranges[dj.design]
		if !ok {
			r = &[2]float64{lo, hi}
			ranges[dj.design] = r
		}
		r[0], r[1] = math.Min(r[0], lo), math.Max(r[1], hi)
	}
	for k, dj := range demoJobs {
		name := strings.TrimSuffix(dj.file, ".toml")
		out := filepath.Join(f.out, name)
		a := analyses[k]
		sum, _, err := writeMap(out, a, figure.MapOptions{Show: "drift", Width: f.width, Scale: ranges[dj.design]}, lu)
		if err != nil {
			return err
		}
		var dev, worst3 float64
		for i := range a.Sites {
			r := &a.Sites[i]
			dev = math.Max(dev, math.Abs(r.Stats.MeanAcross))
			worst3 = math.Max(worst3, math.Abs(r.WorstDrift))
		}
		fmt.Fprintf(std.out, "\n%s: %s\n  map    expected in spec %.1f of %d sites (%s); largest mean offset from design %.2f mil; drift at the mean down to %+.3f dB, within ±3σ %.3f dB\n",
			name, dj.what, sum.ExpectedInSpec, sum.Sites, sum.InSpecPhrase(), dev/lu.factor, signedMax(sum.DriftDB.Min, sum.DriftDB.Max), worst3)
		// The sweep of the first section is the curve the map read.
		if err := writeSweep(out, a, 0, lu); err != nil {
			return err
		}
		res, err := a.Yield.MonteCarlo(ctx, registration.MCSettings{Trials: demoTrials, Seed: 1})
		if err != nil {
			return err
		}
		y, _, err := writeYield(out, a, res, 1, lu)
		if err != nil {
			return err
		}
		fmt.Fprintf(std.out, "  yield  %.3f %% of sites and %.3f %% of parts in spec over %d panels; good parts per panel %.1f of %d (5th percentile %d)\n",
			100*y.SiteYieldMean, 100*y.PartYieldMean, demoTrials, y.GoodPartsPerPanel.Mean, y.Parts, y.GoodPartsPerPanel.P05)
		if dj.targets != "" {
			if err := demoMeasured(ctx, std, a.In, filepath.Join(dir, dj.targets), dj.targets, out, set, lu); err != nil {
				return err
			}
		}
		fmt.Fprintf(std.out, "  images %s\n", strings.Join(pngs(out), ", "))
		if err := demoReport(ctx, std, filepath.Join(dir, dj.file), demoTargets(dir, dj.targets), out, set, f.width); err != nil {
			return err
		}
	}
	// One coupler built three ways on one panel and one process.
	if err := demoTopology(ctx, std, dir, f.out, set, f.width, lu); err != nil {
		return err
	}
	// The registration history: 60 invented lots in a temporary database.
	lines, err := demoHistory(ctx, f.out)
	if err != nil {
		return err
	}
	fmt.Fprintf(std.out, "\n%s\n", strings.Join(lines, "\n"))
	return nil
}

// demoTrials is the number of panels the demo's yield study draws.
const demoTrials = 4000

// writeSweep writes sweep.csv and sweep.png of section i's curve in a.
func writeSweep(dir string, a *drift.Analysis, i int, lu lengthUnit) error {
	c := a.Curves[i]
	pic, err := sectionPicture(c.Section, c.Curve, false, lu.units())
	if err != nil {
		return err
	}
	_, err = writeAll(dir,
		outFile{"sweep.csv", func(w io.Writer) error { return drift.WriteSweepCSV(w, c.Curve, lu.units()) }},
		outFile{"sweep.png", func(w io.Writer) error { return figure.Sweep(w, c.Section, c.Curve, lu.units()) }},
		outFile{"section.png", pic})
	return err
}

// demoMeasured runs the process engineer's loop on the measured targets:
// the robust fit of each panel and layer, then the compensation from the
// fitted lot with a 3 mil drill budget and 5 ppm steps.
func demoMeasured(ctx context.Context, std stdio, in *drift.Input, targets, name, out string, set *drift.Settings, lu lengthUnit) error {
	fset := registration.FitSettings{Model: registration.Affine, Robust: registration.Tukey, Datum: in.Layout.Panel.Datum}
	fr, err := runFitFile(targets, nil, fset, 5)
	if err != nil {
		return err
	}
	fitOut := filepath.Join(out, "fit")
	if _, err := fr.writeFiles(fitOut, filepath.Join(fitOut, "measured.toml"), in.Layout.Panel.Size, 2400, lu); err != nil {
		return err
	}
	outliers := 0
	for _, ft := range fr.Fits {
		outliers += len(ft.Outliers)
	}
	fmt.Fprintf(std.out, "  fit    %d panel-layer fits of %s, %d mis-measured targets set aside -> %s\n",
		len(fr.Fits), name, outliers, filepath.Join(fitOut, "fit.png"))
	model, notes := drift.MeasuredModel(in.Model, fr.Fits, fr.Lots, fr.File, false)
	cmp, err := drift.Compensate(ctx, in, model, &registration.CompSettings{DrillBudget: 3 * unit.Mil, Max: 1000e-6, Step: 5e-6}, set)
	if err != nil {
		return err
	}
	var layers []string
	for _, l := range fr.Lots {
		layers = append(layers, l.Layer)
	}
	compOut := filepath.Join(out, "comp")
	sum, _, err := writeComp(compOut, cmp, layers, append(notes, cmp.Notes...), 2400, lu)
	if err != nil {
		return err
	}
	fmt.Fprintf(std.out, "  comp   artwork scale compensation: worst offset %.2f -> %.2f mil, predicted site yield %.2f -> %.2f %% -> %s\n",
		sum.Before.WorstOffsetM/lu.factor, sum.After.WorstOffsetM/lu.factor, 100*sum.Before.SiteYield, 100*sum.After.SiteYield,
		filepath.Join(compOut, "comp.png"))
	return nil
}

// pngs lists the PNG files in dir and its subdirectories.
func pngs(dir string) []string {
	var out []string
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() && strings.HasSuffix(p, ".png") {
			out = append(out, p)
		}
		return nil
	})
	return out
}

// signedMax returns whichever of a and b is larger in magnitude.
func signedMax(a, b float64) float64 {
	if math.Abs(a) > math.Abs(b) {
		return a
	}
	return b
}
