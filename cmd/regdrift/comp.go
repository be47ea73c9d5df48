package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
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
	applied   []string
	history   string
	construct string
	width     int
	strict    bool
	solver    solverFlags
}

// flags declares the command's flags on fs.
func (f *compFlags) flags(fs *pflag.FlagSet) {
	f.outputFlags.add(fs)
	fs.StringVar(&f.targets, "targets", "", "measurement file (CSV) whose fitted lot joins the model")
	fs.StringVar(&f.objective, "objective", "yield", "maximise the expected site yield (yield), or minimise the largest (worst) or rms (rms) share of each site's window its offset uses")
	fs.StringVar(&f.drill, "drill-budget", "", "keep each trace layer's registration to the drilled holes within this, per axis (e.g. 2mil); a constraint only")
	fs.StringArrayVar(&f.applied, "applied", nil, appliedHelp)
	fs.StringVar(&f.history, "history", "", "history database (SQLite, see regdrift history): without --targets the next lot's movement of each trace layer comes from it; with --targets the lot is compared with its limits")
	fs.StringVar(&f.construct, "construction", "", "with --history: read the history of this construction key only (default: every lot of each layer name)")
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
	if f.construct != "" && f.history == "" {
		return usageErr("--construction needs --history")
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
	var appliedSrc map[string]string
	if set.Applied, appliedSrc, err = parseApplied(f.applied, std); err != nil {
		return err
	}
	model := j.Model
	var fitted, notes []string
	var lots []registration.Lot
	if f.targets != "" {
		fset.Datum = j.Layout.Panel.Datum
		fr, err := runFitFile(f.targets, std.in, fset, 5)
		if err != nil {
			return err
		}
		lots, fitted = measuredLots(std, "comp", j, fr)
		model, notes = drift.MeasuredModel(j.Model, fr.Fits, lots, fr.File, f.keep)
		set.SE = lotSE(lots)
	}
	var checks []drift.HistoryCheck
	if f.history != "" {
		hs, err := readLayerHistory(ctx, f.history, f.construct, traceLayers(input(j)))
		if err != nil {
			return err
		}
		if f.targets == "" {
			var hnotes []string
			model, set.SE, hnotes = historyModel(model, hs, f.history)
			notes = append(notes, hnotes...)
		} else {
			checks = historyChecks(hs, lots, set.Applied)
			for _, c := range checks {
				where := "inside"
				if !c.Inside {
					where = "OUTSIDE"
				}
				notes = append(notes, fmt.Sprintf("layer %s %s: this lot moved %+.1f ppm, %s the history's limits %+.1f … %+.1f ppm (centre %+.1f, %d lots)",
					c.Layer, c.Axis, c.MovementPPM, where, c.LCLPPM, c.UCLPPM, c.CentrePPM, c.Lots))
			}
		}
	}
	var more []string
	if model, more, err = withApplied(j, model, lots, set.Applied, appliedSrc); err != nil {
		return err
	}
	notes = append(notes, more...)
	if len(set.Applied) > 0 && slices.ContainsFunc(fitted, isRelative) {
		notes = append(notes, "a relative measurement holds the upper layer's movement seen from the lower one: the per-layer movement column is not separable there, while the changes and settings are")
	}
	if set.DrillBudget > 0 && slices.ContainsFunc(fitted, isRelative) {
		notes = append(notes, "--drill-budget: a relative measurement (layer against layer) carries no registration to the drilled holes; the budget acts on the job's model of those layers")
	}
	var cmp *drift.Comparison
	err = step(progressStd(std, f.json), "compensation (field solves, optimisation)", func() (err error) {
		cmp, err = drift.Compensate(ctx, input(j), model, &set, solver)
		return err
	})
	var ce *drift.CompError
	switch {
	case errors.As(err, &ce):
		return badInput(fmt.Errorf("%s: %w", j.File, err))
	case err != nil:
		return solveErr(j, err)
	}
	notes = append(notes, cmp.Notes...)
	sum, paths, err := writeCompChecked(f.out, cmp, fitted, notes, checks, f.width, lu)
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
	return writeCompChecked(dir, cmp, fitted, notes, nil, width, lu)
}

// writeCompChecked is writeComp with the lot's comparison with its history.
func writeCompChecked(dir string, cmp *drift.Comparison, fitted, notes []string, checks []drift.HistoryCheck, width int, lu lengthUnit) (*drift.CompSummary, []string, error) {
	sum := cmp.Summary(fitted, notes)
	sum.History = checks
	u := lu.units()
	paths, err := writeAll(dir,
		outFile{"comp.csv", func(w io.Writer) error { return cmp.WriteCSV(w, u) }},
		outFile{"comp.json", func(w io.Writer) error { return writeJSON(w, sum) }},
		outFile{"compensation.toml", func(w io.Writer) error { return job.WriteCompensation(w, cmp.Before.In.Source, cmp.Result) }},
		outFile{"comp.png", func(w io.Writer) error { return figure.Comp(w, cmp, sum, width, u) }})
	return sum, paths, err
}

func printComp(w io.Writer, title string, cmp *drift.Comparison, s *drift.CompSummary, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "%s\nartwork scale compensation (objective: %s)\n", title, objectiveText(s.Objective))
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "layer\taxis\tmovement [ppm]\tapplied [ppm]\tchange [ppm]\tnew setting [ppm]\tnew factor\tstd error [ppm]\t\n")
	for _, l := range s.Layers {
		for _, a := range []struct {
			name                               string
			move, applied, change, set, factor float64
			se                                 float64
			free                               bool
		}{{"X", l.MovementXPPM, l.AppliedXPPM, l.ScaleXPPM, l.SettingXPPM, l.SettingFactorX, l.SEXPPM, l.FreeX},
			{"Y", l.MovementYPPM, l.AppliedYPPM, l.ScaleYPPM, l.SettingYPPM, l.SettingFactorY, l.SEYPPM, l.FreeY}} {
			se := "-"
			if a.se > 0 {
				se = fmt.Sprintf("±%.2f", a.se)
			}
			if a.free {
				se = "free (moves no offset)"
			}
			fmt.Fprintf(tw, "%s\t%s\t%+.2f\t%+.2f\t%+.2f\t%+.2f\t%.9f\t%s\t\n", l.Layer, a.name, a.move, a.applied, a.change, a.set, a.factor, se)
		}
	}
	tw.Flush()
	fmt.Fprintf(w, "movement: the material's mean scale with the applied artwork taken out; new setting = (1 + applied)(1 + change) − 1\n")
	for _, p := range s.Pairs {
		fmt.Fprintf(w, "difference %s − %s: X %+.2f ppm, Y %+.2f ppm (this is what moves the offsets)\n", p.Upper, p.Lower, p.DiffXPPM, p.DiffYPPM)
	}
	fmt.Fprintf(w, "common part: %s\n", s.Common)
	for _, n := range cmp.Result.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	drill := s.Before.DrillWorstM != nil
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "\tworst offset [%s]\trms offset [%s]\twindow used\tin spec\tsite yield\t", lu.name, lu.name)
	if drill {
		fmt.Fprintf(tw, "drill worst [%s]\t", lu.name)
	}
	fmt.Fprintf(tw, "\n")
	for _, r := range []struct {
		name string
		v    drift.CompState
	}{{"keep applied", s.Before}, {"recommended", s.After}} {
		used := "-"
		if r.v.WindowUsed != nil {
			used = fmt.Sprintf("%.3f", *r.v.WindowUsed)
		}
		fmt.Fprintf(tw, "%s\t%.3f\t%.3f\t%s\t%d/%d\t%.4f %%\t", r.name, r.v.WorstOffsetM/lu.factor, r.v.RMSOffsetM/lu.factor,
			used, r.v.InSpec, r.v.Sites, 100*r.v.SiteYield)
		if drill {
			fmt.Fprintf(tw, "%.3f\t", *r.v.DrillWorstM/lu.factor)
		}
		fmt.Fprintf(tw, "\n")
	}
	tw.Flush()
	if s.BelowApplied {
		fmt.Fprintf(w, "WARNING: the recommendation predicts a LOWER site yield than keeping the applied artwork (see the notes)\n")
	}
	fmt.Fprintf(w, "offsets are the mean misregistration across the lines (design offset excluded, as in comp.csv); window used is (|mean − window centre| + 3σ)/half-width at the worst site; in spec and yield use each section's coupling curve\n")
	if !drill {
		fmt.Fprintf(w, "no drill registration is shown: a relative measurement carries none\n")
	}
	for _, p := range paths {
		fmt.Fprintf(w, "wrote %s\n", p)
	}
}

