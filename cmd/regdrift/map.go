package main

import (
	"context"
	"fmt"
	"io"
	"slices"
	"strings"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render/figure"
)

type mapFlags struct {
	outputFlags
	show    string
	width   int
	strict  bool
	strictP float64
	solver  solverFlags
}

// defaultStrictP is the default --strict-p: the probability that a normal
// variable lies within ±3σ of its mean, 2Φ(3) − 1 = 0.9973 (Abramowitz and
// Stegun, Handbook of Mathematical Functions, table 26.1), so that by default
// --strict asks every site to be in spec at three sigma.
const defaultStrictP = 0.9973

// flags declares the command's flags on fs.
func (f *mapFlags) flags(fs *pflag.FlagSet) {
	f.outputFlags.add(fs)
	fs.StringVar(&f.show, "show", "", "quantity drawn: drift (at the mean offset, all sources), worst (worst drift within ±3σ), offset, sigma, margin, window (share of the allowed offsets mean ± 3σ reaches), p (probability in spec), registration or variation (the drift of one group), or term:NAME (of one [[variation]] term); default drift; when sections differ window, or p with [[variation]] terms")
	fs.IntVar(&f.width, "width", 2400, "width of map.png in pixels")
	addStrict(fs, &f.strict, "any site's probability of being in spec is below --strict-p")
	fs.Float64Var(&f.strictP, "strict-p", defaultStrictP, "with --strict, the lowest probability of being in spec a site may have (0.9973: in spec at ±3σ)")
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
	if f.show != "" && !isTerm && !slices.Contains(figure.Shows, f.show) {
		return usageErr("--show: want one of %s, or term:NAME, not %q", strings.Join(figure.Shows, ", "), f.show)
	}
	if !(f.strictP > 0 && f.strictP <= 1) {
		return usageErr("--strict-p: want a probability above 0 and at most 1, not %g", f.strictP)
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
	var a *drift.Analysis
	err = step(progressStd(std, f.json), "field solves", func() (err error) {
		a, err = drift.Analyse(ctx, input(j), set)
		if err != nil {
			return err
		}
		return a.CheckLinearity(ctx, set, 10) // only with [[variation]] terms
	})
	if err != nil {
		return solveErr(j, err)
	}
	for _, w := range a.Warnings() {
		fmt.Fprintf(std.err, "regdrift map: warning: %s\n", w)
	}
	sum, paths, err := writeMap(f.out, a, o, lu)
	if err != nil {
		return err
	}
	if err := report(std, f.json, sum, func() { printMap(std.out, sum, lu, paths) }); err != nil {
		return err
	}
	if f.strict {
		return strictMap(a, f.strictP)
	}
	return nil
}

// strictMap returns errOutOfSpec when any site of a is less likely than pMin
// to be in spec, naming how many and the least likely.
func strictMap(a *drift.Analysis, pMin float64) error {
	n := 0
	for i := range a.Sites {
		if a.Sites[i].PInSpec < pMin {
			n++
		}
	}
	if n == 0 {
		return nil
	}
	w := &a.Sites[a.Worst(1)[0]]
	return fmt.Errorf("%w: %d of %d sites are in spec with a probability below %.4g (lowest %s, %.4f)",
		errOutOfSpec, n, len(a.Sites), pMin, w.Site.Name, w.PInSpec)
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

func printMap(w io.Writer, s *drift.MapSummary, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "%s\n", s.Title)
	fmt.Fprintf(w, "expected in spec %.1f of %d sites (%s)\n", s.ExpectedInSpec, s.Sites, s.InSpecPhrase())
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "section\tsites\texpected in spec\tmean in spec\tlowest P\tnominal [dB]\tspec [dB]\tworst offset from design [%s]\tworst drift [dB]\n", lu.name)
	for _, ss := range s.Sections {
		n := float64(max(ss.Sites, 1))
		fmt.Fprintf(tw, "%s\t%d\t%.1f (%.2f %%)\t%d (%.1f %%)\t%.4f\t%.3f\t%.2f ± %.2f\t%+.3f\t%+.4f\n", ss.Name, ss.Sites,
			ss.ExpectedInSpec, 100*ss.ExpectedInSpec/n, ss.InSpec, 100*float64(ss.InSpec)/n, ss.LowestPInSpec,
			ss.NominalCoupling, ss.SpecCouplingDB, ss.SpecToleranceDB, ss.WorstOffsetFromDesignM/lu.factor, ss.WorstDriftDB)
	}
	tw.Flush()
	if len(s.Worst) > 0 {
		ws := s.Worst[0]
		fmt.Fprintf(w, "worst site: %s (%s) at (%.2f, %.2f) %s: P(in spec) %.4f, offset from design %+.3f %s ± %.3f (1σ), coupling %.3f dB, drift %+.4f dB, margin %.3f dB\n",
			ws.Name, ws.Section, ws.XM/lu.pfac, ws.YM/lu.pfac, lu.panel, ws.PInSpec, ws.OffsetFromDesignM/lu.factor, lu.name, ws.SigmaM/lu.factor,
			ws.CouplingDB, ws.DriftDB, ws.MarginDB)
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
