package main

import (
	"context"
	"encoding/csv"
	"fmt"
	"io"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render/figure"
)

type yieldFlags struct {
	outputFlags
	trials     int
	seed       uint64
	workers    int
	strict     bool
	closedForm bool
	turnGain   string
	solver     solverFlags
}

// flags declares the command's flags on fs.
func (f *yieldFlags) flags(fs *pflag.FlagSet) {
	addTrials(fs, &f.trials, "number of panels drawn in the Monte Carlo")
	fs.Uint64Var(&f.seed, "seed", 1, "seed of the random streams")
	fs.IntVar(&f.workers, "workers", 0, "parallel workers (0: one per CPU); results do not depend on it")
	f.outputFlags.add(fs)
	addStrict(fs, &f.strict, "the expected part yield is below 100 % (of any variant)")
	fs.BoolVar(&f.closedForm, "closed-form", false, "compare variants without a Monte Carlo: site yields exact, part yields as bounds")
	fs.StringVar(&f.turnGain, "turn-gain", "0.5%", "smallest rise in an array's mean site yield for which the orientation study recommends a turn")
	f.solver.add(fs)
}

func (f *yieldFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) == 0 {
		return usageErr("yield takes a job file, or several to compare")
	}
	if f.closedForm && len(args) < 2 {
		return usageErr("--closed-form compares variants: give two or more job files")
	}
	if f.trials <= 0 {
		return usageErr("--trials: want a positive number of panels, not %d", f.trials)
	}
	if f.workers < 0 {
		return usageErr("--workers: want 0 (one per CPU) or more, not %d", f.workers)
	}
	turnGain, err := parsePercent(f.turnGain)
	if err != nil {
		return usageErr("--turn-gain: %v", err)
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	set, err := f.solver.settings(std)
	if err != nil {
		return err
	}
	std = progressStd(std, f.json)
	if len(args) > 1 {
		return f.runVariants(ctx, std, args, set, turnGain, lu)
	}
	j, a, err := yieldAnalysis(ctx, std, args[0], set, "")
	if err != nil {
		return err
	}
	res, err := f.monteCarlo(ctx, std, a, "Monte Carlo")
	if err != nil {
		return err
	}
	sum, paths, err := writeYieldTurn(f.out, a, res, f.seed, turnGain, lu)
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

// yieldAnalysis loads a job and analyses it (the field solves behind a
// progress line); its warnings go to stderr, prefixed by variant when the
// job is one of several.
func yieldAnalysis(ctx context.Context, std stdio, path string, set *drift.Settings, variant string) (*Job, *drift.Analysis, error) {
	j, err := loadJob(path, std.in)
	if err != nil {
		return nil, nil, err
	}
	var a *drift.Analysis
	what := "solving cross-sections"
	if variant != "" {
		what += " of " + variant
	}
	if err := step(std, what, func() error {
		var err error
		a, err = drift.Analyse(ctx, input(j), set)
		return err
	}); err != nil {
		return nil, nil, solveErr(j, err)
	}
	prefix := "regdrift yield: warning: "
	if variant != "" {
		prefix += variant + ": "
	}
	for _, w := range a.Warnings() {
		fmt.Fprintf(std.err, "%s%s\n", prefix, w)
	}
	return j, a, nil
}

// monteCarlo runs the yield study's Monte Carlo of a behind a progress bar.
func (f *yieldFlags) monteCarlo(ctx context.Context, std stdio, a *drift.Analysis, what string) (*registration.MCResult, error) {
	pb := newProgress(std, what, "panels")
	res, err := a.Yield.MonteCarlo(ctx, registration.MCSettings{Trials: f.trials, Seed: f.seed, Workers: f.workers, Progress: pb.update})
	pb.finish()
	return res, err
}

// writeYield writes the yield study's files into dir, with the orientation
// study's default threshold.
func writeYield(dir string, a *drift.Analysis, res *registration.MCResult, seed uint64, lu lengthUnit) (*drift.YieldSummary, []string, error) {
	return writeYieldTurn(dir, a, res, seed, 0, lu)
}

// writeYieldTurn writes the yield study's files into dir; turnGain is the
// orientation study's threshold (0: the default).
func writeYieldTurn(dir string, a *drift.Analysis, res *registration.MCResult, seed uint64, turnGain float64, lu lengthUnit) (*drift.YieldSummary, []string, error) {
	sum := a.YieldSummaryTurn(res, seed, turnGain)
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
	coupons := ""
	if sum.Coupons > 0 {
		coupons = fmt.Sprintf(" (and %d coupon parts, not counted)", sum.Coupons)
	}
	fmt.Fprintf(w, "%d panels (seed %d), %d sites, %d parts%s\n\n", sum.Trials, sum.Seed, sum.Sites, sum.Parts, coupons)
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
	if sum.Parts == 0 {
		fmt.Fprintf(w, "part yield   none: the sites belong to no part counted as a product\n\n")
	} else {
		fmt.Fprintf(w, "part yield   %.4f %%\n", 100*sum.PartYieldMean)
		fmt.Fprintf(w, "good parts per panel: expected %.2f of %d, 5th percentile %d, median %d, min %d\n\n", gp.Mean, sum.Parts, gp.P05, gp.P50, gp.Min)
	}
	if len(sum.WorstParts) > 0 {
		fmt.Fprintf(w, "worst parts:\n")
		tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
		fmt.Fprintf(tw, "  part\tpart yield\tworst site\tits yield\n")
		for _, p := range sum.WorstParts[:min(5, len(sum.WorstParts))] {
			fmt.Fprintf(tw, "  %s\t%.4f %%\t%s\t%.4f %%\n", p.Name, 100*p.PartYield, p.WorstSite, 100*p.WorstSiteYield)
		}
		tw.Flush()
		fmt.Fprintln(w)
	}
	fmt.Fprintf(w, "error budget (share of the across-offset variance%s):\n", shownOf(budgetRows, len(sum.Budget.Panel)))
	tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  contributor\tterm\tpanel\tsd [%s]\tat %s\n", lu.name, sum.Budget.WorstSite)
	atWorst := map[string]float64{}
	for _, r := range sum.Budget.AtWorst {
		atWorst[r.Contributor+"\x00"+r.Term] = r.Share
	}
	for _, r := range sum.Budget.Panel[:min(budgetRows, len(sum.Budget.Panel))] {
		fmt.Fprintf(tw, "  %s\t%s\t%.1f %%\t%.3f\t%.1f %%\n", r.Contributor, r.Term, 100*r.Share, r.SDM/lu.factor, 100*atWorst[r.Contributor+"\x00"+r.Term])
	}
	tw.Flush()
	printCouplingBudget(w, sum.CouplingBudget) // variation.go
	printArrays(w, sum)
	printOrientation(w, sum.Orientation, sum.TurnMinGain, lu)
	if len(paths) > 0 {
		fmt.Fprintf(w, "\nwrote %s\n", strings.Join(paths, ", "))
	}
}

// budgetRows is how many terms of the error budget the table shows, the
// largest first; budget.csv and yield.json have them all.
const budgetRows = 8

// shownOf says, when only the first shown of n rows are listed, which they
// are and where the rest are.
func shownOf(shown, n int) string {
	if n <= shown {
		return ""
	}
	return fmt.Sprintf("; the %d largest of %d terms, all in budget.csv", shown, n)
}

// printArrays writes the per-array table of a yield study, when the panel
// has more than one array (or a coupon array): with one, it would repeat the
// panel's figures.
func printArrays(w io.Writer, sum *drift.YieldSummary) {
	if len(sum.Arrays) < 2 && sum.Coupons == 0 {
		return
	}
	fmt.Fprintf(w, "\nper array:\n")
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  array\tpart\tsites\tparts\tsite yield\tpart yield\tgood parts per panel\t\n")
	for _, g := range sum.Arrays {
		fmt.Fprintf(tw, "  %s\t%s\t%d\t%d\t%s\t%s\t%s\t\n", g.Name, g.Part, g.Sites, g.Parts,
			pctOf(g.SiteYieldMean, g.SiteYieldMeanClosed), partYieldCell(g.PartYieldMean, g.PartYieldBounds), goodPartsCell(g))
	}
	tw.Flush()
}

// pctOf formats a Monte Carlo yield, or the closed-form one when there was
// no Monte Carlo.
func pctOf(mc *float64, closed float64) string {
	if mc != nil {
		return fmt.Sprintf("%.4f %%", 100**mc)
	}
	return fmt.Sprintf("%.4f %%", 100*closed)
}

// partYieldCell formats a Monte Carlo part yield, or its closed-form bounds.
func partYieldCell(mc *float64, b [2]float64) string {
	if mc != nil {
		return fmt.Sprintf("%.4f %%", 100**mc)
	}
	return fmt.Sprintf("%.3f–%.3f %%", 100*b[0], 100*b[1])
}

// goodPartsCell formats an array's expected good parts per panel, saying so
// when they are coupons that count in no total.
func goodPartsCell(g drift.YieldArray) string {
	var c string
	if g.GoodPartsMean != nil {
		c = fmt.Sprintf("%.2f", *g.GoodPartsMean)
	} else {
		c = fmt.Sprintf("%.2f–%.2f", g.GoodPartsBounds[0], g.GoodPartsBounds[1])
	}
	if !g.Product {
		c += " (coupons, not counted)"
	}
	return c
}

// printOrientation writes the orientation study of one job.
func printOrientation(w io.Writer, orients []drift.Orient, minGain float64, lu lengthUnit) {
	printOrientationOf(w, orients, nil, minGain, true, lu)
}

// printOrientationOf writes the orientation study, with the threshold a turn
// must pass; variants, if not nil, names the variant of each line.
func printOrientationOf(w io.Writer, orients []drift.Orient, variants []string, minGain float64, mc bool, lu lengthUnit) {
	if len(orients) == 0 {
		return
	}
	fmt.Fprintf(w, "\norientation (parts kept in place, lines turned 90 deg; closed-form mean site yield):\n")
	if mc {
		fmt.Fprintf(w, "a turn is recommended when its gain exceeds %.2f %% and the Monte Carlo resolution (2 standard errors)\n", 100*minGain)
	} else {
		fmt.Fprintf(w, "a turn is recommended when its gain exceeds %.2f %% (no Monte Carlo ran to confirm it)\n", 100*minGain)
	}
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	head := "  "
	if variants != nil {
		head += "variant\t"
	}
	fmt.Fprintf(tw, "%sarray\tpart\tsite yield\tturned\tgain\tthreshold\trms offset [%s]\tturned\t\n", head, lu.name)
	for k, o := range orients {
		lead := "  "
		if variants != nil {
			lead += variants[k] + "\t"
		}
		fmt.Fprintf(tw, "%s%s\t%s\t%.4f %%\t%.4f %%\t%+.4f %%\t%.4f %%\t%.3f\t%.3f\t%s\n", lead, o.Name, o.Part, 100*o.MeanYield, 100*o.MeanYieldTurned,
			100*o.Gain, 100*o.Threshold, o.RMSOffsetM/lu.factor, o.RMSOffsetTurned/lu.factor, o.Verdict())
	}
	tw.Flush()
}

// variantNames names each job of a comparison by its file name without the
// extension, or by the path as given where two file names are alike.
func variantNames(paths []string) []string {
	names := make([]string, len(paths))
	count := map[string]int{}
	for i, p := range paths {
		b := filepath.Base(p)
		if p == "-" {
			b = "<stdin>"
		}
		names[i] = strings.TrimSuffix(b, filepath.Ext(b))
		count[names[i]]++
	}
	for i, p := range paths {
		if count[names[i]] > 1 {
			names[i] = p
		}
	}
	return names
}

// runVariants is yield with several job files: each is analysed and drawn
// with the same seed (so variants that share their error model are compared
// on the same panels, and their differences are sharper than each figure's
// own error), and one comparison is printed and written.
func (f *yieldFlags) runVariants(ctx context.Context, std stdio, paths []string, set *drift.Settings, turnGain float64, lu lengthUnit) error {
	stdin := 0
	for _, p := range paths {
		if p == "-" {
			stdin++
		}
	}
	if stdin > 1 {
		return usageErr("only one of the job files can be standard input (-)")
	}
	names := variantNames(paths)
	cmp := &drift.VariantComparison{Seed: f.seed, TurnMinGain: registration.TurnThreshold(turnGain, 0)}
	if !f.closedForm {
		cmp.Trials = f.trials
	}
	titles := make([]string, len(paths))
	for i, p := range paths {
		j, a, err := yieldAnalysis(ctx, std, p, set, names[i])
		if err != nil {
			return err
		}
		titles[i] = j.Title
		var sum *drift.YieldSummary
		if !f.closedForm {
			res, err := f.monteCarlo(ctx, std, a, "Monte Carlo of "+names[i])
			if err != nil {
				return err
			}
			sum = a.YieldSummaryTurn(res, f.seed, turnGain)
		}
		cmp.Variants = append(cmp.Variants, a.Variant(names[i], sum, turnGain))
	}
	wrote, err := writeAll(f.out,
		outFile{"variants.csv", func(w io.Writer) error { return writeVariantsCSV(w, cmp) }},
		outFile{"variants.json", func(w io.Writer) error { return writeJSON(w, cmp) }},
		outFile{"variants.png", func(w io.Writer) error { return figure.Variants(w, cmp, titles[0]) }})
	if err != nil {
		return err
	}
	if err := report(std, f.json, cmp, func() { printVariants(std.out, cmp, lu, wrote) }); err != nil {
		return err
	}
	if f.strict {
		for _, v := range cmp.Variants {
			py := v.PartYieldBounds[0] // closed form: below 100 % unless proven otherwise
			if v.PartYieldMean != nil {
				py = *v.PartYieldMean
			}
			if py < 1 {
				return fmt.Errorf("%w: %s: expected part yield %.4f %%", errOutOfSpec, v.Name, 100*py)
			}
		}
	}
	return nil
}

// printVariants writes the comparison table: per variant the panel's
// figures, then per array, then the orientation study.
func printVariants(w io.Writer, cmp *drift.VariantComparison, lu lengthUnit, paths []string) {
	if cmp.Trials > 0 {
		fmt.Fprintf(w, "%d placement variants, %d panels each (seed %d: the same panels for every variant that shares the error model)\n\n",
			len(cmp.Variants), cmp.Trials, cmp.Seed)
	} else {
		fmt.Fprintf(w, "%d placement variants, closed form: site yields exact; part yields and good parts bounded from the site yields alone\n\n",
			len(cmp.Variants))
	}
	first := cmp.Variants[0]
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	if cmp.Trials > 0 {
		fmt.Fprintf(tw, "variant\tsites\tparts\tsite yield\tpart yield\tgood parts per panel\t5th percentile\tvs %s\t\n", first.Name)
	} else {
		fmt.Fprintf(tw, "variant\tsites\tparts\tsite yield\tpart yield\tgood parts per panel\t\n")
	}
	for k, v := range cmp.Variants {
		parts := strconv.Itoa(v.Parts)
		if v.Coupons > 0 {
			parts += fmt.Sprintf(" (+%d coupons)", v.Coupons)
		}
		if cmp.Trials > 0 {
			gp := v.GoodPartsPerPanel
			vs := "" // the first variant is the reference
			if k > 0 {
				vs = fmt.Sprintf("%+.2f", gp.Mean-first.GoodPartsPerPanel.Mean)
			}
			fmt.Fprintf(tw, "%s\t%d\t%s\t%.4f %%\t%.4f %%\t%.2f\t%d\t%s\t\n", v.Name, v.Sites, parts, 100**v.SiteYieldMean,
				100**v.PartYieldMean, gp.Mean, gp.P05, vs)
		} else {
			fmt.Fprintf(tw, "%s\t%d\t%s\t%.4f %%\t%s\t%.2f–%.2f\t\n", v.Name, v.Sites, parts, 100*v.SiteYieldMeanClosed,
				partYieldCell(nil, v.PartYieldBounds), v.GoodPartsBounds[0], v.GoodPartsBounds[1])
		}
	}
	tw.Flush()
	for k, v := range cmp.Variants {
		if v.Dominant == nil {
			continue
		}
		if k == 0 || cmp.Variants[k-1].Dominant == nil {
			fmt.Fprintf(w, "\nlargest share of the coupling variance over the panel:\n")
		}
		fmt.Fprintf(w, "  %s: %s %s (%.1f %%, %.4f dB)\n", v.Name, v.Dominant.Source, v.Dominant.Name, 100*v.Dominant.Share, v.Dominant.SDDB)
	}
	fmt.Fprintf(w, "\nper array:\n")
	tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  variant\tarray\tpart\tsites\tparts\tsite yield\tpart yield\tgood parts per panel\t\n")
	for _, v := range cmp.Variants {
		for _, g := range v.Arrays {
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%d\t%d\t%s\t%s\t%s\t\n", v.Name, g.Name, g.Part, g.Sites, g.Parts,
				pctOf(g.SiteYieldMean, g.SiteYieldMeanClosed), partYieldCell(g.PartYieldMean, g.PartYieldBounds), goodPartsCell(g))
		}
	}
	tw.Flush()
	var orients []drift.Orient
	var on []string
	for _, v := range cmp.Variants {
		for _, o := range v.Orientation {
			orients = append(orients, o)
			on = append(on, v.Name)
		}
	}
	printOrientationOf(w, orients, on, cmp.TurnMinGain, cmp.Trials > 0, lu)
	if len(paths) > 0 {
		fmt.Fprintf(w, "\nwrote %s\n", strings.Join(paths, ", "))
	}
}

