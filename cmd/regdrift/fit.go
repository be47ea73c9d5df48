package main

import (
	"context"
	"errors"
	"fmt"
	"github.com/regdrift/regdrift/registration/fitreport"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/job"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/render/figure"
)

type fitFlags struct {
	outputFlags
	model        string
	robust       bool
	weight       string
	datum        string
	panelSize    string
	contributors string
	grid         int
	width        int
	origin       string
	flipY        bool
	applied      []string
}

// flags declares the command's flags on fs.
func (f *fitFlags) flags(fs *pflag.FlagSet) {
	f.outputFlags.add(fs)
	fs.StringVar(&f.model, "model", "affine", "terms fitted: affine (6), similarity (4) or translation (2)")
	fs.BoolVar(&f.robust, "robust", false, "reweight iteratively and reject mis-measured targets")
	fs.StringVar(&f.weight, "weight", "tukey", "robust weight function: tukey (after huber) or huber")
	fs.StringVar(&f.datum, "datum", "0in,0in", "point that rotation and scale act about, panel frame (use the job's datum)")
	fs.StringVar(&f.panelSize, "panel", "", "panel size for fit.png, e.g. 18in,24in (default: the targets' extent)")
	fs.StringVar(&f.contributors, "contributors", "", "write the lot as TOML [[contributor]] blocks to FILE")
	fs.IntVar(&f.grid, "grid", 5, "nodes per axis of the pooled residual grid")
	fs.IntVar(&f.width, "width", 2400, "width of fit.png in pixels")
	fs.StringVar(&f.origin, "origin", "centre", "where the targets' x,y origin lies on the panel: centre, lower-left, upper-left (these two need --panel) or X,Y in the panel frame")
	fs.BoolVar(&f.flipY, "flip-y", false, "the targets' y axis points down the panel: y and dy change sign")
	fs.StringArrayVar(&f.applied, "applied", nil, appliedHelp)
}

// frame reads --origin and --flip-y; size is --panel's (zero if not given).
func (f *fitFlags) frame(size panel.Vec) (registration.Frame, error) {
	fr := registration.Frame{FlipY: f.flipY}
	switch strings.ToLower(f.origin) {
	case "centre", "center":
	case "lower-left", "upper-left":
		if size.X == 0 {
			return fr, usageErr("--origin %s: give the panel's size with --panel", f.origin)
		}
		fr.Origin = panel.Vec{X: -size.X / 2, Y: -size.Y / 2}
		if strings.EqualFold(f.origin, "upper-left") {
			fr.Origin.Y = size.Y / 2
		}
	default:
		o, err := parseVecFlag("origin", f.origin)
		if err != nil {
			return fr, usageErr("--origin: want centre, lower-left, upper-left or X,Y with units, not %q", f.origin)
		}
		fr.Origin = o
	}
	return fr, nil
}

// parseVecFlag reads "X,Y" with a length unit on each value.
func parseVecFlag(name, s string) (panel.Vec, error) {
	parts := strings.Split(s, ",")
	if len(parts) != 2 {
		return panel.Vec{}, usageErr("--%s: want two lengths X,Y such as 0in,0in, not %q", name, s)
	}
	var v [2]float64
	for i, p := range parts {
		x, err := unit.Parse(p, unit.Length)
		if err != nil {
			return panel.Vec{}, usageErr("--%s: %v", name, err)
		}
		v[i] = x
	}
	return panel.Vec{X: v[0], Y: v[1]}, nil
}

// fitRun is a finished fit of a measurement file.
type fitRun struct{ *fitreport.Report }

// runFitFile reads and fits a measurement file in the panel frame; bad
// input is marked.
func runFitFile(path string, stdin io.Reader, set registration.FitSettings, grid int) (*fitRun, error) {
	return runFitFileIn(path, stdin, set, grid, registration.Frame{}, panel.Vec{})
}

