package drift

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
)

// ConfirmDB is how close a confirmed root's directly solved coupling should
// come to the spec limit.
const ConfirmDB = 2e-4

// ConfirmNoiseDB is how close it must come when the direct solves jitter
// on a scale finer than ConfirmDB allows. Each direct solve meshes its own
// geometry, and moving a trace edge by a few ten-thousandths of a mil moves
// the mesh lines that follow it: for an edge-coupled microstrip pair under
// mask the solved coupling jitters by about 5e-4 dB over such steps
// (measured on samples/topology-microstrip.toml at 0.1 %), so the secant
// can circle the root without landing within ConfirmDB. The best iterate
// is then kept if it is within 2e-3 dB, a hundredth of a 0.2 dB tolerance
// and below the solver's own error at the default accuracy.
const ConfirmNoiseDB = 2e-3

// MaxWidthStacks bounds a widened trace to this many stackup thicknesses:
// far beyond any coupler (whose width is a fraction of the ground spacing),
// and short of a width that would make the field solve meaningless.
const MaxWidthStacks = 20

// TolSummary is the result of a tolerance study (tol.json).
type TolSummary struct {
	Job         string       `json:"job"`
	Sections    []TolSection `json:"sections"`
	Orientation []Orient     `json:"orientation,omitempty"`
	Warnings    []string     `json:"warnings,omitempty"`
	// Notes are the drawing notes (tolnotes.go).
	Notes *DrawingNotes `json:"notes,omitempty"`
}

// TolSection is the offset tolerance of one section.
type TolSection struct {
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
	// OffsetIs says what the offsets of this section measure (OffsetKind):
	// "registration" for traces on two layers, "spacing" for two traces on
	// one layer, whose offset is their centre-to-centre spacing: both are
	// imaged together, so layer registration cannot move it and its
	// tolerance is one on the gap (GapM, the design gap between the feet).
	OffsetIs string     `json:"offset_is"`
	GapM     *float64   `json:"gap_m,omitempty"`
	Widen    []WidenRow `json:"widen,omitempty"`

	// Curve is the section's curve the study read.
	Curve *Curve `json:"-"`
}

// OffsetKind returns what the offset of s measures: "spacing" when both
// traces are on one copper layer (an edge-coupled pair, whose offset is the
// centre-to-centre spacing, moved by etching and artwork, not registration),
// "registration" otherwise (the offset of the upper trace against the lower).
func OffsetKind(s *section.Section) string {
	if s.Traces[0].Layer == s.Traces[1].Layer {
		return "spacing"
	}
	return "registration"
}

// DesignGap returns the design gap between the feet of two traces on one
// layer, |offset| − (w₁ + w₂)/2, or nil for traces on two layers.
func DesignGap(s *section.Section) *float64 {
	if OffsetKind(s) != "spacing" {
		return nil
	}
	g := math.Abs(s.NominalOffset()) - (s.Traces[0].Width+s.Traces[1].Width)/2
	return &g
}

// WidenRow is one widened design of the trace-width study.
type WidenRow struct {
	DeltaWM          float64    `json:"delta_w_m"`
	Trace            string     `json:"trace"` // "upper" or "lower"
	WidthM           float64    `json:"width_m"`
	ToleranceM       float64    `json:"tolerance_m"`         // against the spec; 0 if the design leaves it
	ToleranceRetuneM float64    `json:"tolerance_retuned_m"` // against coupling_db ± the spec tolerance
	OffsetLowM       *float64   `json:"offset_low_m"`
	OffsetHighM      *float64   `json:"offset_high_m"`
	CouplingDB       float64    `json:"coupling_db"`
	ZLineOhm         [2]float64 `json:"z_line_ohm"`
	DesignInSpec     bool       `json:"design_in_spec"`

	// Curve is the widened design's curve.
	Curve *Curve `json:"-"`
}

// Widen returns a copy of s with trace k (0 upper, 1 lower) made wider by d,
// validated. A bad result is a *section.FieldError naming the trace's key.
func Widen(s *section.Section, k int, d float64) (*section.Section, error) {
	w := *s
	w.Grounds = append([]string(nil), s.Grounds...)
	w.Traces[k].Width += d
	var stack float64
	for _, l := range s.Stackup.Layers {
		stack += l.Thickness
	}
	if w.Traces[k].Width > MaxWidthStacks*stack {
		return nil, &section.FieldError{Section: s.Name, Key: fmt.Sprintf("traces[%d].width", k),
			Err: fmt.Errorf("%.4g mil is wider than %d times the whole stackup (%.4g mil): a unit slip?",
				w.Traces[k].Width/unit.Mil, MaxWidthStacks, stack/unit.Mil)}
	}
	if err := w.Validate(); err != nil {
		return nil, err
	}
	return &w, nil
}

