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

	"github.com/regdrift/regdrift/samples"
)

type demoFlags struct {
	out    string
	width  int
	solver solverFlags
}

// demoJobs are the embedded demo jobs in the order the demo runs them.
var demoJobs = []struct{ file, what string }{
	{"same-core.toml", "3 dB hybrids, traces on the two faces of one core"},
	{"two-core.toml", "the same hybrids, traces on two cores"},
	{"offset-coupler.toml", "10 dB offset-broadside couplers, 12 x 18 in, one array turned 90 deg"},
}

func init() {
	register(&command{
		name:  "demo",
		usage: "demo [-o DIR]",
		short: "run the embedded demo jobs end to end",
		long: `Copies the embedded demo jobs into DIR/samples (so that you can edit and rerun
them) and maps each one into DIR/<job>/: a same-core 3 dB hybrid build, the same
hybrids on two cores (which drift more toward the corners), and a panel of
10 dB offset-broadside couplers whose coupling moves linearly with offset.
All demo data are invented.`,
		order: 0,
		flags: func(fs *pflag.FlagSet) any {
			f := &demoFlags{}
			fs.StringVarP(&f.out, "out", "o", "regdrift-out", "output directory")
			fs.IntVar(&f.width, "width", 2400, "width of the maps in pixels")
			f.solver.add(fs)
			return f
		},
		run: runDemo,
	})
}

func runDemo(ctx context.Context, std stdio, opts any, args []string) error {
	f := opts.(*demoFlags)
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
	for _, dj := range demoJobs {
		name := strings.TrimSuffix(dj.file, ".toml")
		j, err := loadJob(filepath.Join(dir, dj.file), nil)
		if err != nil {
			return err
		}
		a, err := analyse(ctx, j, &f.solver, std)
		if err != nil {
			return err
		}
		lu, _ := parseUnits("mil")
		o, err := newOutputs(filepath.Join(f.out, name))
		if err != nil {
			return err
		}
		sum := a.summary(10)
		err = o.file("sites.csv", func(w io.Writer) error { return a.writeSitesCSV(w, lu) })
		if err == nil {
			err = o.file("summary.json", func(w io.Writer) error { return writeJSON(w, sum) })
		}
		if err == nil {
			err = o.file("map.png", func(w io.Writer) error { return a.drawMap(w, "drift", f.width, lu) })
		}
		if err == nil {
			err = o.commit()
		}
		if err != nil {
			o.abort()
			return err
		}
		var dev, worst3 float64
		for i := range a.sites {
			r := &a.sites[i]
			dev = math.Max(dev, math.Abs(r.Stats.MeanAcross))
			worst3 = math.Max(worst3, math.Abs(r.WorstDrift))
		}
		fmt.Fprintf(std.out, "%-15s %s\n  %d of %d sites in spec; largest mean offset from design %.2f mil; drift at the mean down to %+.3f dB, within ±3σ %.3f dB -> %s\n",
			name, dj.what, sum.InSpec, sum.Sites, dev/lu.factor, signedMax(sum.DriftDB.Min, sum.DriftDB.Max), worst3,
			filepath.Join(f.out, name, "map.png"))
	}
	return nil
}

// signedMax returns whichever of a and b is larger in magnitude.
func signedMax(a, b float64) float64 {
	if math.Abs(a) > math.Abs(b) {
		return a
	}
	return b
}
