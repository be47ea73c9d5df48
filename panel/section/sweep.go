package section

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"sync"

	"gonum.org/v1/gonum/interp"
)

// Point is one solved offset of a sweep.
type Point struct {
	Offset float64 // upper minus lower trace centre, m
	Lines
	CouplingDB    float64 // 20·log10|S31| at f0 (negative, at least −400 dB)
	DirectivityDB float64 // 20·log10(|S31|/|S41|), within ±200 dB
	PeakFrequency float64 // first maximum of the coupling over frequency, Hz; 0 if none below twice the higher quarter-wave frequency
	Convergence   Convergence
	// Sens holds, with Settings.Sensitivities, the derivatives with
	// respect to each parameter of Section.Params, in that order.
	Sens []Sensitivity `json:",omitempty"`
}

// Curve is coupling versus offset for one section, with cubic interpolants.
type Curve struct {
	Section   string
	Frequency float64 // f0, Hz
	Length    float64 // the coupled length used (resolved quarter wave), m
	ZRef      float64 // port reference impedance, ohm
	Points    []Point // sorted by Offset
	// CacheWarnings are *CacheWarning values from CachedSweep: a damaged
	// entry recomputed, an entry that could not be stored (cache.go).
	CacheWarnings []error

	coupling, directivity, z0, z1 monotoneCubic
	sens                          []monotoneCubic // coupling sensitivity per parameter
	lo, hi                        float64
	// end slopes for linear extrapolation outside the range
	cSlope [2]float64
}

// Sweep solves the section at every offset (total offset, upper minus lower
// trace centre, as in Solve) in parallel and builds the curve. The coupled
// length is s.Length, or when that is 0 a quarter wavelength at f0 for the
// mean εeff of the two modes at the nominal offset (solved separately if it
// is not in offsets).
func Sweep(ctx context.Context, s *Section, offsets []float64, set *Settings) (*Curve, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	offs := slices.Clone(offsets)
	slices.Sort(offs)
	offs = slices.Compact(offs)
	if len(offs) < 2 {
		return nil, s.fieldErr("offsets", "need at least 2 distinct offsets, have %d", len(offs))
	}
	for _, o := range offs {
		if err := s.checkOffset(o, "offsets"); err != nil {
			return nil, err
		}
	}
	nom := s.NominalOffset()
	todo := s.solvedOffsets(offs)
	sv, err := newSolver(s, set, todo[0], todo[len(todo)-1])
	if err != nil {
		return nil, err
	}
	// Every offset is solved at one level, raised for all if any offset misses
	// the target: a level change between neighbouring offsets would put a step
	// of the size of the discretisation error into the curve.
	lev := startLevel(sv.acc)
	var sols []*Solution
	for step := 1; ; step++ {
		var err error
		sols, err = sv.solveAll(ctx, todo, lev, set.workers())
		if err != nil {
			if ce := (*ConvergenceError)(nil); errors.As(err, &ce) {
				ce.Iterations = step // the mesh limit can stop a later step
			}
			return nil, err
		}
		worst := sols[0]
		for _, sol := range sols {
			sol.Convergence.Iterations = step
			if sol.Convergence.EstimatedError > worst.Convergence.EstimatedError {
				worst = sol
			}
		}
		if worst.Convergence.EstimatedError <= sv.acc {
			break
		}
		if step >= maxLevelSteps {
			return nil, sv.convErr(worst)
		}
		lev = nextLevel(lev, worst.Convergence.EstimatedError, sv.acc)
	}
	solAt := func(o float64) *Solution {
		i, _ := slices.BinarySearch(todo, math.Abs(o))
		return sols[i]
	}
	length := s.Length
	if length == 0 {
		sol := solAt(nom)
		length = NewLines(sol.C, sol.C0).QuarterWave(s.Frequency)
	}
	c := &Curve{Section: s.Name, Frequency: s.Frequency, Length: length, ZRef: s.ZRef}
	for _, o := range offs {
		sol := *solAt(o)
		sol.Offset = o
		c.Points = append(c.Points, newPoint(o, &sol, s.Frequency, length, s.ZRef))
	}
	if err := c.fit(); err != nil {
		return nil, err
	}
	return c, nil
}

// solvedOffsets returns the offsets a sweep of offs solves, ascending. The
// mirror x → −x maps the section at offset δ onto itself at −δ (two
// symmetric trapezoids in a laterally uniform stack, the same conductor on
// each side), so C(−δ) = C(δ) and every parameter's derivative too: only |δ|
// is solved, and with a quarter-wave length the nominal offset as well.
func (s *Section) solvedOffsets(offs []float64) []float64 {
	need := make([]float64, 0, len(offs)+1)
	for _, o := range offs {
		need = append(need, math.Abs(o))
	}
	if s.Length == 0 {
		need = append(need, math.Abs(s.NominalOffset()))
	}
	slices.Sort(need)
	return slices.Compact(need)
}

