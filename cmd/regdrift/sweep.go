package main

import (
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/render"
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
	set, err := f.solver.settings()
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
	a := newAnalysis(j)
	offsets := a.offsets(si)
	if f.offsets != "" {
		r, err := unit.ParseRange(f.offsets, unit.Length)
		if err != nil {
			return usageErr("--offsets: %v", err)
		}
		offsets = r.Values()
		if len(offsets) < 2 {
			return usageErr("--offsets: %q gives fewer than two offsets", f.offsets)
		}
	}
	c, hit, err := section.CachedSweep(ctx, s, offsets, set, f.solver.cacheDir, f.solver.noCache)
	if err != nil {
		var fe *section.FieldError
		if errors.As(err, &fe) {
			if fe.Key == "offsets" {
				return usageErr("--offsets: %v", fe.Err)
			}
			return badInput(j.SectionError(si, fe.Key, fe.Err))
		}
		return err
	}
	res := sweepResult(s, c, hit)
	paths, err := writeAll(f.out,
		outFile{"sweep.csv", func(w io.Writer) error { return writeSweepCSV(w, c, lu) }},
		outFile{"sweep.png", func(w io.Writer) error { return drawSweep(w, s, c, lu) }})
	if err != nil {
		return err
	}
	return report(std, f.json, res, func() { printSweep(std.out, s, c, res, lu, paths) })
}

// sweepJSON is the sweep --json object: the solver's report of the curve
// (INTERFACE.md's fields and a convergence report per point) and the spec.
type sweepJSON struct {
	section.Report
	DesignOffsetM  float64   `json:"design_offset_m"`
	SpecCouplingDB float64   `json:"spec_coupling_db"`
	SpecTolDB      float64   `json:"spec_tolerance_db"`
	LeavesSpecAtM  []float64 `json:"leaves_spec_at_m"`
	FromCache      bool      `json:"from_cache"`
}

func sweepResult(s *section.Section, c *section.Curve, hit bool) *sweepJSON {
	return &sweepJSON{Report: c.Report(), DesignOffsetM: s.NominalOffset(),
		SpecCouplingDB: s.Spec.Coupling, SpecTolDB: s.Spec.Tolerance,
		LeavesSpecAtM: specCrossings(c, s.Spec), FromCache: hit}
}

// specCrossings returns the offsets within the curve's range at which its
// coupling crosses a spec limit, found by scanning the interpolant and
// bisecting each sign change to 1e-12 m.
func specCrossings(c *section.Curve, sp section.Spec) []float64 {
	lo, hi := c.Range()
	var out []float64
	for _, lim := range []float64{sp.Coupling - sp.Tolerance, sp.Coupling + sp.Tolerance} {
		g := func(x float64) float64 { return c.Coupling(x) - lim }
		const n = 2000
		x0, g0 := lo, g(lo)
		for k := 1; k <= n; k++ {
			x1 := lo + (hi-lo)*float64(k)/n
			g1 := g(x1)
			if g0 == 0 {
				out = append(out, x0)
			} else if g0*g1 < 0 {
				a, b, ga := x0, x1, g0
				for b-a > 1e-12 {
					m := (a + b) / 2
					gm := g(m)
					if gm*ga <= 0 {
						b = m
					} else {
						a, ga = m, gm
					}
				}
				out = append(out, (a+b)/2)
			}
			x0, g0 = x1, g1
		}
	}
	sort.Float64s(out)
	return out
}