// runFitFileIn is runFitFile for targets in the frame fr; a target off a
// panel of size (when not zero) is bad input naming its row.
func runFitFileIn(path string, stdin io.Reader, set registration.FitSettings, grid int, fr registration.Frame, size panel.Vec) (*fitRun, error) {
	ts, name, err := readTargets(path, stdin, fr, size)
	if err != nil {
		return nil, err
	}
	for _, g := range ts.Groups {
		if _, lower, rel := registration.SplitLayer(g.Layer); rel && lower == "" {
			ts.Close()
			return nil, badInput(&registration.CSVError{File: name, Row: g.FirstRow(), Column: "layer", Err: fmt.Errorf("%q: bad layer pair", g.Layer)})
		}
	}
	r, err := fitreport.New(name, ts, set, grid)
	if err != nil {
		ts.Close()
		// A fit the targets cannot make is bad input; a failure of the
		// targets' temporary file is not.
		if fe := (*registration.FitError)(nil); errors.As(err, &fe) {
			return nil, badInput(fmt.Errorf("%s: %w", name, err))
		}
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return &fitRun{r}, nil
}

// parseFitSettings turns the fit flags (--model, --robust, --weight) that
// fit, comp and history add share into the fitter's settings; bad values are
// usage errors naming the flag.
func parseFitSettings(model string, robust bool, weight string) (registration.FitSettings, error) {
	m, err := registration.ParseFitModel(model)
	if err != nil {
		return registration.FitSettings{}, usageErr("--model: %v", err)
	}
	set := registration.FitSettings{Model: m}
	if robust {
		if set.Robust, err = registration.ParseRobust(weight); err != nil || set.Robust == registration.NoRobust {
			return registration.FitSettings{}, usageErr("--weight: want tukey or huber, not %q", weight)
		}
	}
	return set, nil
}

// isFitOutput reports whether path names one of the files fit writes into dir.
func isFitOutput(path, dir string) bool {
	pd, _ := filepath.Abs(filepath.Dir(path))
	od, _ := filepath.Abs(dir)
	if pd != od {
		return false
	}
	name := filepath.Base(path)
	switch {
	case name == "fit.csv", name == "residuals.csv", name == "fit.png":
		return true
	case strings.HasPrefix(name, "residual-grid-") && strings.HasSuffix(name, ".csv"):
		return true
	}
	return false
}

func (f *fitFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("fit takes one measurement file (CSV)")
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	if f.contributors != "" && isFitOutput(f.contributors, f.out) {
		return usageErr("--contributors: %s is one of fit's own outputs in -o %s", f.contributors, f.out)
	}
	set, err := parseFitSettings(f.model, f.robust, f.weight)
	if err != nil {
		return err
	}
	if set.Datum, err = parseVecFlag("datum", f.datum); err != nil {
		return err
	}
	var size panel.Vec
	if f.panelSize != "" {
		if size, err = parseVecFlag("panel", f.panelSize); err != nil {
			return err
		}
		if !(size.X > 0 && size.Y > 0) {
			return usageErr("--panel: the sizes must be positive")
		}
	}
	if f.grid < 2 || f.grid > 200 {
		return usageErr("--grid: want 2 to 200 nodes per axis, not %d", f.grid)
	}
	if f.width < 300 || f.width > 20000 {
		return usageErr("--width: want 300 to 20000 pixels, not %d", f.width)
	}
	fr, err := f.frame(size)
	if err != nil {
		return err
	}
	if f.applied != nil && args[0] == "-" && slices.Contains(f.applied, "-") {
		return usageErr("the targets and --applied cannot both be standard input")
	}
	r, err := runFitFileIn(args[0], std.in, set, f.grid, fr, size)
	if err != nil {
		return err
	}
	defer r.Close()
	if len(f.applied) > 0 {
		applied, src, err := parseApplied(f.applied, std)
		if err != nil {
			return err
		}
		names := make([]string, 0, len(src))
		for _, s := range src {
			if !slices.Contains(names, s) {
				names = append(names, s)
			}
		}
		slices.Sort(names)
		if _, err := r.SetApplied(applied, strings.Join(names, ", ")); err != nil {
			return badInput(fmt.Errorf("--applied: %w", err))
		}
	}
	paths, err := r.writeFiles(f.out, f.contributors, size, f.width, lu)
	if err != nil {
		return err
	}
	if f.json {
		return writeJSON(std.out, r.Summary())
	}
	r.printTable(std.out, lu)
	for _, p := range paths {
		fmt.Fprintf(std.out, "wrote %s\n", p)
	}
	return nil
}

// writeFiles writes the fit's files into out and, when contributors is not
// "", the lot as contributors to that file, all or none; it returns their
// paths.
func (r *fitRun) writeFiles(out, contributors string, size panel.Vec, width int, lu lengthUnit) ([]string, error) {
	o, err := newOutputs(out)
	if err != nil {
		return nil, err
	}
	defer o.abort()
	if contributors != "" {
		if err := os.MkdirAll(filepath.Dir(contributors), 0o755); err != nil {
			return nil, err
		}
		if err := o.fileAt(contributors, func(w io.Writer) error { return r.writeContributors(w, lu) }); err != nil {
			return nil, err
		}
	}
	if err := o.file("fit.csv", func(w io.Writer) error { return r.WriteFitCSV(w, lu.Output) }); err != nil {
		return nil, err
	}
	if err := o.file("residuals.csv", func(w io.Writer) error { return r.WriteResidualsCSV(w, lu.Output) }); err != nil {
		return nil, err
	}
	for _, l := range r.Lots {
		g := r.Grids[l.Layer]
		if g == nil {
			continue
		}
		if err := o.file("residual-grid-"+l.Layer+".csv", func(w io.Writer) error { return fitreport.WriteGridCSV(w, g, lu.Output) }); err != nil {
			return nil, err
		}
	}
	if err := o.file("fit.png", func(w io.Writer) error {
		return figure.Fit(w, r.File, r.Settings, r.Fits, r.Lots, size, width, lu.units())
	}); err != nil {
		return nil, err
	}
	if err := o.commit(); err != nil {
		return nil, err
	}
	return o.paths(), nil
}

// termHeader returns the table header cells of the terms, "offset_x [mil]\t...".
func termHeader(lu lengthUnit) string {
	var b strings.Builder
	for k := registration.TermKind(0); k < registration.NumTerms; k++ {
		fmt.Fprintf(&b, "%s [%s]\t", k, k.Unit(lu.Output))
	}
	return b.String()
}

// termUnit returns the output unit name and kind of term k (the term table of
// package registration).
func termUnit(k registration.TermKind, lu lengthUnit) (string, unit.Kind) {
	return k.Unit(lu.Output), k.Info().Kind
}

// writeContributors writes the lot as [[contributor]] blocks with units on
// every value (job.WriteContributors).
func (r *fitRun) writeContributors(w io.Writer, lu lengthUnit) error {
	return job.WriteContributors(w, r.File, &r.Settings, r.Fits, r.Lots, lu.Output)
}

func (r *fitRun) printTable(w io.Writer, lu lengthUnit) {
	fmt.Fprintf(w, "%s: %d fits (%s model", r.File, len(r.Fits), r.Settings.Model)
	if r.Settings.Robust != registration.NoRobust {
		fmt.Fprintf(w, ", robust %s", r.Settings.Robust)
	}
	fmt.Fprintf(w, ")\n")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "panel\tlayer\tn\t%srms [%s]\tmax [%s]\toutliers\t\n", termHeader(lu), lu.name, lu.name)
	for _, f := range r.Fits {
		fmt.Fprintf(tw, "%s\t%s\t%d\t", f.Panel, f.Layer, f.N)
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			u, kind := termUnit(k, lu)
			if !f.Model.Estimates(k) {
				fmt.Fprintf(tw, "-\t")
				continue
			}
			se := unit.In(f.StdErr[k], kind, u)
			if math.IsNaN(se) {
				fmt.Fprintf(tw, "%.2f\t", unit.In(f.Terms[k], kind, u))
			} else {
				fmt.Fprintf(tw, "%.2f ± %.2f\t", unit.In(f.Terms[k], kind, u), se)
			}
		}
		fmt.Fprintf(tw, "%.3f\t%.3f\t%s\t\n", f.RMS/lu.factor, f.Max/lu.factor, strings.Join(f.Outliers, " "))
	}
	tw.Flush()
	printLots(w, "lot (mean ± panel-to-panel sigma)", "layer", r.Lots, lu)
	if len(r.Differences) > 0 {
		printLots(w, "per-panel differences of layers measured on the same panels (mean ± sigma; the drill error both share cancels)", "layers", r.Differences, lu)
	}
	for _, n := range r.Joint.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	if r.Applied != nil {
		printArtwork(w, r.Artworks())
	}
	n := 0
	for _, f := range r.Fits {
		n += len(f.Outliers)
	}
	if n > 0 {
		fmt.Fprintf(w, "%d target(s) rejected as mis-measured (beyond %.0f sigma of a robust fit); see residuals.csv\n", n, registration.DefaultOutlierLimit)
	}
}

