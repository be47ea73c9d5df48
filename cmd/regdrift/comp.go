package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"strings"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel/job"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render/figure"
)

type compFlags struct {
	outputFlags
	targets   string
	objective string
	drill     string
	max       string
	step      string
	model     string
	robust    bool
	weight    string
	keep      bool
	width     int
	strict    bool
	solver    solverFlags
}

// flags declares the command's flags on fs.
func (f *compFlags) flags(fs *pflag.FlagSet) {
	f.outputFlags.add(fs)
	fs.StringVar(&f.targets, "targets", "", "measurement file (CSV) whose fitted lot joins the model")
	fs.StringVar(&f.objective, "objective", "worst", "minimise the worst offset (worst, linear programme) or the rms offset (rms)")
	fs.StringVar(&f.drill, "drill-budget", "", "keep each trace layer's registration to the drilled holes within this, per axis (e.g. 2mil)")
	fs.StringVar(&f.max, "max", "1000ppm", "largest artwork scale change per layer and axis")
	fs.StringVar(&f.step, "step", "", "increment the imaging equipment accepts (e.g. 5ppm; default continuous)")
	fs.StringVar(&f.model, "model", "affine", "fit model for --targets: affine, similarity or translation")
	fs.BoolVar(&f.robust, "robust", true, "fit --targets robustly (reject mis-measured targets)")
	fs.StringVar(&f.weight, "weight", "tukey", "robust weight function for --targets: tukey or huber")
	fs.BoolVar(&f.keep, "keep-job-terms", false, "add the measured movement to the job's contributors instead of replacing them for the measured layers")
	fs.IntVar(&f.width, "width", 2400, "width of comp.png in pixels")
	addStrict(fs, &f.strict, "a site is out of spec after compensation")
	f.solver.add(fs)
}

func (f *compFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("comp takes one job file")
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	set := registration.CompSettings{}
	if set.Objective, err = registration.ParseObjective(f.objective); err != nil {
		return usageErr("--objective: %v", err)
	}
	if f.drill != "" {
		if set.DrillBudget, err = unit.Parse(f.drill, unit.Length); err != nil {
			return usageErr("--drill-budget: %v", err)
		}
		if !(set.DrillBudget > 0) {
			return usageErr("--drill-budget: the budget must be positive")
		}
	}
	if set.Max, err = unit.Parse(f.max, unit.Strain); err != nil {
		return usageErr("--max: %v", err)
	}
	if !(set.Max > 0 && set.Max < 0.1) {
		return usageErr("--max: want a positive scale below 10 %%, such as 600ppm")
	}
	if f.step != "" {
		if set.Step, err = unit.Parse(f.step, unit.Strain); err != nil {
			return usageErr("--step: %v", err)
		}
		if !(set.Step > 0 && set.Step <= set.Max) {
			return usageErr("--step: want a positive step not above --max")
		}
	}
	if f.width < 300 || f.width > 20000 {
		return usageErr("--width: want 300 to 20000 pixels, not %d", f.width)
	}
	fset, err := parseFitSettings(f.model, f.robust, f.weight)
	if err != nil {
		return err
	}
	if f.targets == "-" && args[0] == "-" {
		return usageErr("the job and --targets cannot both be standard input")
	}
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	solver, err := f.solver.settings(std)
	if err != nil {
		return err
	}
	model := j.Model
	var fitted, notes []string
	if f.targets != "" {
		fset.Datum = j.Layout.Panel.Datum
		fr, err := runFitFile(f.targets, std.in, fset, 5)
		if err != nil {
			return err
		}
		var lots []registration.Lot
		lots, fitted = measuredLots(std, "comp", j, fr)
		model, notes = drift.MeasuredModel(j.Model, fr.Fits, lots, fr.File, f.keep)
	}
	cmp, err := drift.Compensate(ctx, input(j), model, &set, solver)
	var ce *drift.CompError
	switch {
	case errors.As(err, &ce):
		return badInput(fmt.Errorf("%s: %w", j.File, err))
	case err != nil:
		return solveErr(j, err)
	}
	notes = append(notes, cmp.Notes...)
	sum, paths, err := writeComp(f.out, cmp, fitted, notes, f.width, lu)
	if err != nil {
		return err
	}
	for _, n := range notes {
		fmt.Fprintf(std.err, "regdrift comp: %s\n", n)
	}
	if err := report(std, f.json, sum, func() { printComp(std.out, j.Title, cmp, sum, lu, paths) }); err != nil {
		return err
	}
	if f.strict && sum.After.InSpec < sum.After.Sites {
		return fmt.Errorf("%w: %d of %d sites outside the coupling spec after compensation", errOutOfSpec, sum.After.Sites-sum.After.InSpec, sum.After.Sites)
	}
	return nil
}