func writeSweepCSV(w io.Writer, c *section.Curve, lu lengthUnit) error {
	cw := csv.NewWriter(w)
	header := []string{"offset [" + lu.name + "]",
		"c11 [pF/m]", "c12 [pF/m]", "c22 [pF/m]", "c0_11 [pF/m]", "c0_12 [pF/m]", "c0_22 [pF/m]",
		"l11 [nH/m]", "l12 [nH/m]", "l22 [nH/m]", "k_c", "k_l",
		"coupling [dB]", "directivity [dB]", "z_line1 [ohm]", "z_line2 [ohm]", "z_even [ohm]", "z_odd [ohm]",
		"eps_eff_mode1", "eps_eff_mode2", "estimated_error"}
	if err := cw.Write(header); err != nil {
		return err
	}
	g := func(v float64, d int) string { return strconv.FormatFloat(v, 'f', d, 64) }
	for _, p := range c.Points {
		ze, zo := "", ""
		if p.Symmetric {
			ze, zo = g(p.ZEven, 4), g(p.ZOdd, 4)
		}
		rec := []string{g(p.Offset/lu.factor, 4),
			g(p.C[0][0]*1e12, 4), g(p.C[0][1]*1e12, 4), g(p.C[1][1]*1e12, 4),
			g(p.C0[0][0]*1e12, 4), g(p.C0[0][1]*1e12, 4), g(p.C0[1][1]*1e12, 4),
			g(p.L[0][0]*1e9, 4), g(p.L[0][1]*1e9, 4), g(p.L[1][1]*1e9, 4), g(p.KC, 6), g(p.KL, 6),
			g(p.CouplingDB, 4), g(p.DirectivityDB, 2), g(p.ZLine[0], 4), g(p.ZLine[1], 4), ze, zo,
			g(p.EpsEff[0], 5), g(p.EpsEff[1], 5), strconv.FormatFloat(p.Convergence.EstimatedError, 'e', 2, 64)}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func printSweep(w io.Writer, s *section.Section, c *section.Curve, r *sweepJSON, lu lengthUnit, paths []string) {
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

func drawSweep(w io.Writer, s *section.Section, c *section.Curve, lu lengthUnit) error {
	lo, hi := c.Range()
	n := 400
	xs := make([]float64, n+1)
	cp := make([]float64, n+1)
	dir := make([]float64, n+1)
	z1 := make([]float64, n+1)
	z2 := make([]float64, n+1)
	for k := range xs {
		x := lo + (hi-lo)*float64(k)/float64(n)
		xs[k] = x / lu.factor
		cp[k] = c.Coupling(x)
		dir[k] = c.Directivity(x)
		z := c.ZLine(x)
		z1[k], z2[k] = z[0], z[1]
	}
	var px, pc []float64
	for _, p := range c.Points {
		px = append(px, p.Offset/lu.factor)
		pc = append(pc, p.CouplingDB)
	}
	top := &render.Axes{YLabel: "coupling |S31| [dB]", Weight: 2,
		Bands: []render.Band{{Lo: s.Spec.Coupling - s.Spec.Tolerance, Hi: s.Spec.Coupling + s.Spec.Tolerance,
			Label: fmt.Sprintf("spec %.2f ± %.2f dB", s.Spec.Coupling, s.Spec.Tolerance)}},
		Lines: []render.Line{
			{Label: "interpolated", X: xs, Y: cp, Color: render.Series(0)},
			{Label: "solved", X: px, Y: pc, Color: render.Series(0), Marker: render.Circle, Width: -1},
		},
		VLines: []render.VLine{{X: s.NominalOffset() / lu.factor, Label: "design", Color: render.Frame}},
	}
	for _, x := range specCrossings(c, s.Spec) {
		top.VLines = append(top.VLines, render.VLine{X: x / lu.factor, Label: fmt.Sprintf("%+.2f %s", x/lu.factor, lu.name), Color: render.Series(3)})
	}
	mid := &render.Axes{YLabel: "line impedance [ohm]",
		Lines: []render.Line{
			{Label: "upper line (" + s.Traces[0].Layer + ")", X: xs, Y: z1, Color: render.Series(1)},
			{Label: "lower line (" + s.Traces[1].Layer + ")", X: xs, Y: z2, Color: render.Series(2), Dash: []float64{3, 2}},
		},
		HLines: []render.HLine{{Y: s.ZRef, Label: fmt.Sprintf("z_ref %.0f ohm", s.ZRef), Dash: []float64{6, 4}}},
	}
	bot := &render.Axes{YLabel: "directivity [dB]",
		Lines: []render.Line{{Label: "directivity", X: xs, Y: dir, Color: render.Series(4)}}}
	p := &render.Plot{
		Title: fmt.Sprintf("section %s at %.4g GHz, coupled length %.1f %s: coupling versus lateral offset of %s against %s",
			s.Name, c.Frequency/1e9, c.Length/lu.factor, lu.name, s.Traces[0].Layer, s.Traces[1].Layer),
		XLabel: "offset of the upper trace across the lines [" + lu.name + "]",
		Axes:   []*render.Axes{top, mid, bot},
	}
	return p.Render(1800, 1500).EncodePNG(w)
}
