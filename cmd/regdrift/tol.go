package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"math/cmplx"
	"strings"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/render"
)

type tolFlags struct {
	outputFlags
	section    string
	widen      string
	widenTrace string
	strict     bool
	solver     solverFlags
}

// flags declares the command's flags on fs.
func (f *tolFlags) flags(fs *pflag.FlagSet) {
	fs.StringVar(&f.section, "section", "", "section to study (default: all)")
	fs.StringVar(&f.widen, "widen", "", "width differences FROM:TO:STEP, each with a unit, e.g. 0mil:4mil:1mil")
	fs.StringVar(&f.widenTrace, "widen-trace", "lower", "trace the width study widens: upper or lower")
	f.outputFlags.add(fs)
	addStrict(fs, &f.strict, "a design is outside its spec")
	f.solver.add(fs)
}

// tolConfirmDB is how close a confirmed root's directly solved coupling must
// come to the spec limit; the tests hold the round trip to 0.001 dB.
const tolConfirmDB = 2e-4

// maxWidthStacks bounds a widened trace to this many stackup thicknesses:
// far beyond any coupler (whose width is a fraction of the ground spacing),
// and short of a width that would make the field solve meaningless.
const maxWidthStacks = 20

// tolDoublings bounds how often the sweep range is doubled while the curve is
// still in spec at its end.
const tolDoublings = 4

type tolJSON struct {
	Job         string       `json:"job"`
	Sections    []tolSecJSON `json:"sections"`
	Orientation []orientJSON `json:"orientation,omitempty"`
	Warnings    []string     `json:"warnings,omitempty"`
}

type tolSecJSON struct {
	Name           string     `json:"name"`
	DesignOffsetM  float64    `json:"design_offset_m"`
	SpecCouplingDB float64    `json:"spec_coupling_db"`
	SpecTolDB      float64    `json:"spec_tolerance_db"`
	CouplingDB     float64    `json:"coupling_db"` // at the design offset
	ZLineOhm       [2]float64 `json:"z_line_ohm"`
	DesignInSpec   bool       `json:"design_in_spec"`
	OffsetLowM     *float64   `json:"offset_low_m"`
	OffsetHighM    *float64   `json:"offset_high_m"`
	LimitLowDB     *float64   `json:"limit_low_db,omitempty"` // the spec limit met at offset_low_m
	LimitHighDB    *float64   `json:"limit_high_db,omitempty"`
	SolvedLowDB    *float64   `json:"solved_low_db,omitempty"` // direct solve at offset_low_m
	SolvedHighDB   *float64   `json:"solved_high_db,omitempty"`
	LowAtRangeEnd  bool       `json:"low_at_range_end,omitempty"`
	HighAtRangeEnd bool       `json:"high_at_range_end,omitempty"`
	ToleranceM     float64    `json:"tolerance_m"`
	Widen          []widenRow `json:"widen,omitempty"`
}

type widenRow struct {
	DeltaWM          float64    `json:"delta_w_m"`
	Trace            string     `json:"trace"` // "upper" or "lower"
	WidthM           float64    `json:"width_m"`
	ToleranceM       float64    `json:"tolerance_m"`         // against the job's spec; 0 if the design leaves it
	ToleranceRetuneM float64    `json:"tolerance_retuned_m"` // against coupling_db ± the spec tolerance
	OffsetLowM       *float64   `json:"offset_low_m"`
	OffsetHighM      *float64   `json:"offset_high_m"`
	CouplingDB       float64    `json:"coupling_db"`
	ZLineOhm         [2]float64 `json:"z_line_ohm"`
	DesignInSpec     bool       `json:"design_in_spec"`

	curve *section.Curve
}