// Tolerance finds the offsets at which s meets its spec limits on its curve
// (SolveSection over reach); with confirm it checks each end by direct
// solves (ConfirmRoot) and reports the confirmed offsets. The tolerance is
// the smaller distance from the design offset to the two ends.
func Tolerance(ctx context.Context, s *section.Section, reach float64, set *Settings, confirm bool) (*TolSection, error) {
	c, err := SolveSection(ctx, s, reach, set)
	if err != nil {
		return nil, err
	}
	return tolerance(ctx, c, set, confirm)
}

func tolerance(ctx context.Context, c *Curve, set *Settings, confirm bool) (*TolSection, error) {
	s := c.Section
	nom := s.NominalOffset()
	st := &TolSection{Name: s.Name, DesignOffsetM: nom, SpecCouplingDB: s.Spec.Coupling, SpecTolDB: s.Spec.Tolerance, OffsetIs: OffsetKind(s), GapM: DesignGap(s),
		CouplingDB: c.Nominal, ZLineOhm: c.Curve.ZLine(nom), DesignInSpec: c.DesignInSpec, Curve: c}
	if !c.DesignInSpec {
		return st, nil
	}
	iv, lim := c.Allowed, c.Limits
	ends := [2]*float64{}
	for k, x := range [2]float64{iv.Lo, iv.Hi} {
		if lim.Clipped[k] || !confirm {
			ends[k] = &x
			continue
		}
		limit := s.Spec.Coupling + float64(lim.Limit[k])*s.Spec.Tolerance
		xr, solved, err := ConfirmRoot(ctx, c, set, x, limit)
		if err != nil {
			return nil, fmt.Errorf("section %q: confirming the root at %.4f mil: %w", s.Name, x/unit.Mil, err)
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
	st.ToleranceM = math.Min(nom-*ends[0], *ends[1]-nom)
	return st, nil
}

// SolvedCoupling returns |S31| in dB from a direct field solve of c's section
// at offset, for the curve's frequency, coupled length and reference
// impedance.
func SolvedCoupling(c *Curve, set *Settings, offset float64) (float64, error) {
	return solvedCouplingOf(c.Section, c, set, offset)
}

// solvedCouplingOf is SolvedCoupling for section s (c's section or a
// perturbed copy of it) under c's frequency, length and reference impedance.
func solvedCouplingOf(s *section.Section, c *Curve, set *Settings, offset float64) (float64, error) {
	sol, err := section.Solve(s, offset, set.Solver())
	if err != nil {
		return 0, err
	}
	sc := c.Curve
	sp := section.NewLines(sol.C, sol.C0).SParams(sc.Frequency, sc.Length, sc.ZRef)
	return 20 * math.Log10(cmplx.Abs(sp.S31)), nil
}

// ConfirmRoot solves c's section directly at x, the curve's root against
// limit; if the solved coupling is further than ConfirmDB from the limit it
// refines x by the secant method on direct solves (the curve's slope gives
// the first step). It returns the refined offset and its solved coupling.
func ConfirmRoot(ctx context.Context, c *Curve, set *Settings, x, limit float64) (float64, float64, error) {
	h := 0.01 * unit.Mil
	slope := (c.Coupling(x+h) - c.Coupling(x-h)) / (2 * h)
	return confirmWith(ctx, func(x float64) (float64, error) { return SolvedCoupling(c, set, x) }, x, slope, limit)
}

// confirmWith is ConfirmRoot for any directly solved coupling solve(x): it
// solves at x, the first-order root against limit, and refines x by the
// secant method on direct solves when the solved coupling is further than
// ConfirmDB from the limit (slope, the first-order dC/dx, gives the first
// step). The drawing notes use it for a parameter change (tolnotes.go).
func confirmWith(ctx context.Context, solve func(float64) (float64, error), x, slope, limit float64) (float64, float64, error) {
	g0, err := solve(x)
	if err != nil {
		return 0, 0, err
	}
	if math.Abs(g0-limit) <= ConfirmDB {
		return x, g0, nil
	}
	if slope == 0 {
		return x, g0, errors.New("the coupling curve is flat at the root")
	}
	x0, f0 := x, g0-limit
	x1 := x0 - f0/slope
	bestX, bestG := x0, g0
	for range 8 {
		if err := ctx.Err(); err != nil {
			return 0, 0, err
		}
		g1, err := solve(x1)
		if err != nil {
			return 0, 0, err
		}
		f1 := g1 - limit
		if math.Abs(f1) <= ConfirmDB {
			return x1, g1, nil
		}
		if math.Abs(f1) < math.Abs(bestG-limit) {
			bestX, bestG = x1, g1
		}
		if f1 == f0 {
			break
		}
		x0, f0, x1 = x1, f1, x1-f1*(x1-x0)/(f1-f0)
	}
	if math.Abs(bestG-limit) <= ConfirmNoiseDB {
		return bestX, bestG, nil
	}
	return x1, 0, fmt.Errorf("direct solves do not meet the limit %.3f dB within %.4f dB (the nearest came to %.4f dB)", limit, ConfirmNoiseDB, bestG-limit)
}

// retunedTolerance returns the smaller distance from the design offset to the
// ends of c's allowed interval against the spec re-centred on its own
// coupling.
func retunedTolerance(c *Curve) float64 {
	nom := c.Section.NominalOffset()
	return math.Min(nom-c.Retuned.Lo, c.Retuned.Hi-nom)
}

// WidenStudy evaluates one widened section w (no sites use it): its
// tolerance against the spec on its curve, and against the spec window
// re-centred on its own coupling.
func WidenStudy(ctx context.Context, w *section.Section, set *Settings) (WidenRow, error) {
	st, err := Tolerance(ctx, w, 0, set, false)
	if err != nil {
		return WidenRow{}, err
	}
	return WidenRow{CouplingDB: st.CouplingDB, ZLineOhm: st.ZLineOhm, DesignInSpec: st.DesignInSpec,
		OffsetLowM: st.OffsetLowM, OffsetHighM: st.OffsetHighM, ToleranceM: st.ToleranceM,
		ToleranceRetuneM: retunedTolerance(st.Curve), Curve: st.Curve}, nil
}

// TolStudy says what a tolerance study covers.
type TolStudy struct {
	// Sections are the indices of the sections studied; nil means all.
	Sections []int
	// Deltas are the width changes of the trace-width study (none when
	// empty), applied to trace Trace (0 upper, 1 lower).
	Deltas []float64
	Trace  int
	// Target is the worst-site yield of the drawing notes' allocation; 0
	// means DefaultTarget.
	Target float64
}

// Tol runs the tolerance study of in: per section its confirmed spec
// crossings and drawing tolerance on the curve the map solves, the
// trace-width study, and, when every section its sites use is studied, the
// quarter-turn orientation study on the same curves.
func Tol(ctx context.Context, in *Input, study TolStudy, set *Settings) (*TolSummary, error) {
	secs := study.Sections
	if secs == nil {
		for i := range in.Sections {
			secs = append(secs, i)
		}
	}
	// Check every widened section before any solve, so that a bad study
	// fails at once.
	widened := make(map[int][]*section.Section)
	for _, si := range secs {
		for _, d := range study.Deltas {
			w, err := Widen(in.Sections[si], study.Trace, d)
			if err != nil {
				return nil, &WidenError{Delta: d, Err: err}
			}
			widened[si] = append(widened[si], w)
		}
	}
	// Process terms need the sensitivities, for the evaluator and the notes.
	set = withSensitivities(set, in)
	a := New(in, nil)
	reach := Reach(a)
	curves := make([]*Curve, len(in.Sections))
	res := &TolSummary{Job: in.Source}
	trace := [2]string{"upper", "lower"}[study.Trace]
	for _, si := range secs {
		s := in.Sections[si]
		c, err := solveFor(ctx, set, s, si, reach[si], []*Analysis{a}) // the curve SolveCurves solves
		if err != nil {
			return nil, err
		}
		st, err := tolerance(ctx, c, set, true)
		if err != nil {
			return nil, err
		}
		if !st.DesignInSpec {
			res.Warnings = append(res.Warnings, fmt.Sprintf("section %q: the design is outside its spec: coupling %.3f dB at the design offset, spec %.2f ± %.2f dB",
				s.Name, st.CouplingDB, s.Spec.Coupling, s.Spec.Tolerance))
		}
		curves[si] = st.Curve
		for k, w := range widened[si] {
			var row WidenRow
			if study.Deltas[k] == 0 {
				// The design itself: its confirmed roots, not the curve's.
				row = WidenRow{CouplingDB: st.CouplingDB, ZLineOhm: st.ZLineOhm, DesignInSpec: st.DesignInSpec,
					OffsetLowM: st.OffsetLowM, OffsetHighM: st.OffsetHighM, ToleranceM: st.ToleranceM,
					ToleranceRetuneM: retunedTolerance(st.Curve), Curve: st.Curve}
			} else if row, err = WidenStudy(ctx, w, set); err != nil {
				return nil, err
			}
			row.DeltaWM, row.Trace, row.WidthM = study.Deltas[k], trace, w.Traces[study.Trace].Width
			st.Widen = append(st.Widen, row)
		}
		res.Sections = append(res.Sections, *st)
	}
	complete := true
	for i := range in.Sections {
		if a.Used(i) && curves[i] == nil {
			complete = false
		}
	}
	if err := FitSecondOrder(ctx, set, curves, a); err != nil {
		return nil, err
	}
	if complete {
		a.Evaluate(curves)
		res.Orientation = a.Orientation()
	}
	target := study.Target
	if target == 0 {
		target = DefaultTarget
	}
	notes, err := Notes(ctx, in, curves, res.Sections, set, target, complete)
	if err != nil {
		return nil, err
	}
	res.Notes = notes
	return res, nil
}

// WidenError is a widened section that is not a valid section.
type WidenError struct {
	Delta float64 // the width change, m
	Err   error   // a *section.FieldError
}

func (e *WidenError) Error() string {
	return fmt.Sprintf("widening by %+.4g mil: %v", e.Delta/unit.Mil, e.Err)
}

func (e *WidenError) Unwrap() error { return e.Err }
