package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render/figure"
)

type sweepFlags struct {
	outputFlags
	section string
	offsets string
	solver  solverFlags
}

// flags declares the command's flags on fs.
func (f *sweepFlags) flags(fs *pflag.FlagSet) {
	fs.StringVar(&f.section, "section", "", "section to sweep (default: the first)")
	fs.StringVar(&f.offsets, "offsets", "", "offsets FROM:TO:STEP, each with a unit, e.g. -5mil:5mil:0.5mil")
	f.outputFlags.add(fs)
	f.solver.add(fs)
}

// pickSection returns the index of the named section, or of the first.
func pickSection(j *Job, name string) (int, error) {
	if name == "" {
		return 0, nil
	}
	for i, s := range j.Sections {
		if s.Name == name {
			return i, nil
		}
	}
	var names []string
	for _, s := range j.Sections {
		names = append(names, s.Name)
	}
	return 0, usageErr("--section: no section named %q in %s (have %v)", name, j.File, names)
}

func (f *sweepFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("sweep takes one job file")
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
	si, err := pickSection(j, f.section)
	if err != nil {
		return err
	}
	s := j.Sections[si]
	var c *section.Curve
	var hit bool
	if f.offsets == "" {
		// The curve map, yield, tol and comp read (one range rule, one cache entry).
		sc, err := drift.SolveSection(ctx, s, drift.Reach(drift.New(input(j), nil))[si], set)
		if err != nil {
			return solveErr(j, err)
		}
		c, hit = sc.Curve, sc.FromCache
	} else {
		r, err := unit.ParseRange(f.offsets, unit.Length)
		if err != nil {
			return usageErr("--offsets: %v", err)
		}
		offsets := r.Values()
		if len(offsets) < 2 {
			return usageErr("--offsets: %q gives fewer than two offsets", f.offsets)
		}
		if c, hit, err = drift.SolveAt(ctx, s, offsets, set); err != nil {
			var fe *section.FieldError
			if errors.As(err, &fe) && fe.Key == "offsets" {
				return usageErr("--offsets: %v", fe.Err)
			}
			return solveErr(j, err)
		}
	}
	res := drift.Sweep(s, c, hit)
	paths, err := writeAll(f.out,
		outFile{"sweep.csv", func(w io.Writer) error { return drift.WriteSweepCSV(w, c, lu.units()) }},
		outFile{"sweep.png", func(w io.Writer) error { return figure.Sweep(w, s, c, lu.units()) }})
	if err != nil {
		return err
	}
	return report(std, f.json, res, func() { printSweep(std.out, s, c, res, lu, paths) })
}

func printSweep(w io.Writer, s *section.Section, c *section.Curve, r *drift.SweepSummary, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "section %s: %d offsets, f0 %.4g GHz, coupled length %.1f %s, z_ref %.1f ohm\n",
		s.Name, len(c.Points), c.Frequency/1e9, c.Length/lu.factor, lu.name, s.ZRef)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "offset [%s]\tcoupling [dB]\tdirectivity [dB]\tz1 [ohm]\tz2 [ohm]\tk_c\tk_l\t\n", lu.name)
	for _, p := range c.Points {
		fmt.Fprintf(tw, "%.3f\t%.4f\t%.1f\t%.2f\t%.2f\t%.4f\t%.4f\t\n", p.Offset/lu.factor, p.CouplingDB, p.DirectivityDB, p.ZLine[0], p.ZLine[1], p.KC, p.KL)
	}
	tw.Flush()
	inSpec := math.Abs(c.Coupling(s.NominalOffset())-s.Spec.Coupling) <= s.Spec.Tolerance
	switch {
	case len(r.LeavesSpecAtM) == 0 && inSpec:
		fmt.Fprintf(w, "coupling stays within %.2f ± %.2f dB over the whole range\n", s.Spec.Coupling, s.Spec.Tolerance)
	case len(r.LeavesSpecAtM) == 0:
		fmt.Fprintf(w, "warning: coupling is outside %.2f ± %.2f dB over the whole range, design offset included\n", s.Spec.Coupling, s.Spec.Tolerance)
	default:
		fmt.Fprintf(w, "coupling crosses a spec limit (%.2f ± %.2f dB) at offsets:", s.Spec.Coupling, s.Spec.Tolerance)
		for _, x := range r.LeavesSpecAtM {
			fmt.Fprintf(w, " %+.3f", x/lu.factor)
		}
		fmt.Fprintf(w, " %s\n", lu.name)
		step := 0.0
		for k := 1; k < len(c.Points); k++ {
			step = math.Max(step, c.Points[k].Offset-c.Points[k-1].Offset)
		}
		if step > 1.01*unit.Mil {
			fmt.Fprintf(w, "note: crossings are interpolated between solved offsets up to %.3g %s apart; 'regdrift tol' finds them by direct solves\n", step/lu.factor, lu.name)
		}
	}
	for _, p := range paths {
		fmt.Fprintf(w, "wrote %s\n", p)
	}
}