// solveAll solves the offsets at level lev on workers goroutines.
func (sv *solver) solveAll(ctx context.Context, todo []float64, lev float64, workers int) ([]*Solution, error) {
	sols := make([]*Solution, len(todo))
	errs := make([]error, len(todo))
	parent := ctx
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	next := make(chan int)
	var wg sync.WaitGroup
	for range min(workers, len(todo)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w := &femWork{}
			for i := range next {
				sols[i], errs[i] = sv.solveLevel(ctx, todo[i], lev, w)
				if errs[i] != nil {
					cancel()
				}
			}
		}()
	}
	// Offsets inside a transition window solve two topologies: they go
	// first, so that the last offsets to finish are the cheap ones and the
	// workers end together.
	order := make([]int, 0, len(todo))
	for pass := range 2 {
		for i, o := range todo {
			if _, t := sv.locate(o); (t > 0) == (pass == 0) {
				order = append(order, i)
			}
		}
	}
feed:
	for _, i := range order {
		select {
		case next <- i:
		case <-ctx.Done():
			break feed
		}
	}
	close(next)
	wg.Wait()
	// The first failure cancels the others, which then report the
	// cancellation: report the failure, not what it caused (or the caller's
	// own cancellation, if that came first).
	if err := parent.Err(); err != nil {
		return nil, err
	}
	for i, e := range errs {
		if e != nil && !errors.Is(e, context.Canceled) {
			return nil, fmt.Errorf("sweep offset %s: %w", mils(todo[i]), e)
		}
	}
	for i := range sols {
		if sols[i] == nil {
			return nil, context.Canceled
		}
	}
	return sols, nil
}

func newPoint(off float64, sol *Solution, f0, length, zref float64) Point {
	p := Point{Offset: off, Lines: NewLines(sol.C, sol.C0), Convergence: sol.Convergence}
	p.CouplingDB, p.DirectivityDB = p.Lines.couplingAt(f0, length, zref)
	p.PeakFrequency = p.Lines.peakFrequency(f0, length, zref)
	for k, par := range sol.Params {
		p.Sens = append(p.Sens, newSensitivity(par, sol.C, sol.C0, sol.DC[k], sol.DC0[k], f0, length, zref, p.Symmetric))
	}
	return p
}

// monotoneCubic is a C¹ piecewise cubic Hermite interpolant whose node
// derivatives are those of the not-a-knot cubic spline (fourth-order accurate
// on smooth data), limited so that the interpolant is monotone wherever the
// data are: zero at a local extremum of the data, and at most three times the
// smaller adjacent secant slope (Fritsch & Carlson, SIAM J. Numer. Anal. 17,
// 238–246, 1980; the 3·min limiter of Hyman, SIAM J. Sci. Stat. Comput. 4,
// 645–654, 1983). A plain Fritsch–Butland interpolant (gonum
// interp.FritschButland) was tried first: it is monotone too, but its
// harmonic-mean slopes misread a parabola's flank by 2.6e−4 dB next to the
// peak of a centred broadside pair, a tenth of the drift there.
type monotoneCubic struct{ interp.PiecewiseCubic }

func (m *monotoneCubic) Fit(xs, ys []float64) error {
	n := len(xs)
	d := make([]float64, n)
	sec := make([]float64, n-1)
	for i := range sec {
		sec[i] = (ys[i+1] - ys[i]) / (xs[i+1] - xs[i])
	}
	if n >= 3 {
		// gonum's not-a-knot system is singular for three points (one cubic
		// through three points is not unique); there the natural spline serves.
		var sp interp.DerivativePredictor
		if n >= 4 {
			var nak interp.NotAKnotCubic
			if err := nak.Fit(xs, ys); err != nil {
				return err
			}
			sp = &nak
		} else {
			var nat interp.NaturalCubic
			if err := nat.Fit(xs, ys); err != nil {
				return err
			}
			sp = &nat
		}
		for i, x := range xs {
			d[i] = sp.PredictDerivative(x)
		}
	} else {
		d[0], d[1] = sec[0], sec[0]
	}
	limit := func(di, s float64) float64 { // same sign as s, |d| ≤ 3|s|
		if di*s <= 0 {
			return 0
		}
		return math.Copysign(math.Min(math.Abs(di), 3*math.Abs(s)), s)
	}
	for i := range d {
		switch {
		case i == 0:
			d[i] = limit(d[i], sec[0])
		case i == n-1:
			d[i] = limit(d[i], sec[n-2])
		case sec[i-1]*sec[i] <= 0:
			d[i] = 0
		default:
			s := sec[i-1]
			if math.Abs(sec[i]) < math.Abs(s) {
				s = sec[i]
			}
			d[i] = limit(d[i], s)
		}
	}
	m.FitWithDerivatives(xs, ys, d)
	return nil
}