func (f *tolFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("tol takes one job file")
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	set, err := f.solver.settings()
	if err != nil {
		return err
	}
	trace := 1
	switch f.widenTrace {
	case "lower":
	case "upper":
		trace = 0
	default:
		return usageErr("--widen-trace: want upper or lower, not %q", f.widenTrace)
	}
	var deltas []float64
	if f.widen != "" {
		r, err := unit.ParseRange(f.widen, unit.Length)
		if err != nil {
			return usageErr("--widen: %v", err)
		}
		deltas = r.Values()
	}
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	secs := make([]int, 0, len(j.Sections))
	if f.section != "" {
		si, err := pickSection(j, f.section)
		if err != nil {
			return err
		}
		secs = append(secs, si)
	} else {
		for i := range j.Sections {
			secs = append(secs, i)
		}
	}
	// Check every widened section before any solve, so that a bad study fails
	// at once.
	widened := make(map[int][]*section.Section)
	for _, si := range secs {
		for _, d := range deltas {
			w, err := widen(j.Sections[si], trace, d)
			if err != nil {
				return err
			}
			widened[si] = append(widened[si], w)
		}
	}
	res := &tolJSON{Job: j.File}
	ys := newYieldSetup(j)
	for _, si := range secs {
		s := j.Sections[si]
		st, c, iv, err := tolSection(ctx, s, set, &f.solver, true)
		if err != nil {
			return err
		}
		if !st.DesignInSpec {
			res.Warnings = append(res.Warnings, fmt.Sprintf("section %q: the design is outside its spec: coupling %.3f dB at the design offset, spec %.2f ± %.2f dB",
				s.Name, st.CouplingDB, s.Spec.Coupling, s.Spec.Tolerance))
		}
		ys.curves[si], ys.allowed[si], ys.outSpec[si] = c, iv, !st.DesignInSpec
		for k, w := range widened[si] {
			var row widenRow
			if deltas[k] == 0 {
				// The design itself: its confirmed roots, not the curve's.
				row = widenRow{CouplingDB: st.CouplingDB, ZLineOhm: st.ZLineOhm, DesignInSpec: st.DesignInSpec,
					OffsetLowM: st.OffsetLowM, OffsetHighM: st.OffsetHighM, ToleranceM: st.ToleranceM, curve: c}
				_, riv, _, err := tolCurve(ctx, s, set, &f.solver, st.CouplingDB, s.Spec.Tolerance)
				if err != nil {
					return err
				}
				row.ToleranceRetuneM = math.Min(s.NominalOffset()-riv.Lo, riv.Hi-s.NominalOffset())
			} else if row, err = widenStudy(ctx, w, set, &f.solver); err != nil {
				return err
			}
			row.DeltaWM, row.Trace, row.WidthM = deltas[k], f.widenTrace, w.Traces[trace].Width
			st.Widen = append(st.Widen, row)
		}
		res.Sections = append(res.Sections, *st)
	}
	for _, w := range res.Warnings {
		fmt.Fprintf(std.err, "regdrift tol: warning: %s\n", w)
	}
	// The orientation study needs every used section's interval.
	complete := true
	for i := range j.Sections {
		if ys.used[i] && ys.curves[i] == nil {
			complete = false
		}
	}
	if complete {
		ys.setAllowed()
		res.Orientation = ys.orientation()
	}
	paths, err := writeAll(f.out,
		outFile{"tol.json", func(w io.Writer) error { return writeJSON(w, res) }},
		outFile{"tol.png", func(w io.Writer) error { return drawTol(w, j, secs, ys.curves, res, lu) }})
	if err != nil {
		return err
	}
	if err := report(std, f.json, res, func() { printTol(std.out, j, res, lu, paths) }); err != nil {
		return err
	}
	if f.strict && len(res.Warnings) > 0 {
		return fmt.Errorf("%w: %s", errOutOfSpec, res.Warnings[0])
	}
	return nil
}

// widen returns a copy of s with trace k made wider by d, validated; a bad
// result is a usage error naming the flag and the section key.
func widen(s *section.Section, k int, d float64) (*section.Section, error) {
	w := *s
	w.Grounds = append([]string(nil), s.Grounds...)
	w.Traces[k].Width += d
	var stack float64
	for _, l := range s.Stackup.Layers {
		stack += l.Thickness
	}
	if w.Traces[k].Width > maxWidthStacks*stack {
		return nil, usageErr("--widen %+.4g mil: section %q: traces[%d].width: %.4g mil is wider than %d times the whole stackup (%.4g mil): a unit slip?",
			d/unit.Mil, s.Name, k, w.Traces[k].Width/unit.Mil, maxWidthStacks, stack/unit.Mil)
	}
	if err := w.Validate(); err != nil {
		var fe *section.FieldError
		if errors.As(err, &fe) {
			return nil, usageErr("--widen %+.4g mil: section %q: %s: %v", d/unit.Mil, s.Name, fe.Key, fe.Err)
		}
		return nil, usageErr("--widen %+.4g mil: %v", d/unit.Mil, err)
	}
	return &w, nil
}

