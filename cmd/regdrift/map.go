package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render/figure"
)

type mapFlags struct {
	outputFlags
	show   string
	width  int
	strict bool
	solver solverFlags
}

// flags declares the command's flags on fs.
func (f *mapFlags) flags(fs *pflag.FlagSet) {
	f.outputFlags.add(fs)
	fs.StringVar(&f.show, "show", "drift", "quantity drawn: drift (at the mean offset, all sources), worst (worst drift within ±3σ), offset, sigma, margin, registration or variation (the drift of one group), or term:NAME (of one [[variation]] term)")
	fs.IntVar(&f.width, "width", 2400, "width of map.png in pixels")
	addStrict(fs, &f.strict, "any site is out of spec")
	f.solver.add(fs)
}

func (f *mapFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("map takes one job file")
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	termName, isTerm := strings.CutPrefix(f.show, "term:")
	if !isTerm && !slices.Contains(figure.Shows, f.show) {
		return usageErr("--show: want drift, worst, offset, sigma, margin, registration, variation or term:NAME, not %q", f.show)
	}
	if f.width < 300 || f.width > 20000 {
		return usageErr("--width: want 300 to 20000 pixels, not %d", f.width)
	}
	set, err := f.solver.settings(std)
	if err != nil {
		return err
	}
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	o := figure.MapOptions{Show: f.show, Width: f.width, Units: lu.units()}
	if isTerm {
		if o.Term = termIndex(j, termName); o.Term < 0 {
			return usageErr("--show: the job has no [[variation]] named %q", termName)
		}
		o.Show, o.TermName = "term", termName
	}
	a, err := drift.Analyse(ctx, input(j), set)
	if err != nil {
		return solveErr(j, err)
	}
	if err := a.CheckLinearity(ctx, set, 10); err != nil { // only with [[variation]] terms
		return solveErr(j, err)
	}
	sum, paths, err := writeMap(f.out, a, o, lu)
	if err != nil {
		return err
	}
	if err := report(std, f.json, sum, func() { printMap(std.out, a, sum, lu, paths) }); err != nil {
		return err
	}
	if f.strict && sum.InSpec < sum.Sites {
		return fmt.Errorf("%w: %d of %d sites outside the coupling spec", errOutOfSpec, sum.Sites-sum.InSpec, sum.Sites)
	}
	return nil
}

// writeMap writes the map's files (sites.csv, summary.json, map.png) into dir.
func writeMap(dir string, a *drift.Analysis, o figure.MapOptions, lu lengthUnit) (*drift.MapSummary, []string, error) {
	sum := a.Summary(10)
	paths, err := writeAll(dir,
		outFile{"sites.csv", func(w io.Writer) error { return a.WriteSitesCSV(w, lu.units()) }},
		outFile{"summary.json", func(w io.Writer) error { return writeJSON(w, sum) }},
		outFile{"map.png", func(w io.Writer) error { return figure.Map(w, a, sum, o) }})
	return sum, paths, err
}

func writeJSON(w io.Writer, v any) error { return drift.WriteJSON(w, v) }

func printMap(w io.Writer, a *drift.Analysis, s *drift.MapSummary, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "%s\n", s.Title)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "section\tsites\tin spec\tnominal [dB]\tspec [dB]\tworst offset [%s]\tworst drift [dB]\n", lu.name)
	for _, ss := range s.Sections {
		var wo, wd float64
		for k := range a.Sites {
			r := &a.Sites[k]
			if a.In.Sections[r.Section].Name != ss.Name {
				continue
			}
			if d := math.Abs(r.Offset - ss.DesignOffsetM); d > math.Abs(wo) {
				wo = r.Offset - ss.DesignOffsetM
			}
			if math.Abs(r.Drift) > math.Abs(wd) {
				wd = r.Drift
			}
		}
		fmt.Fprintf(tw, "%s\t%d\t%d (%.1f %%)\t%.3f\t%.2f ± %.2f\t%+.3f\t%+.4f\n", ss.Name, ss.Sites, ss.InSpec,
			100*float64(ss.InSpec)/float64(max(ss.Sites, 1)), ss.NominalCoupling, ss.SpecCouplingDB, ss.SpecToleranceDB,
			wo/lu.factor, wd)
	}
	tw.Flush()
	if len(s.Worst) > 0 {
		ws := s.Worst[0]
		fmt.Fprintf(w, "worst site: %s at (%.2f, %.2f) %s: offset %+.3f %s ± %.3f (1σ), coupling %.3f dB, drift %+.4f dB, margin %.3f dB\n",
			ws.Name, ws.XM/lu.pfac, ws.YM/lu.pfac, lu.panel, ws.OffsetM/lu.factor, lu.name, ws.SigmaM/lu.factor, ws.CouplingDB, ws.DriftDB, ws.MarginDB)
		printSources(w, ws.DriftSources) // variation.go
		printLinearity(w, s.Linearity)
	}
	for _, p := range paths {
		fmt.Fprintf(w, "wrote %s\n", p)
	}
}

// termIndex returns the index of the variation term named name in j, or −1.
func termIndex(j *Job, name string) int {
	if j.Process == nil {
		return -1
	}
	for i, t := range j.Process.Terms {
		if t.Name == name {
			return i
		}
	}
	return -1
}
