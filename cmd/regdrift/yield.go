package main

import (
	"context"
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render/figure"
)

type yieldFlags struct {
	outputFlags
	trials  int
	seed    uint64
	workers int
	strict  bool
	solver  solverFlags
}

// flags declares the command's flags on fs.
func (f *yieldFlags) flags(fs *pflag.FlagSet) {
	addTrials(fs, &f.trials, "number of panels drawn in the Monte Carlo")
	fs.Uint64Var(&f.seed, "seed", 1, "seed of the random streams")
	fs.IntVar(&f.workers, "workers", 0, "parallel workers (0: one per CPU); results do not depend on it")
	f.outputFlags.add(fs)
	addStrict(fs, &f.strict, "the expected part yield is below 100 %")
	f.solver.add(fs)
}

func (f *yieldFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("yield takes one job file")
	}
	if f.trials <= 0 {
		return usageErr("--trials: want a positive number of panels, not %d", f.trials)
	}
	if f.workers < 0 {
		return usageErr("--workers: want 0 (one per CPU) or more, not %d", f.workers)
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	set, err := f.solver.settings(std)
	if err != nil {
		return err
	}
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	a, err := drift.Analyse(ctx, input(j), set)
	if err != nil {
		return solveErr(j, err)
	}
	for _, w := range a.Warnings() {
		fmt.Fprintf(std.err, "regdrift yield: warning: %s\n", w)
	}
	pb := newProgress(std, "Monte Carlo", "panels")
	res, err := a.Yield.MonteCarlo(ctx, registration.MCSettings{Trials: f.trials, Seed: f.seed, Workers: f.workers, Progress: pb.update})
	pb.finish()
	if err != nil {
		return err
	}
	sum, paths, err := writeYield(f.out, a, res, f.seed, lu)
	if err != nil {
		return err
	}
	if err := report(std, f.json, sum, func() { printYield(std.out, j.Title, sum, lu, paths) }); err != nil {
		return err
	}
	if f.strict && sum.PartYieldMean < 1 {
		return fmt.Errorf("%w: expected part yield %.4f %%", errOutOfSpec, 100*sum.PartYieldMean)
	}
	return nil
}

// writeYield writes the yield study's files into dir.
func writeYield(dir string, a *drift.Analysis, res *registration.MCResult, seed uint64, lu lengthUnit) (*drift.YieldSummary, []string, error) {
	sum := a.YieldSummary(res, seed)
	u := lu.units()
	paths, err := writeAll(dir,
		outFile{"yield.csv", func(w io.Writer) error { return a.WriteYieldCSV(w, res, u) }},
		outFile{"budget.csv", func(w io.Writer) error { return drift.WriteBudgetCSV(w, sum, u) }},
		outFile{"yield.json", func(w io.Writer) error { return writeJSON(w, sum) }},
		outFile{"yield.png", func(w io.Writer) error { return figure.Yield(w, a, res, sum, u) }},
		outFile{"parts.png", func(w io.Writer) error { return figure.Parts(w, res, sum, a.In.Title) }},
		outFile{"budget.png", func(w io.Writer) error { return figure.Budget(w, sum) }})
	return sum, paths, err
}