// tolCurve solves s over offsets wide enough to hold its allowed interval
// around the design offset against the spec (target, tol): the range is
// doubled while the interval is cut by the range's end.
func tolCurve(ctx context.Context, s *section.Section, set *section.Settings, sf *solverFlags, target, tol float64) (*section.Curve, registration.Interval, registration.SpecLimits, error) {
	span := 0.0
	var lastLo, lastHi float64
	for k := 0; ; k++ {
		c, _, err := section.CachedSweep(ctx, s, section.DefaultOffsets(s, span), set, sf.cacheDir, sf.noCache)
		if err != nil {
			var fe *section.FieldError
			if errors.As(err, &fe) {
				return nil, registration.Interval{}, registration.SpecLimits{}, badInput(fmt.Errorf("section %q: %s: %w", s.Name, fe.Key, fe.Err))
			}
			return nil, registration.Interval{}, registration.SpecLimits{}, fmt.Errorf("section %q: %w", s.Name, err)
		}
		lo, hi := c.Range()
		iv, lim, err := registration.SpecInterval(c.Coupling, lo, hi, s.NominalOffset(), target, tol)
		if err != nil && !errors.Is(err, registration.ErrNominalOutOfSpec) {
			return nil, iv, lim, badInput(fmt.Errorf("section %q: %w", s.Name, err))
		}
		grew := k == 0 || lo < lastLo || hi > lastHi
		if err != nil || !(lim.Clipped[0] || lim.Clipped[1]) || k == tolDoublings || !grew {
			return c, iv, lim, err
		}
		lastLo, lastHi = lo, hi
		span = 2 * math.Max(hi-s.NominalOffset(), s.NominalOffset()-lo)
	}
}

// tolSection finds the offsets at which s meets its spec limits; with confirm
// it checks each by direct solves.
func tolSection(ctx context.Context, s *section.Section, set *section.Settings, sf *solverFlags, confirm bool) (*tolSecJSON, *section.Curve, registration.Interval, error) {
	c, iv, lim, err := tolCurve(ctx, s, set, sf, s.Spec.Coupling, s.Spec.Tolerance)
	nom := s.NominalOffset()
	st := &tolSecJSON{Name: s.Name, DesignOffsetM: nom, SpecCouplingDB: s.Spec.Coupling, SpecTolDB: s.Spec.Tolerance,
		CouplingDB: c.Coupling(nom), ZLineOhm: c.ZLine(nom), DesignInSpec: err == nil}
	if errors.Is(err, registration.ErrNominalOutOfSpec) {
		return st, c, registration.EmptyInterval(), nil
	} else if err != nil {
		return nil, nil, iv, err
	}
	ends := [2]*float64{}
	for k, x := range [2]float64{iv.Lo, iv.Hi} {
		x := x
		if lim.Clipped[k] || !confirm {
			ends[k] = &x
			continue
		}
		limit := s.Spec.Coupling + float64(lim.Limit[k])*s.Spec.Tolerance
		xr, solved, err := confirmRoot(ctx, s, c, set, x, limit)
		if err != nil {
			return nil, nil, iv, fmt.Errorf("section %q: confirming the root at %.4f mil: %w", s.Name, x/unit.Mil, err)
		}
		ends[k] = &xr
		l, d := limit, solved
		if k == 0 {
			st.LimitLowDB, st.SolvedLowDB = &l, &d
		} else {
			st.LimitHighDB, st.SolvedHighDB = &l, &d
		}
	}
	st.OffsetLowM, st.OffsetHighM = ends[0], ends[1]
	st.LowAtRangeEnd, st.HighAtRangeEnd = lim.Clipped[0], lim.Clipped[1]
	iv = registration.Interval{Lo: *ends[0], Hi: *ends[1]}
	st.ToleranceM = math.Min(nom-iv.Lo, iv.Hi-nom)
	return st, c, iv, nil
}

// solvedCoupling returns |S31| in dB from a direct field solve of s at offset,
// for the curve's frequency, coupled length and reference impedance.
func solvedCoupling(s *section.Section, c *section.Curve, set *section.Settings, offset float64) (float64, error) {
	sol, err := section.Solve(s, offset, set)
	if err != nil {
		return 0, err
	}
	sp := section.NewLines(sol.C, sol.C0).SParams(c.Frequency, c.Length, c.ZRef)
	return 20 * math.Log10(cmplx.Abs(sp.S31)), nil
}