// writeComp writes the compensation's files into dir.
func writeComp(dir string, cmp *drift.Comparison, fitted, notes []string, width int, lu lengthUnit) (*drift.CompSummary, []string, error) {
	sum := cmp.Summary(fitted, notes)
	u := lu.units()
	paths, err := writeAll(dir,
		outFile{"comp.csv", func(w io.Writer) error { return cmp.WriteCSV(w, u) }},
		outFile{"comp.json", func(w io.Writer) error { return writeJSON(w, sum) }},
		outFile{"compensation.toml", func(w io.Writer) error { return job.WriteCompensation(w, cmp.Before.In.Source, cmp.Result) }},
		outFile{"comp.png", func(w io.Writer) error { return figure.Comp(w, cmp, sum, width, u) }})
	return sum, paths, err
}

func printComp(w io.Writer, title string, cmp *drift.Comparison, s *drift.CompSummary, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "%s\nartwork scale compensation (objective: %s)\n", title, s.Objective)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "layer\tmovement X [ppm]\tmovement Y [ppm]\tartwork X [ppm]\tfactor X\tartwork Y [ppm]\tfactor Y\tfree\n")
	for _, l := range s.Layers {
		fmt.Fprintf(tw, "%s\t%+.1f\t%+.1f\t%+.2f\t%.9f\t%+.2f\t%.9f\t%s\n", l.Layer, l.MeanScaleX, l.MeanScaleY,
			l.ScaleXPPM, l.FactorX, l.ScaleYPPM, l.FactorY, strings.Join(l.Free, ", "))
	}
	tw.Flush()
	for _, p := range s.Pairs {
		fmt.Fprintf(w, "difference %s − %s: X %+.2f ppm, Y %+.2f ppm (this is what moves the offsets)\n", p.Upper, p.Lower, p.DiffXPPM, p.DiffYPPM)
	}
	fmt.Fprintf(w, "common part: %s\n", s.Common)
	for _, n := range cmp.Result.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "\tworst offset [%s]\trms offset [%s]\tin spec\tsite yield\tdrill worst [%s]\t\n", lu.name, lu.name, lu.name)
	for _, r := range []struct {
		name string
		v    drift.CompState
	}{{"before", s.Before}, {"after", s.After}} {
		fmt.Fprintf(tw, "%s\t%.3f\t%.3f\t%d/%d\t%.4f %%\t%.3f\t\n", r.name, r.v.WorstOffsetM/lu.factor, r.v.RMSOffsetM/lu.factor,
			r.v.InSpec, r.v.Sites, 100*r.v.SiteYield, r.v.DrillWorstM/lu.factor)
	}
	tw.Flush()
	fmt.Fprintf(w, "offsets are the mean misregistration across the lines (design offset excluded); in spec and yield use the coupling curve\n")
	for _, p := range paths {
		fmt.Fprintf(w, "wrote %s\n", p)
	}
}

// measuredLots returns the lots of fr whose layers (both, for a pair) are
// copper layers of j, and their names; the others are skipped with a
// warning from command cmd.
func measuredLots(std stdio, cmd string, j *Job, fr *fitRun) ([]registration.Lot, []string) {
	copper := map[string]bool{}
	for _, l := range j.Stackup.Layers {
		if l.Kind == section.Copper {
			copper[l.Name] = true
		}
	}
	var lots []registration.Lot
	var names []string
	for _, l := range fr.Lots {
		u, lo, rel := registration.SplitLayer(l.Layer)
		if !copper[u] || (rel && !copper[lo]) {
			fmt.Fprintf(std.err, "regdrift %s: warning: %s: layer %q is not a copper layer of %s; its targets are skipped\n", cmd, fr.File, l.Layer, j.File)
			continue
		}
		lots = append(lots, l)
		names = append(names, l.Layer)
	}
	return lots, names
}
