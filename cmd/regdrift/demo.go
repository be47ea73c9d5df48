package main

import (
	"context"
	"fmt"
	"io"
	"io/fs"
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
		ws := sum.Worst[0]
		fmt.Fprintf(std.out, "%-20s %s\n  %d/%d sites in spec, offset rms %.2f mil (max |%.2f| mil), worst drift %+.3f dB at %s -> %s\n",
			name, dj.what, sum.InSpec, sum.Sites, sum.OffsetM.RMS/lu.factor,
			maxAbs(sum.OffsetM.Min-a.job.Sections[0].NominalOffset(), sum.OffsetM.Max-a.job.Sections[0].NominalOffset())/lu.factor,
			ws.DriftDB, ws.Name, filepath.Join(f.out, name, "map.png"))
	}
	return nil
}

func maxAbs(a, b float64) float64 {
	if a < 0 {
		a = -a
	}
	if b < 0 {
		b = -b
	}
	return max(a, b)
}