// confirmRoot solves s directly at x, the root of the curve against limit; if
// the solved coupling is further than tolConfirmDB from the limit it refines x
// by the secant method on direct solves (the curve's slope gives the first
// step). It returns the refined offset and its solved coupling.
func confirmRoot(ctx context.Context, s *section.Section, c *section.Curve, set *section.Settings, x, limit float64) (float64, float64, error) {
	g0, err := solvedCoupling(s, c, set, x)
	if err != nil {
		return 0, 0, err
	}
	if math.Abs(g0-limit) <= tolConfirmDB {
		return x, g0, nil
	}
	h := 0.01 * unit.Mil
	slope := (c.Coupling(x+h) - c.Coupling(x-h)) / (2 * h)
	if slope == 0 {
		return x, g0, fmt.Errorf("the coupling curve is flat at the root")
	}
	x0, f0 := x, g0-limit
	x1 := x0 - f0/slope
	for range 8 {
		if err := ctx.Err(); err != nil {
			return 0, 0, err
		}
		g1, err := solvedCoupling(s, c, set, x1)
		if err != nil {
			return 0, 0, err
		}
		f1 := g1 - limit
		if math.Abs(f1) <= tolConfirmDB {
			return x1, g1, nil
		}
		if f1 == f0 {
			break
		}
		x0, f0, x1 = x1, f1, x1-f1*(x1-x0)/(f1-f0)
	}
	return x1, 0, fmt.Errorf("direct solves do not meet the limit %.3f dB within %.4f dB", limit, tolConfirmDB)
}

// widenStudy evaluates one widened section: tolerance against the job's spec
// and against the spec window re-centred on its own nominal coupling.
func widenStudy(ctx context.Context, w *section.Section, set *section.Settings, sf *solverFlags) (widenRow, error) {
	st, c, _, err := tolSection(ctx, w, set, sf, false)
	if err != nil {
		return widenRow{}, err
	}
	row := widenRow{CouplingDB: st.CouplingDB, ZLineOhm: st.ZLineOhm, DesignInSpec: st.DesignInSpec,
		OffsetLowM: st.OffsetLowM, OffsetHighM: st.OffsetHighM, ToleranceM: st.ToleranceM, curve: c}
	nom := w.NominalOffset()
	c2, iv, _, err := tolCurve(ctx, w, set, sf, st.CouplingDB, w.Spec.Tolerance)
	if err != nil {
		return widenRow{}, err
	}
	if c2 != c {
		row.curve = c2
	}
	row.ToleranceRetuneM = math.Min(nom-iv.Lo, iv.Hi-nom)
	return row, nil
}

func printTol(w io.Writer, j *Job, r *tolJSON, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "%s\n\n", j.Title)
	u := lu.name
	for _, s := range r.Sections {
		fmt.Fprintf(w, "section %s: spec %.2f ± %.2f dB; design offset %+.3f %s, coupling %.3f dB there, lines %.1f / %.1f ohm\n",
			s.Name, s.SpecCouplingDB, s.SpecTolDB, s.DesignOffsetM/lu.factor, u, s.CouplingDB, s.ZLineOhm[0], s.ZLineOhm[1])
		if !s.DesignInSpec {
			fmt.Fprintf(w, "  the design is outside its spec: no offset tolerance\n")
		} else {
			end := func(x *float64, lim, solved *float64, clipped bool) string {
				if clipped {
					return fmt.Sprintf("%+.3f %s (still in spec at the end of the solved range)", *x/lu.factor, u)
				}
				if lim == nil {
					return fmt.Sprintf("%+.3f %s", *x/lu.factor, u)
				}
				return fmt.Sprintf("%+.3f %s (limit %.3f dB, solved %.4f dB)", *x/lu.factor, u, *lim, *solved)
			}
			fmt.Fprintf(w, "  meets the spec limits at %s and %s\n", end(s.OffsetLowM, s.LimitLowDB, s.SolvedLowDB, s.LowAtRangeEnd),
				end(s.OffsetHighM, s.LimitHighDB, s.SolvedHighDB, s.HighAtRangeEnd))
			fmt.Fprintf(w, "  drawing tolerance: design offset ± %.3f %s\n", s.ToleranceM/lu.factor, u)
		}
		if len(s.Widen) > 0 {
			tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
			fmt.Fprintf(tw, "  Δw [%s]\t%s width [%s]\ttolerance [%s]\tre-tuned [%s]\tcoupling [dB]\tZ upper [ohm]\tZ lower [ohm]\t\n", u, s.Widen[0].Trace, u, u, u)
			for _, row := range s.Widen {
				tol := "out of spec"
				if row.DesignInSpec {
					tol = fmt.Sprintf("%.3f", row.ToleranceM/lu.factor)
				}
				fmt.Fprintf(tw, "  %+.3f\t%.3f\t%s\t%.3f\t%.3f\t%.2f\t%.2f\t\n", row.DeltaWM/lu.factor, row.WidthM/lu.factor, tol,
					row.ToleranceRetuneM/lu.factor, row.CouplingDB, row.ZLineOhm[0], row.ZLineOhm[1])
			}
			tw.Flush()
		}
		fmt.Fprintln(w)
	}
	if len(r.Orientation) > 0 {
		fmt.Fprintf(w, "orientation (closed-form mean site yield; parts kept in place, lines turned 90 deg):\n")
		tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
		fmt.Fprintf(tw, "  array\tpart\tas placed\tturned\t\n")
		for _, o := range r.Orientation {
			fmt.Fprintf(tw, "  %d\t%s\t%.4f %%\t%.4f %%\t%s\n", o.Array, o.Part, 100*o.MeanYield, 100*o.MeanYieldTurned, o.verdict())
		}
		tw.Flush()
		fmt.Fprintln(w)
	}
	if len(paths) > 0 {
		fmt.Fprintf(w, "wrote %s\n", strings.Join(paths, ", "))
	}
}

