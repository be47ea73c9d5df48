package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
	"sync"
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
	sens    bool
	excurs  string
	mesh    bool
}

// flags declares the command's flags on fs.
func (f *sweepFlags) flags(fs *pflag.FlagSet) {
	fs.StringVar(&f.section, "section", "", "section to sweep (default: the first)")
	fs.StringVar(&f.offsets, "offsets", "", "offsets FROM:TO:STEP, each with a unit, e.g. -5mil:5mil:0.5mil")
	fs.BoolVar(&f.sens, "sensitivities", false, "also solve the derivative of coupling, directivity, impedances and εeff with respect to every parameter (sensitivity.csv, sensitivity.png)")
	fs.StringVar(&f.excurs, "excursions", "", "with --sensitivities: the excursions ranked at the design offset, e.g. thickness=5%,er=0.05,width=0.3mil (default thickness=10%,er=0.1,width=0.5mil,etch=0.5mil,copper=0.3mil)")
	fs.BoolVar(&f.mesh, "mesh", false, "overlay the mesh the solver used at the design offset on the cross-section picture (section.png)")
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

// maxSweepOffsets bounds the solved offsets of one sweep: each is a field
// solve, and a few hundred cover ±20 mil at 0.1 mil.
const maxSweepOffsets = 401

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
	if f.excurs != "" && !f.sens {
		return usageErr("--excursions needs --sensitivities")
	}
	ex, err := drift.ParseExcursions(f.excurs)
	if err != nil {
		return usageErr("--excursions: %v", err)
	}
	set.Sensitivities = f.sens
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	si, err := pickSection(j, f.section)
	if err != nil {
		return err
	}
	s := j.Sections[si]
	if f.sens {
		if err := drift.CheckExcursions(s, ex); err != nil {
			return usageErr("--excursions: section %q: %v", s.Name, err)
		}
	}
	// Without the mesh the cross-section picture does not depend on the
	// solve: it is drawn on the side while the offsets solve, which leaves
	// both cores to the sweep plot afterwards.
	var early *drawnAhead
	if !f.mesh {
		early = drawAhead(s, lu.units())
	}
	var c *section.Curve
	var hit bool
	if f.offsets == "" {
		// The curve map, yield, tol and comp read (one range rule, one cache entry).
		var sc *drift.Curve
		err := step(progressStd(std, f.json), "field solves of section "+s.Name, func() (err error) {
			sc, err = drift.SolveCurve(ctx, set, si, drift.New(input(j), nil))
			return err
		})
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
		if len(offsets) > maxSweepOffsets {
			return usageErr("--offsets: %q gives %d offsets; at most %d (the curve is interpolated between them: a step of a tenth of a mil is fine enough for any drift)", f.offsets, len(offsets), maxSweepOffsets)
		}
		if err = step(progressStd(std, f.json), fmt.Sprintf("field solves of section %s at %d offsets", s.Name, len(offsets)), func() (err error) {
			c, hit, err = drift.SolveAt(ctx, s, offsets, set)
			return err
		}); err != nil {
			var fe *section.FieldError
			if errors.As(err, &fe) && fe.Key == "offsets" {
				return usageErr("--offsets: %v", fe.Err)
			}
			return solveErr(j, err)
		}
	}
	res := drift.Sweep(s, c, hit)
	files := []outFile{
		{"sweep.csv", func(w io.Writer) error { return drift.WriteSweepCSV(w, c, lu.units()) }},
		{"sweep.png", func(w io.Writer) error { return figure.Sweep(w, s, c, lu.units()) }}}
	var pic func(io.Writer) error
	if early != nil {
		pic, err = early.result()
	} else {
		pic, err = sectionPicture(s, c, f.mesh, lu.units())
	}
	if err != nil {
		return err
	}
	files = append(files, outFile{sectionFile(j, s), pic})
	if f.sens {
		res.Sensitivities = drift.SensitivityRows(c)
		res.Impacts = drift.Impacts(s, c, ex)
		files = append(files,
			outFile{"sensitivity.csv", func(w io.Writer) error { return drift.WriteSensitivityCSV(w, c, lu.units()) }},
			outFile{"sensitivity.png", func(w io.Writer) error { return figure.Sensitivity(w, s, res.Impacts, lu.units()) }})
	}
	paths, err := writeAll(f.out, prerender(files)...)
	if err != nil {
		return err
	}
	return report(std, f.json, sweepJSON{res, copperBuild(s)}, func() { printSweep(std.out, s, c, res, lu, paths) })
}

// sweepJSON is the sweep's --json report: the summary and the copper build.
type sweepJSON struct {
	*drift.SweepSummary
	Copper []copperJSON `json:"copper"`
}

// copperJSON is one copper layer of the stackup: its finished thickness
// (what the solver uses) and, when it was given as foil plus plating, the
// foil and each step.
type copperJSON struct {
	Layer     string    `json:"layer"`
	FoilM     *float64  `json:"foil_m,omitempty"`
	PlatingM  []float64 `json:"plating_m,omitempty"`
	FinishedM float64   `json:"finished_m"`
}

// copperBuild lists every copper layer of s's stackup, top to bottom.
func copperBuild(s *section.Section) []copperJSON {
	var out []copperJSON
	for _, l := range s.Stackup.Layers {
		if l.Kind != section.Copper {
			continue
		}
		c := copperJSON{Layer: l.Name, FinishedM: l.Thickness, PlatingM: l.Plating}
		if l.Foil != 0 || len(l.Plating) > 0 {
			foil := l.Foil
			c.FoilM = &foil
		}
		out = append(out, c)
	}
	return out
}