// objectiveText describes an objective for the table.
func objectiveText(o string) string {
	switch o {
	case "yield":
		return "yield, the expected site yield over every site's own allowed interval"
	case "worst":
		return "worst, the largest share of a site's window its mean ± 3σ uses"
	}
	return "rms, the rms of each site's mean offset from its window's centre over the half-width"
}

// isRelative reports whether a measured layer name is a pair ("L3-L4").
func isRelative(layer string) bool {
	_, _, rel := registration.SplitLayer(layer)
	return rel
}

// lotSE returns the standard error of each measured layer's mean scale
// terms, the lot's panel-to-panel σ over √panels (a relative lot's belongs to
// its upper layer, which carries it in the model).
func lotSE(lots []registration.Lot) map[string]registration.MovementSE {
	se := map[string]registration.MovementSE{}
	for _, l := range lots {
		upper, _, _ := registration.SplitLayer(l.Layer)
		n := math.Sqrt(float64(l.Panels))
		se[upper] = registration.MovementSE{X: l.SD[registration.ScaleX] / n, Y: l.SD[registration.ScaleY] / n, Panels: l.Panels}
	}
	return se
}

// withApplied checks the applied artwork against the job and the measured
// lots and returns the model of the lot as built: a measured layer's fit
// already contains its artwork, while a layer the job models (its material
// movement) gets a fixed contributor with its applied scale, so that "no
// change" keeps today's artwork for every layer (to first order: the sum of
// the scales stands for the product, a difference of about a·m, 0.04 ppm at
// 200 ppm each).
func withApplied(j *Job, model *registration.Model, lots []registration.Lot, applied registration.AppliedSet, src map[string]string) (*registration.Model, []string, error) {
	if len(applied) == 0 {
		return model, nil, nil
	}
	copper := map[string]bool{}
	for _, l := range j.Stackup.Layers {
		if l.Kind == section.Copper {
			copper[l.Name] = true
		}
	}
	measured := registration.MeasuredLayers(lots)
	names := applied.Layers()
	out := &registration.Model{Datum: model.Datum, Contributors: slices.Clone(model.Contributors)}
	var notes []string
	for _, l := range names {
		a := applied[l]
		if !copper[l] {
			where := "--applied"
			if a.Row > 0 {
				where = fmt.Sprintf("--applied: %s: row %d", src[l], a.Row)
			}
			return nil, nil, usageErr("%s: layer %q is not a copper layer of %s", where, l, j.File)
		}
		if measured[l] {
			continue
		}
		c := registration.Contributor{Name: "applied artwork " + l, Layers: []string{l}}
		c.Terms[registration.ScaleX] = registration.Term{Mean: a.ScaleX}
		c.Terms[registration.ScaleY] = registration.Term{Mean: a.ScaleY}
		out.Contributors = append(out.Contributors, c)
		notes = append(notes, fmt.Sprintf("layer %s is not measured: its applied artwork (X %+.1f ppm, Y %+.1f ppm) is added to the job's movement, so the model is the lot as built", l, a.ScaleX*1e6, a.ScaleY*1e6))
	}
	return out, notes, nil
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