// writeVariantsCSV writes the comparison (variants.csv): per variant a
// "panel" row, then one "array" row per array. Monte Carlo cells are empty
// in a closed-form comparison.
func writeVariantsCSV(w io.Writer, cmp *drift.VariantComparison) error {
	cw := csv.NewWriter(w)
	if err := cw.Write([]string{"variant", "scope", "array", "part", "product", "sites", "parts",
		"site_yield_mc", "site_yield_closed", "part_yield_mc", "part_yield_low", "part_yield_high",
		"good_parts_mc", "good_parts_low", "good_parts_high"}); err != nil {
		return err
	}
	opt := func(p *float64, digits int) string {
		if p == nil {
			return ""
		}
		return strconv.FormatFloat(*p, 'f', digits, 64)
	}
	num := func(v float64, digits int) string { return strconv.FormatFloat(v, 'f', digits, 64) }
	for _, v := range cmp.Variants {
		var gp *float64
		if v.GoodPartsPerPanel != nil {
			gp = &v.GoodPartsPerPanel.Mean
		}
		if err := cw.Write([]string{v.Name, "panel", "", "", "true", strconv.Itoa(v.Sites), strconv.Itoa(v.Parts),
			opt(v.SiteYieldMean, 6), num(v.SiteYieldMeanClosed, 6), opt(v.PartYieldMean, 6),
			num(v.PartYieldBounds[0], 6), num(v.PartYieldBounds[1], 6),
			opt(gp, 3), num(v.GoodPartsBounds[0], 3), num(v.GoodPartsBounds[1], 3)}); err != nil {
			return err
		}
		for _, g := range v.Arrays {
			if err := cw.Write([]string{v.Name, "array", g.Name, g.Part, strconv.FormatBool(g.Product), strconv.Itoa(g.Sites), strconv.Itoa(g.Parts),
				opt(g.SiteYieldMean, 6), num(g.SiteYieldMeanClosed, 6), opt(g.PartYieldMean, 6),
				num(g.PartYieldBounds[0], 6), num(g.PartYieldBounds[1], 6),
				opt(g.GoodPartsMean, 3), num(g.GoodPartsBounds[0], 3), num(g.GoodPartsBounds[1], 3)}); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}
