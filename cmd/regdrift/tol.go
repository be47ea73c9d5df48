package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render/figure"
)

type tolFlags struct {
	outputFlags
	section    string
	widen      string
	widenTrace string
	strict     bool
	target     string
	solver     solverFlags
}

// flags declares the command's flags on fs.
func (f *tolFlags) flags(fs *pflag.FlagSet) {
	fs.StringVar(&f.section, "section", "", "section to study (default: all)")
	fs.StringVar(&f.widen, "widen", "", "width differences FROM:TO:STEP, each with a unit, e.g. 0mil:4mil:1mil")
	fs.StringVar(&f.widenTrace, "widen-trace", "lower", "trace the width study widens: upper or lower")
	fs.StringVar(&f.target, "target", "99.73%", "worst-site yield the drawing notes' allocation scales every deviation from nominal to")
	f.outputFlags.add(fs)
	addStrict(fs, &f.strict, "a design is outside its spec")
	f.solver.add(fs)
}

// maxWidenSteps bounds the widths of a --widen study: each costs a curve and
// its confirmed roots (about a second), and a design study needs a handful.
const maxWidenSteps = 41

func (f *tolFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("tol takes one job file")
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	set, err := f.solver.settings(std)
	if err != nil {
		return err
	}
	target, err := parseTarget(f.target)
	if err != nil {
		return usageErr("--target: %v", err)
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
		if len(deltas) > maxWidenSteps {
			return usageErr("--widen: %q gives %d widths; at most %d (each is a solved curve with its roots confirmed by direct solves)", f.widen, len(deltas), maxWidenSteps)
		}
	}
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	study := drift.TolStudy{Deltas: deltas, Trace: trace, Target: target}
	if f.section != "" {
		si, err := pickSection(j, f.section)
		if err != nil {
			return err
		}
		study.Sections = []int{si}
	}
	var res *drift.TolSummary
	err = step(progressStd(std, f.json), "tolerance search (field solves, roots confirmed by direct solves)", func() (err error) {
		res, err = drift.Tol(ctx, input(j), study, set)
		return err
	})
	var we *drift.WidenError
	if errors.As(err, &we) {
		return usageErr("--widen: %v", err)
	} else if err != nil {
		return solveErr(j, err)
	}
	for _, w := range res.Warnings {
		fmt.Fprintf(std.err, "regdrift tol: warning: %s\n", w)
	}
	paths, err := writeAll(f.out,
		outFile{"tol.json", func(w io.Writer) error { return writeJSON(w, res) }},
		outFile{"tol.png", func(w io.Writer) error { return figure.Tol(w, res, lu.units()) }},
		outFile{"notes.txt", func(w io.Writer) error { return writeNotes(w, j.Title, res.Notes, lu) }})
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

func printTol(w io.Writer, j *Job, r *drift.TolSummary, lu lengthUnit, paths []string) {
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
			if s.GapM != nil {
				// Both traces on one layer: registration cannot move them
				// apart, so the offset is their spacing and the tolerance
				// one on the gap the etch leaves.
				fmt.Fprintf(w, "  both traces are on %s: the offset is their centre-to-centre spacing, which layer registration cannot move\n", s.Curve.Section.Traces[0].Layer)
				fmt.Fprintf(w, "  spacing (gap) tolerance, not a registration tolerance: spacing %.3f ± %.3f %s, gap %.3f ± %.3f %s\n",
					math.Abs(s.DesignOffsetM)/lu.factor, s.ToleranceM/lu.factor, u, *s.GapM/lu.factor, s.ToleranceM/lu.factor, u)
			} else {
				fmt.Fprintf(w, "  drawing tolerance: design offset ± %.3f %s\n", s.ToleranceM/lu.factor, u)
			}
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
	if r.Notes != nil && (len(r.Notes.Alone) > 0 || r.Notes.Allocation != nil) {
		printNotes(w, r.Notes, lu)
		fmt.Fprintln(w)
	}
	if len(r.Orientation) > 0 {
		printOrientationOf(w, r.Orientation, nil, registration.OrientMinGain, false, lu)
		fmt.Fprintln(w)
	}
	if len(paths) > 0 {
		fmt.Fprintf(w, "wrote %s\n", strings.Join(paths, ", "))
	}
}

// parseTarget reads a yield target such as "99.73%": a percentage strictly
// between 0 and 100.
func parseTarget(s string) (float64, error) {
	num, ok := strings.CutSuffix(strings.TrimSpace(s), "%")
	v, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
	if !ok || err != nil {
		return 0, fmt.Errorf("%q: want a percentage such as 99.73%%", s)
	}
	if !(v > 0 && v < 100) {
		return 0, fmt.Errorf("%q: want a yield above 0 and below 100%%", s)
	}
	return v / 100, nil
}

// noteValue formats a design value or a tolerance of a parameter measured
// per ("m" or "er") in the drawing's units.
func noteValue(v float64, per string, lu lengthUnit) string {
	if per == "er" {
		return fmt.Sprintf("%.3f", v)
	}
	return fmt.Sprintf("%.3f", v/lu.factor)
}

func noteUnit(per string, lu lengthUnit) string {
	if per == "er" {
		return ""
	}
	return " " + lu.name
}

// noteWords returns a drawing note: "core KC 36.000 ± 0.646 mil", or for
// registration (no value) "L6–L7 layer-to-layer registration ±8.684 mil".
func noteWords(param string, nominal float64, per string, tol float64, lu lengthUnit) string {
	if isRegistration(param, nominal, per) {
		return fmt.Sprintf("%s ±%s%s", param, noteValue(tol, per, lu), noteUnit(per, lu))
	}
	return fmt.Sprintf("%s %s ± %s%s", param, noteValue(nominal, per, lu), noteValue(tol, per, lu), noteUnit(per, lu))
}

// printNotes prints the drawing notes: each parameter's range alone, then
// the allocation for all together.
func printNotes(w io.Writer, n *drift.DrawingNotes, lu lengthUnit) {
	if len(n.Alone) > 0 {
		fmt.Fprintln(w, "drawing notes, each parameter alone (the others nominal, at the design offset; limits confirmed by direct solves):")
		sec := ""
		for _, l := range n.Alone {
			if l.Section != sec {
				fmt.Fprintf(w, "  section %s\n", l.Section)
				sec = l.Section
			}
			tol := l.Tolerance()
			if math.IsInf(tol, 1) {
				fmt.Fprintf(w, "    %s: the coupling reaches no spec limit within the parameter's physical range\n", l.Parameter)
				continue
			}
			ends := ""
			for k, d := range []*float64{l.LowDelta, l.HighDelta} {
				if k > 0 {
					ends += " / "
				}
				if d == nil {
					ends += [...]string{"none (in spec down to the physical range's end)", "none (in spec up to the physical range's end)"}[k]
				} else {
					ends += fmt.Sprintf("%+.3f", *d/map[bool]float64{true: 1, false: lu.factor}[l.Per == "er"])
				}
			}
			fmt.Fprintf(w, "    %s   (limits at %s%s)\n", noteWords(l.Parameter, l.Nominal, l.Per, tol, lu), ends, noteUnit(l.Per, lu))
		}
	}
	a := n.Allocation
	if a == nil {
		return
	}
	if !a.Feasible {
		fmt.Fprintf(w, "drawing notes, all together: no allocation reaches %.2f %% at the worst site: %s\n", 100*a.Target, a.Reason)
		return
	}
	fmt.Fprintf(w, "drawing notes, all together (every deviation from nominal scaled by one k: panel means, across-panel shapes and sigmas alike; each note the range over the sites ±%g sigma):\n", a.Coverage)
	room := fmt.Sprintf("every deviation must shrink to %.3f of the model's", a.K)
	if a.K >= 1 {
		room = "the process as modelled meets the target with room"
	}
	fmt.Fprintf(w, "  k = %.3f: worst site %s P(in spec) %.3f %%, target %.2f %%; %s\n", a.K, a.WorstSite, 100*a.WorstP, 100*a.Target, room)
	for _, t := range a.Terms {
		fmt.Fprintf(w, "    %s\n", noteRange(t.Parameter, t.Nominal, t.Per, t.Low, t.High, lu))
	}
}

// noteRange returns an allocation's drawing note: "core KC 36.000 ± 0.646
// mil" where the range is symmetric to the digits shown, "finished copper
// L1 2.270 +0.520/-0.120 mil" where it is not (upper deviation first, each
// signed: "+0.520/+0.120" is a range wholly above nominal); a registration
// line carries no value: "L6–L7 layer-to-layer registration ±8.684 mil".
func noteRange(param string, nominal float64, per string, low, high float64, lu lengthUnit) string {
	hi, lo := noteValue(high, per, lu), noteValue(-low, per, lu)
	var tol string
	if hi == lo {
		tol = "±" + hi
		if !isRegistration(param, nominal, per) {
			tol = "± " + hi
		}
	} else {
		signed := func(v float64) string {
			if strings.HasPrefix(noteValue(v, per, lu), "-") {
				return noteValue(v, per, lu)
			}
			return "+" + noteValue(v, per, lu)
		}
		tol = signed(high) + "/" + signed(low)
	}
	if isRegistration(param, nominal, per) {
		return fmt.Sprintf("%s %s%s", param, tol, noteUnit(per, lu))
	}
	return fmt.Sprintf("%s %s %s%s", param, noteValue(nominal, per, lu), tol, noteUnit(per, lu))
}

// isRegistration reports whether a note is a registration line (no design
// value of its own).
func isRegistration(param string, nominal float64, per string) bool {
	return nominal == 0 && per == "m" && strings.HasSuffix(param, "registration")
}

// writeNotes writes notes.txt: the drawing notes alone, in a fabrication
// drawing's words.
func writeNotes(w io.Writer, title string, n *drift.DrawingNotes, lu lengthUnit) error {
	fmt.Fprintf(w, "%s\n\n", title)
	if n != nil {
		printNotes(w, n, lu)
	}
	return nil
}