func printYield(w io.Writer, title string, sum *drift.YieldSummary, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "%s\n", title)
	fmt.Fprintf(w, "%d panels (seed %d), %d sites, %d parts\n\n", sum.Trials, sum.Seed, sum.Sites, sum.Parts)
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "section\tsites\tdesign offset [%s]\tcoupling [dB]\tallowed offsets [%s]\tsite yield\n", lu.name, lu.name)
	for _, s := range sum.Sections {
		allowed := "none: design out of spec"
		if s.AllowedLowM != nil {
			allowed = fmt.Sprintf("%+.3f to %+.3f", *s.AllowedLowM/lu.factor, *s.AllowedHighM/lu.factor)
		}
		fmt.Fprintf(tw, "%s\t%d\t%+.3f\t%.3f\t%s\t%.4f %%\n", s.Name, s.Sites, s.DesignOffsetM/lu.factor, s.NominalCoupling, allowed, 100*s.SiteYieldMean)
	}
	tw.Flush()
	gp := sum.GoodPartsPerPanel
	fmt.Fprintf(w, "\nsite yield   %.4f %% (closed form %.4f %%)\n", 100*sum.SiteYieldMean, 100*sum.SiteYieldMeanClosed)
	fmt.Fprintf(w, "part yield   %.4f %%\n", 100*sum.PartYieldMean)
	fmt.Fprintf(w, "good parts per panel: expected %.2f of %d, 5th percentile %d, median %d, min %d\n\n", gp.Mean, sum.Parts, gp.P05, gp.P50, gp.Min)
	fmt.Fprintf(w, "worst parts:\n")
	tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  part\tpart yield\tworst site\tits yield\n")
	for _, p := range sum.WorstParts[:min(5, len(sum.WorstParts))] {
		fmt.Fprintf(tw, "  %s\t%.4f %%\t%s\t%.4f %%\n", p.Name, 100*p.PartYield, p.WorstSite, 100*p.WorstSiteYield)
	}
	tw.Flush()
	fmt.Fprintf(w, "\nerror budget (share of the across-offset variance):\n")
	tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  contributor\tterm\tpanel\tsd [%s]\tat %s\n", lu.name, sum.Budget.WorstSite)
	atWorst := map[string]float64{}
	for _, r := range sum.Budget.AtWorst {
		atWorst[r.Contributor+"\x00"+r.Term] = r.Share
	}
	for _, r := range sum.Budget.Panel[:min(8, len(sum.Budget.Panel))] {
		fmt.Fprintf(tw, "  %s\t%s\t%.1f %%\t%.3f\t%.1f %%\n", r.Contributor, r.Term, 100*r.Share, r.SDM/lu.factor, 100*atWorst[r.Contributor+"\x00"+r.Term])
	}
	tw.Flush()
	if len(sum.Orientation) > 0 {
		fmt.Fprintf(w, "\norientation (parts kept in place, lines turned 90 deg):\n")
		tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
		fmt.Fprintf(tw, "  array\tpart\tsite yield\tturned\trms offset [%s]\tturned\t\n", lu.name)
		for _, o := range sum.Orientation {
			fmt.Fprintf(tw, "  %d\t%s\t%.4f %%\t%.4f %%\t%.3f\t%.3f\t%s\n", o.Array, o.Part, 100*o.MeanYield, 100*o.MeanYieldTurned,
				o.RMSOffsetM/lu.factor, o.RMSOffsetTurned/lu.factor, o.Verdict())
		}
		tw.Flush()
	}
	if len(paths) > 0 {
		fmt.Fprintf(w, "\nwrote %s\n", strings.Join(paths, ", "))
	}
}

// progress draws a bar on stderr when it is a terminal and the run has taken
// over a second.
type progress struct {
	std         stdio
	what, units string
	start       time.Time
	shown       bool
	last        time.Time
}

func newProgress(std stdio, what, units string) *progress {
	return &progress{std: std, what: what, units: units, start: time.Now()}
}

func (p *progress) update(done, total int) {
	if !p.std.tty {
		return
	}
	now := time.Now()
	if now.Sub(p.start) < time.Second || (p.shown && now.Sub(p.last) < 100*time.Millisecond && done < total) {
		return
	}
	p.shown, p.last = true, now
	const width = 30
	n := width * done / total
	fmt.Fprintf(p.std.err, "\r%s [%s%s] %3d%% %d/%d %s", p.what, strings.Repeat("#", n), strings.Repeat(".", width-n),
		100*done/total, done, total, p.units)
}

func (p *progress) finish() {
	if p.shown {
		fmt.Fprintln(p.std.err)
	}
}