// fit builds the interpolants.
func (c *Curve) fit() error {
	n := len(c.Points)
	xs := make([]float64, n)
	ys := make([][4]float64, n)
	for i, p := range c.Points {
		xs[i] = p.Offset
		ys[i] = [4]float64{p.CouplingDB, p.DirectivityDB, p.ZLine[0], p.ZLine[1]}
	}
	col := func(k int) []float64 {
		v := make([]float64, n)
		for i := range ys {
			v[i] = ys[i][k]
		}
		return v
	}
	for k, f := range []*monotoneCubic{&c.coupling, &c.directivity, &c.z0, &c.z1} {
		if err := f.Fit(xs, col(k)); err != nil {
			return fmt.Errorf("section %q: interpolant: %w", c.Section, err)
		}
	}
	c.sens = nil
	if m := len(c.Points[0].Sens); m > 0 {
		c.sens = make([]monotoneCubic, m)
		for k := range m {
			v := make([]float64, n)
			for i, p := range c.Points {
				if len(p.Sens) != m {
					return fmt.Errorf("section %q: point %d has %d sensitivities, point 0 has %d", c.Section, i, len(p.Sens), m)
				}
				v[i] = p.Sens[k].CouplingDB
			}
			if err := c.sens[k].Fit(xs, v); err != nil {
				return fmt.Errorf("section %q: interpolant: %w", c.Section, err)
			}
		}
	}
	c.lo, c.hi = xs[0], xs[n-1]
	c.cSlope[0] = c.coupling.PredictDerivative(c.lo)
	c.cSlope[1] = c.coupling.PredictDerivative(c.hi)
	return nil
}

// Params returns the parameters of the curve's sensitivities, in the order
// of Point.Sens (nil for a curve solved without Settings.Sensitivities).
func (c *Curve) Params() []Param {
	if len(c.Points) == 0 || len(c.Points[0].Sens) == 0 {
		return nil
	}
	out := make([]Param, len(c.Points[0].Sens))
	for k, s := range c.Points[0].Sens {
		out[k] = s.Param
	}
	return out
}

// CouplingSensitivity returns the derivative of coupling (dB per metre, or
// per unit εr) with respect to parameter k of Params at offset, interpolated
// by a monotone cubic and clamped to Range. It does not allocate. With
// Coupling it gives the first-order coupling of a site whose parameters
// moved by Δp: Coupling(δ) + Σ_k CouplingSensitivity(k, δ)·Δp_k.
func (c *Curve) CouplingSensitivity(k int, offset float64) float64 {
	return c.sens[k].Predict(math.Max(c.lo, math.Min(c.hi, offset)))
}

// Range returns the offsets covered by the solved points.
func (c *Curve) Range() (lo, hi float64) { return c.lo, c.hi }

// Coupling returns the coupling in dB at offset (upper minus lower trace
// centre, m), interpolated by a monotone cubic (monotoneCubic). Outside Range it extends the
// end point along the end slope (a caller sampling far tails should widen the
// sweep instead). It does not allocate and costs O(log n).
func (c *Curve) Coupling(offset float64) float64 {
	switch {
	case offset < c.lo:
		return c.coupling.Predict(c.lo) + c.cSlope[0]*(offset-c.lo)
	case offset > c.hi:
		return c.coupling.Predict(c.hi) + c.cSlope[1]*(offset-c.hi)
	}
	return c.coupling.Predict(offset)
}

// Directivity returns the directivity in dB at offset, clamped to Range.
func (c *Curve) Directivity(offset float64) float64 {
	return c.directivity.Predict(math.Max(c.lo, math.Min(c.hi, offset)))
}

// ZLine returns each line's impedance √(L_ii/C_ii) at offset, clamped to Range.
func (c *Curve) ZLine(offset float64) [2]float64 {
	o := math.Max(c.lo, math.Min(c.hi, offset))
	return [2]float64{c.z0.Predict(o), c.z1.Predict(o)}
}

// Default offset grid.
const (
	defaultHalfSpan = 5 * mil   // at least ±5 mil about the nominal offset
	defaultStep     = 0.5 * mil // point spacing while the span allows
	minPoints       = 21
	maxPoints       = 61
)

// DefaultOffsets returns an odd-sized grid centred on the nominal offset
// (s.NominalOffset, which is DesignOffset when both traces are at x = 0)
// covering at least ±5 mil and at least ±span: 21 points 0.5 mil apart, up to
// 61 points for wider spans, then wider spacing. For an edge-coupled pair the
// grid is clipped so that the traces never touch.
func DefaultOffsets(s *Section, span float64) []float64 {
	half := math.Max(defaultHalfSpan, math.Abs(span))
	n := int(math.Ceil(half/defaultStep))*2 + 1
	n = max(minPoints, min(maxPoints, n))
	nom := s.NominalOffset()
	if s.Traces[0].Layer == s.Traces[1].Layer {
		// keep a tenth of the nominal gap
		gap := math.Abs(nom) - (s.Traces[0].Width+s.Traces[1].Width)/2
		if m := s.Stackup.Mask; m != nil && s.maskCoats(s.layerIndex(s.Traces[0].Layer)) {
			gap -= 2 * m.OverCopper * (1 + maskGapMargin) // the coats must not meet
		}
		if gap > 0 {
			half = math.Min(half, 0.9*gap)
		}
	}
	out := make([]float64, n)
	for i := range out {
		out[i] = nom + half*(2*float64(i)/float64(n-1)-1)
	}
	out[n/2] = nom
	return out
}