// printArtwork prints each lot layer's applied artwork, its material
// movement and the setting that cancels it.
func printArtwork(w io.Writer, arts []fitreport.Artwork) {
	fmt.Fprintf(w, "\nartwork (the movement is the lot mean with the applied artwork taken out; the setting cancels it):\n")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "layer\taxis\tapplied [ppm]\tmeasured [ppm]\tmovement [ppm]\tsetting [ppm]\tfactor\tchange [ppm]\tstd error [ppm]\t\n")
	for _, a := range arts {
		for i, ax := range []string{"X", "Y"} {
			se := "-"
			if a.SE[i] > 0 {
				se = fmt.Sprintf("±%.2f", a.SE[i]*1e6)
			}
			fmt.Fprintf(tw, "%s\t%s\t%+.2f\t%+.2f\t%+.2f\t%+.2f\t%.9f\t%+.2f\t%s\t\n", a.Layer, ax, a.Applied[i]*1e6, a.Measured[i]*1e6,
				a.Movement[i]*1e6, a.Setting[i]*1e6, 1+a.Setting[i], a.Change[i]*1e6, se)
		}
	}
	tw.Flush()
	fmt.Fprintf(w, "the setting cancels each layer's own movement; comp weighs the layers against each other and the coupling windows\n")
}

// printLots writes a table of lot statistics under title: per lot, its
// panels and each estimated term's mean ± standard deviation.
func printLots(w io.Writer, title, first string, lots []registration.Lot, lu lengthUnit) {
	fmt.Fprintf(w, "\n%s:\n", title)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "%s\tpanels\t%s\n", first, termHeader(lu))
	for _, l := range lots {
		fmt.Fprintf(tw, "%s\t%d\t", l.Layer, l.Panels)
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			u, kind := termUnit(k, lu)
			if !l.Model.Estimates(k) {
				fmt.Fprintf(tw, "-\t")
				continue
			}
			fmt.Fprintf(tw, "%.2f ± %.2f\t", unit.In(l.Mean[k], kind, u), unit.In(l.SD[k], kind, u))
		}
		fmt.Fprintf(tw, "\n")
	}
	tw.Flush()
}
