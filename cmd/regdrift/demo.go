package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/pflag"

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
	common := []string{"--accuracy", f.solver.accuracy, "--cache-dir", f.solver.cacheDir}
	if f.solver.noCache {
		common = append(common, "--no-cache")
	}
	// Analyse every job first, so that the maps of one design (the hybrid on
	// one core and on two) share a colour scale and show which drifts more.
	analyses := make([]*analysis, len(demoJobs))
	lu, _ := parseUnits("mil")
	ranges := map[string]*[2]float64{}
	for k, dj := range demoJobs {
		j, err := loadJob(filepath.Join(dir, dj.file), nil)
		if err != nil {
			return err
		}
		if analyses[k], err = analyse(ctx, j, &f.solver); err != nil {
			return err
		}
		lo, hi := analyses[k].shownRange("drift", lu)
		r, ok := ranges[dj.design]
		if !ok {
			r = &[2]float64{lo, hi}
			ranges[dj.design] = r
		}
		r[0], r[1] = math.Min(r[0], lo), math.Max(r[1], hi)
		analyses[k].scale = r
	}
	for k, dj := range demoJobs {
		name := strings.TrimSuffix(dj.file, ".toml")
		job := filepath.Join(dir, dj.file)
		out := filepath.Join(f.out, name)
		a := analyses[k]
		sum, _, err := a.writeMap(out, "drift", f.width, lu)
		if err != nil {
			return err
		}
		var dev, worst3 float64
		for i := range a.sites {
			r := &a.sites[i]
			dev = math.Max(dev, math.Abs(r.Stats.MeanAcross))
			worst3 = math.Max(worst3, math.Abs(r.WorstDrift))
		}
		fmt.Fprintf(std.out, "\n%s: %s\n  map    %d of %d sites in spec; largest mean offset from design %.2f mil; drift at the mean down to %+.3f dB, within ±3σ %.3f dB\n",
			name, dj.what, sum.InSpec, sum.Sites, dev/lu.factor, signedMax(sum.DriftDB.Min, sum.DriftDB.Max), worst3)
		// The curve is cached now: the sweep plot costs no solve.
		if _, err := runQuiet(ctx, "sweep", append([]string{job, "-o", out}, common...)); err != nil {
			return err
		}
		var y struct {
			SiteYield float64 `json:"site_yield_mean"`
			PartYield float64 `json:"part_yield_mean"`
			Good      struct {
				Mean float64 `json:"mean"`
				P05  float64 `json:"p05"`
			} `json:"good_parts_per_panel"`
			Parts int `json:"parts"`
		}
		if err := runJSON(ctx, "yield", append([]string{job, "-o", out, "--trials", "4000"}, common...), &y); err != nil {
			return err
		}
		fmt.Fprintf(std.out, "  yield  %.3f %% of sites and %.3f %% of parts in spec over 4000 panels; good parts per panel %.1f of %d (5th percentile %.0f)\n",
			100*y.SiteYield, 100*y.PartYield, y.Good.Mean, y.Parts, y.Good.P05)
		if dj.targets != "" {
			targets := filepath.Join(dir, dj.targets)
			var fit struct {
				Fits []struct {
					Outliers []string `json:"outliers"`
				} `json:"fits"`
			}
			fitOut := filepath.Join(out, "fit")
			if err := runJSON(ctx, "fit", []string{targets, "--robust", "--panel", "18in,24in", "-o", fitOut,
				"--contributors", filepath.Join(fitOut, "measured.toml")}, &fit); err != nil {
				return err
			}
			outliers := 0
			for _, ft := range fit.Fits {
				outliers += len(ft.Outliers)
			}
			fmt.Fprintf(std.out, "  fit    %d panel-layer fits of %s, %d mis-measured targets set aside -> %s\n",
				len(fit.Fits), dj.targets, outliers, filepath.Join(fitOut, "fit.png"))
			var comp struct {
				Before, After struct {
					WorstOffsetM float64 `json:"worst_offset_m"`
					InSpec       int     `json:"in_spec"`
					SiteYield    float64 `json:"site_yield"`
				}
			}
			compOut := filepath.Join(out, "comp")
			if err := runJSON(ctx, "comp", append([]string{job, "--targets", targets, "--drill-budget", "3mil", "--step", "5ppm", "-o", compOut}, common...), &comp); err != nil {
				return err
			}
			fmt.Fprintf(std.out, "  comp   artwork scale compensation: worst offset %.2f -> %.2f mil, predicted site yield %.2f -> %.2f %% -> %s\n",
				comp.Before.WorstOffsetM/lu.factor, comp.After.WorstOffsetM/lu.factor, 100*comp.Before.SiteYield, 100*comp.After.SiteYield,
				filepath.Join(compOut, "comp.png"))
		}
		fmt.Fprintf(std.out, "  images %s\n", strings.Join(pngs(out), ", "))
	}
	return nil
}

// runQuiet runs another command with its stdout captured and returns it.
func runQuiet(ctx context.Context, name string, args []string) ([]byte, error) {
	var out, errw bytes.Buffer
	c, _ := lookup(name)
	err := invoke(ctx, c, stdio{out: &out, err: &errw}, args)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return out.Bytes(), nil
}

// runJSON runs another command with --json and decodes its summary into v.
func runJSON(ctx context.Context, name string, args []string, v any) error {
	b, err := runQuiet(ctx, name, append(args, "--json"))
	if err != nil {
		return err
	}
	return json.Unmarshal(b, v)
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