// drawTol plots coupling against offset for each studied section (one panel
// each) with the spec band, the offsets where the design meets the limits,
// and the widened designs' curves.
func drawTol(w io.Writer, j *Job, secs []int, curves []*section.Curve, r *tolJSON, lu lengthUnit) error {
	p := &render.Plot{XLabel: "offset of the upper trace across the lines [" + lu.name + "]"}
	var titles []string
	xlo, xhi := math.Inf(1), math.Inf(-1)
	for k, si := range secs {
		s := j.Sections[si]
		st := &r.Sections[k]
		a := &render.Axes{YLabel: s.Name + ": coupling [dB]",
			Bands: []render.Band{{Lo: s.Spec.Coupling - s.Spec.Tolerance, Hi: s.Spec.Coupling + s.Spec.Tolerance,
				Label: fmt.Sprintf("spec %.2f ± %.2f dB", s.Spec.Coupling, s.Spec.Tolerance)}}}
		add := func(c *section.Curve, label string, i int) {
			lo, hi := c.Range()
			xlo, xhi = math.Min(xlo, lo), math.Max(xhi, hi)
			const n = 300
			xs, ys := make([]float64, n+1), make([]float64, n+1)
			for q := range xs {
				x := lo + (hi-lo)*float64(q)/n
				xs[q], ys[q] = x/lu.factor, c.Coupling(x)
			}
			line := render.Line{Label: label, X: xs, Y: ys, Color: render.Series(i)}
			if i > 0 {
				line.Dash = []float64{4, 2}
			}
			a.Lines = append(a.Lines, line)
		}
		add(curves[si], "as designed", 0)
		for q, row := range st.Widen {
			if row.DeltaWM == 0 {
				continue
			}
			add(row.curve, fmt.Sprintf("%s %+.2f %s", row.Trace, row.DeltaWM/lu.factor, lu.name), q+1)
		}
		a.VLines = append(a.VLines, render.VLine{X: s.NominalOffset() / lu.factor, Label: "design", Color: render.Frame})
		if st.DesignInSpec {
			for _, x := range []*float64{st.OffsetLowM, st.OffsetHighM} {
				a.VLines = append(a.VLines, render.VLine{X: *x / lu.factor, Label: fmt.Sprintf("%+.2f %s", *x/lu.factor, lu.name), Color: render.Series(0)})
			}
			titles = append(titles, fmt.Sprintf("%s ± %.2f %s", s.Name, st.ToleranceM/lu.factor, lu.name))
		} else {
			titles = append(titles, s.Name+" out of spec")
		}
		p.Axes = append(p.Axes, a)
	}
	p.XMin, p.XMax = xlo/lu.factor, xhi/lu.factor
	p.Title = "Offset tolerance: coupling against lateral offset, spec band; " + strings.Join(titles, ", ")
	return p.Render(1800, 700+400*len(p.Axes)).EncodePNG(w)
}