// printImpacts writes the ranked coupling changes at the design offset.
func printImpacts(w io.Writer, s *section.Section, imp []drift.Impact, lu lengthUnit) {
	fmt.Fprintf(w, "coupling change at the design offset (%.3f %s) over each parameter's excursion, first order, largest first:\n",
		s.NominalOffset()/lu.factor, lu.name)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "parameter\texcursion\tdcoupling/dp\tchange [dB]\t\n")
	for _, im := range imp {
		if im.Per == "er" {
			fmt.Fprintf(tw, "%s\t±%.3g\t%.4g dB/er\t%+.4f\t\n", im.Parameter, im.Excursion, im.CouplingDB, im.ChangeDB)
		} else {
			fmt.Fprintf(tw, "%s\t±%.3g %s\t%.4g dB/%s\t%+.4f\t\n", im.Parameter, im.Excursion/lu.factor, lu.name, im.CouplingDB*lu.factor, lu.name, im.ChangeDB)
		}
	}
	tw.Flush()
}

func printSweep(w io.Writer, s *section.Section, c *section.Curve, r *drift.SweepSummary, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "section %s: %d offsets, f0 %.4g GHz, coupled length %.1f %s, z_ref %.1f ohm\n",
		s.Name, len(c.Points), c.Frequency/1e9, c.Length/lu.factor, lu.name, s.ZRef)
	printCopperBuild(w, s, lu)
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
	if len(r.Impacts) > 0 {
		printImpacts(w, s, r.Impacts, lu)
	}
	for _, p := range paths {
		fmt.Fprintf(w, "wrote %s\n", p)
	}
}

// printCopperBuild writes, for each copper layer given as foil plus
// plating, the foil, each step and the finished thickness the solver uses.
func printCopperBuild(w io.Writer, s *section.Section, lu lengthUnit) {
	for _, l := range s.Stackup.Layers {
		if l.Kind != section.Copper || (l.Foil == 0 && len(l.Plating) == 0) {
			continue
		}
		fmt.Fprintf(w, "copper %s: foil %.3f", l.Name, l.Foil/lu.factor)
		for _, p := range l.Plating {
			fmt.Fprintf(w, " + plating %.3f", p/lu.factor)
		}
		fmt.Fprintf(w, " = %.3f %s finished\n", l.Thickness/lu.factor, lu.name)
	}
}

// sectionFile names the cross-section picture: section.png, or with several
// sections in the job section-NAME.png, so that sweeps of each into one
// directory keep every picture.
func sectionFile(j *Job, s *section.Section) string {
	if len(j.Sections) > 1 {
		return "section-" + fileSafe(s.Name) + ".png"
	}
	return "section.png"
}

// sectionPicture prepares section.png at the design offset: the solver's
// drawing of the section and, with mesh, the mesh it solved there at the
// level the curve's points report (Convergence.Coarse).
func sectionPicture(s *section.Section, c *section.Curve, mesh bool, u unit.Output) (func(io.Writer) error, error) {
	nom := s.NominalOffset()
	d, err := s.Drawing(nom)
	if err != nil {
		return nil, err
	}
	var m *section.DrawnMesh
	if mesh {
		offs := make([]float64, len(c.Points))
		for i, p := range c.Points {
			offs[i] = p.Offset
		}
		if m, err = s.SweepMesh(offs, nom, c.Points[0].Convergence.Coarse.Level); err != nil {
			return nil, err
		}
	}
	return func(w io.Writer) error { return figure.Section(w, s, d, m, u) }, nil
}

// drawnAhead is section.png without the mesh, drawn into memory on its own
// goroutine (drawAhead) while the sweep solves.
type drawnAhead struct {
	done  chan struct{}
	buf   bytes.Buffer
	err   error
	panic any
}

// drawAhead starts drawing s's cross-section picture without the mesh, as
// sectionPicture would.
func drawAhead(s *section.Section, u unit.Output) *drawnAhead {
	a := &drawnAhead{done: make(chan struct{})}
	go func() {
		defer close(a.done)
		// A panic is re-raised on the caller's goroutine (result), where
		// realMain reports it as a crash.
		defer func() { a.panic = recover() }()
		var pic func(io.Writer) error
		if pic, a.err = sectionPicture(s, nil, false, u); a.err == nil {
			a.err = pic(&a.buf)
		}
	}()
	return a
}

// result waits for the picture and returns a writer of its bytes, or the
// error that stopped it.
func (a *drawnAhead) result() (func(io.Writer) error, error) {
	<-a.done
	if a.panic != nil {
		panic(a.panic)
	}
	if a.err != nil {
		return nil, a.err
	}
	return func(w io.Writer) error {
		_, err := w.Write(a.buf.Bytes())
		return err
	}, nil
}

// prerender draws the figures among files at once, each into memory on its
// own goroutine (a figure draws on one core; sweep.png and section.png
// together), and returns files whose writers copy the finished bytes, for
// writeAll to commit in order.
func prerender(files []outFile) []outFile {
	out := slices.Clone(files)
	var wg sync.WaitGroup
	panics := make([]any, len(files))
	for i, f := range files {
		if !strings.HasSuffix(f.name, ".png") {
			continue
		}
		var buf bytes.Buffer
		var err error
		wg.Add(1)
		go func() {
			defer wg.Done()
			// A figure's panic is re-raised on the caller's goroutine,
			// where realMain reports it as a crash.
			defer func() { panics[i] = recover() }()
			err = f.write(&buf)
		}()
		out[i].write = func(w io.Writer) error {
			if err != nil {
				return err
			}
			_, e := w.Write(buf.Bytes())
			return e
		}
	}
	wg.Wait()
	for _, p := range panics {
		if p != nil {
			panic(p)
		}
	}
	return out
}
