package drift

import (
	"bytes"
	"encoding/csv"
	"errors"
	"math"
	"strconv"
	"testing"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// TestYieldStudy: the yield summary's budget shares each sum to one, its
// sections report the curve's allowed interval, and yield.csv and
// budget.csv carry the same numbers to their printed digits.
func TestYieldStudy(t *testing.T) {
	a, err := Analyse(t.Context(), turnedInput(t), testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	res, err := a.Yield.MonteCarlo(t.Context(), registration.MCSettings{Trials: 2000, Seed: 5})
	if err != nil {
		t.Fatal(err)
	}
	sum := a.YieldSummary(res, 5)
	for name, rows := range map[string][]BudgetRow{"worst site": sum.Budget.AtWorst, "panel": sum.Budget.Panel} {
		var s float64
		for _, r := range rows {
			s += r.Share
		}
		// Shares are variances over their sum: one to rounding.
		if math.Abs(s-1) > 1e-12 {
			t.Errorf("%s budget shares sum to %.15g", name, s)
		}
	}
	if len(sum.Sections) != 1 || sum.Sections[0].AllowedLowM == nil || *sum.Sections[0].AllowedLowM != a.Curves[0].Allowed.Lo {
		t.Fatalf("sections %+v, allowed %v", sum.Sections, a.Curves[0].Allowed)
	}
	if len(sum.Orientation) != 2 || sum.Sites != len(a.Sites) || sum.Parts != len(a.In.Instances) {
		t.Errorf("summary %d sites, %d parts, %d orientation rows", sum.Sites, sum.Parts, len(sum.Orientation))
	}
	var b bytes.Buffer
	if err := a.WriteYieldCSV(&b, res, unit.MicronMM); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&b).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != len(a.Sites)+1 || recs[0][7] != "offset_mean [um]" {
		t.Fatalf("yield.csv: %d rows, header %v", len(recs), recs[0])
	}
	for k, r := range recs[1:] {
		p, _ := strconv.ParseFloat(r[11], 64)
		off, _ := strconv.ParseFloat(r[7], 64)
		// Six decimals of a probability, four of a micrometre.
		if math.Abs(p-a.Sites[k].PInSpec) > 5e-7 || math.Abs(off*1e-6-a.Sites[k].Offset) > 5e-11 {
			t.Errorf("row %d: p %s offset %s µm, site %g %g m", k+1, r[11], r[7], a.Sites[k].PInSpec, a.Sites[k].Offset)
		}
	}
	b.Reset()
	if err := WriteBudgetCSV(&b, sum, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	recs, _ = csv.NewReader(&b).ReadAll()
	if want := 1 + len(sum.Budget.AtWorst) + len(sum.Budget.Panel); len(recs) != want || recs[0][5] != "sd [mil]" {
		t.Errorf("budget.csv: %d rows (want %d), header %v", len(recs), want, recs[0])
	}
}

// TestTolerance: the confirmed ends of the turned input's section meet a
// spec limit in a direct solve (the same solver, without the curve's
// interpolation), the tolerance is the nearer end, and a width study rejects
// a trace wider than the stackup allows with the trace's key.
func TestTolerance(t *testing.T) {
	in := turnedInput(t)
	set := testSettings(t)
	r, err := Tol(t.Context(), in, TolStudy{Deltas: []float64{0, 2 * mil}, Trace: 1}, set)
	if err != nil {
		t.Fatal(err)
	}
	st := r.Sections[0]
	if !st.DesignInSpec || st.SolvedLowDB == nil || st.SolvedHighDB == nil {
		t.Fatalf("section %+v", st)
	}
	for _, e := range []struct{ x, limit float64 }{{*st.OffsetLowM, *st.LimitLowDB}, {*st.OffsetHighM, *st.LimitHighDB}} {
		got, err := SolvedCoupling(st.Curve, set, e.x)
		if err != nil {
			t.Fatal(err)
		}
		// ConfirmRoot stops within ConfirmDB of the limit.
		if math.Abs(got-e.limit) > ConfirmDB {
			t.Errorf("at %.4f mil: %.5f dB, limit %.3f dB", e.x/mil, got, e.limit)
		}
	}
	// The nearer end: positive, not beyond either end, and at one of them.
	nom := st.DesignOffsetM
	lo, hi := nom-*st.OffsetLowM, *st.OffsetHighM-nom
	if !(st.ToleranceM > 0) || st.ToleranceM > lo || st.ToleranceM > hi || (st.ToleranceM != lo && st.ToleranceM != hi) {
		t.Errorf("tolerance %g m, ends %g and %g m from the design", st.ToleranceM, lo, hi)
	}
	if len(st.Widen) != 2 || st.Widen[1].WidthM != 16*mil || st.Widen[1].Trace != "lower" {
		t.Errorf("widen rows %+v", st.Widen)
	}
	if len(r.Orientation) != 2 {
		t.Errorf("orientation %+v: want both arrays", r.Orientation)
	}
	_, err = Tol(t.Context(), in, TolStudy{Deltas: []float64{1 * unit.Inch * 100}, Trace: 1}, set)
	var we *WidenError
	var fe *section.FieldError
	if !errors.As(err, &we) || !errors.As(err, &fe) || fe.Key != "traces[1].width" {
		t.Errorf("a 100 in wider trace: %v", err)
	}
}

// TestCrossingsMatchInterval: the spec crossings a sweep reports (a scan
// and bisection of coupling minus each limit) and the allowed interval
// (SpecInterval's outward scan and bisection of |coupling − target| − tol)
// find the same two offsets by different searches, to the 1e-12 m of the
// bisections plus the scan steps' rounding.
func TestCrossingsMatchInterval(t *testing.T) {
	c, err := SolveSection(t.Context(), pair("hyb", 0, section.Spec{Coupling: -3, Tolerance: 0.1}), 0, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	xs := SpecCrossings(c.Curve, c.Section.Spec)
	if len(xs) != 2 {
		t.Fatalf("crossings %v", xs)
	}
	const tol = 1e-9
	if math.Abs(xs[0]-c.Allowed.Lo) > tol || math.Abs(xs[1]-c.Allowed.Hi) > tol {
		t.Errorf("crossings %v, allowed %v", xs, c.Allowed)
	}
	s := Sweep(c.Section, c.Curve, c.FromCache)
	if len(s.LeavesSpecAtM) != 2 || s.DesignOffsetM != 0 || len(s.Points) != len(c.Curve.Points) {
		t.Errorf("sweep summary %+v", s)
	}
	var b bytes.Buffer
	if err := WriteSweepCSV(&b, c.Curve, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	recs, _ := csv.NewReader(&b).ReadAll()
	if len(recs) != len(c.Curve.Points)+1 || recs[0][0] != "offset [mil]" {
		t.Errorf("sweep.csv: %d rows, header %v", len(recs), recs[0][:2])
	}
}
