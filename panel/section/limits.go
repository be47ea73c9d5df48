package section

import (
	"errors"
	"fmt"
	"math"
)

// Limits of the solver and plausibility bounds of a section's numbers.

// MinAccuracy is the finest accuracy target a loader should take whatever the
// section: the first mesh level grows as the target shrinks (startLevel) up
// to its cap, which this target reaches, so a finer target starts on the
// same meshes and can only add refinement steps, each doubling the nodes.
// Most sections stop earlier: FinestAccuracy says where (about 3e−5 for the
// broadside demo sections, 1.3e−5 for a microstrip pair).
const MinAccuracy = DefaultAccuracy * (0.8 / maxStartLevel) * (0.8 / maxStartLevel)

// The first refinement level (startLevel) lies within these.
const (
	minStartLevel = 0.5
	maxStartLevel = 8
)

// accuracyAtStart inverts startLevel: the accuracy target whose first level
// is lev.
func accuracyAtStart(lev float64) float64 {
	r := 0.8 / lev
	return DefaultAccuracy * r * r
}

// FinestAccuracy returns the finest accuracy target (relative error in C)
// whose first mesh triple fits under the solver's node limit for a sweep of
// section s over offsets (nil: DefaultOffsets(s, 0)), and never less than
// MinAccuracy. A finer target fails at once with a *ConvergenceError matching
// ErrMeshLimit; a coarser one starts, and may still need finer meshes if the
// error estimate misses it (a *ConvergenceError after the last refinement
// step). It is +Inf when not even the coarsest level fits (a section of
// absurd proportions). Wider offset ranges cross more mesh topologies, so
// the figure can only fall as the range grows.
func FinestAccuracy(s *Section, offsets []float64) (float64, error) {
	if err := s.Validate(); err != nil {
		return 0, err
	}
	if offsets == nil {
		offsets = DefaultOffsets(s, 0)
	}
	nom := s.NominalOffset()
	lo, hi := nom, nom
	for _, o := range offsets {
		if err := s.checkOffset(o, "offsets"); err != nil {
			return 0, err
		}
		lo, hi = min(lo, o), max(hi, o)
	}
	sv, err := newSolver(s, nil, lo, hi)
	if err != nil {
		return 0, err
	}
	return sv.finestAccuracy(), nil
}

// finestAccuracy computes FinestAccuracy for the solver's topologies, once.
func (sv *solver) finestAccuracy() float64 {
	sv.finestOnce.Do(func() {
		// fits reports whether the fine mesh (level 2·lev, the largest of the
		// triple) of every topology is within the node limit.
		fits := func(lev float64) bool {
			for k := range sv.topos {
				if newMeshPlan(sv.s, sv.topos[k], 2*lev, 1, 2*lev).unknownsEstimate() > maxMeshNodes {
					return false
				}
			}
			return true
		}
		switch {
		case !fits(minStartLevel):
			sv.finest = math.Inf(1)
			return
		case fits(maxStartLevel):
			sv.finest = MinAccuracy
			return
		}
		// Node counts grow as the level squared: bisect on log(level) to 1 %.
		lo, hi := minStartLevel, float64(maxStartLevel)
		for hi/lo > 1.01 {
			m := math.Sqrt(lo * hi)
			if fits(m) {
				lo = m
			} else {
				hi = m
			}
		}
		sv.finest = accuracyAtStart(lo)
	})
	return sv.finest
}

// Plausibility bounds. Values beyond them are not printed circuit boards and
// are almost surely a unit slip; they are rejected as a *FieldError naming
// the key, before any arithmetic could overflow.
const (
	// MaxEr bounds the relative permittivity of a dielectric. Printed-board
	// laminates range from about 2 (PTFE) to about 10 to 12 (ceramic-filled
	// PTFE, alumina); 100 leaves room for high-permittivity ceramics such as
	// rutile (about 100; common practice).
	MaxEr = 100.0
	// MaxFrequency bounds f0: 1 THz, far above any quasi-static analysis of
	// printed lines (the TEM assumption fails long before).
	MaxFrequency = 1e12
	// MaxDimension bounds every thickness, width and coupled length: 1 m, more
	// than the largest production panel's side (about 0.6 m).
	MaxDimension = 1.0
)

// checkPlausible rejects finite values beyond the plausibility bounds (NaN
// and infinities are Validate's).
func (s *Section) checkPlausible() error {
	for i, l := range s.Stackup.Layers {
		key := fmt.Sprintf("stackup.layers[%d]", i)
		if l.Thickness > MaxDimension {
			return s.fieldErr(key+".thickness", "thickness %s is more than %g m", mils(l.Thickness), MaxDimension)
		}
		if l.Kind == Dielectric && l.Er > MaxEr {
			return s.fieldErr(key+".er", "relative permittivity %g is above %g", l.Er, MaxEr)
		}
	}
	for k, t := range s.Traces {
		key := fmt.Sprintf("traces[%d]", k)
		if t.Width > MaxDimension {
			return s.fieldErr(key+".width", "width %s is more than %g m", mils(t.Width), MaxDimension)
		}
		if t.Etch > MaxDimension {
			return s.fieldErr(key+".etch", "etch %s is more than %g m", mils(t.Etch), MaxDimension)
		}
	}
	if s.Frequency > MaxFrequency {
		return s.fieldErr("frequency", "frequency %g Hz is above %g Hz", s.Frequency, MaxFrequency)
	}
	if s.Length > MaxDimension {
		return s.fieldErr("length", "length %s is more than %g m", mils(s.Length), MaxDimension)
	}
	if s.ZRef > maxZRef {
		return s.fieldErr("z_ref", "reference impedance %g ohm is above %g ohm", s.ZRef, maxZRef)
	}
	return nil
}

// maxZRef bounds the port reference impedance: printed lines range from about
// 10 to 200 ohm; 1 kohm is far beyond.
const maxZRef = 1e3

// check rejects an accuracy target that is not a number or not below 1
// (100 %) as a *FieldError with key "accuracy"; zero and negative mean the
// default (Settings).
func (set *Settings) check(s *Section) error {
	if set == nil {
		return nil
	}
	if a := set.Accuracy; math.IsNaN(a) || a >= 1 {
		return s.fieldErr("accuracy", "accuracy target %g is not a relative error below 1", a)
	}
	return nil
}

// ErrNotMaxwell is wrapped by the error of a solve whose capacitance matrices
// are not Maxwell matrices (finite, symmetric, positive definite, C ≥ C0 on
// the diagonal): a numerical failure inside the plausibility bounds, which
// must stop the solve before NewLines (whose precondition they are) or any
// figure derived from them.
var ErrNotMaxwell = errors.New("capacitance matrix is not a Maxwell matrix")

// checkMaxwell checks the extrapolated matrices of a solve.
func (sv *solver) checkMaxwell(off float64, conv Convergence) error {
	for _, m := range []struct {
		name string
		c    [2][2]float64
	}{{"C", conv.C}, {"C0", conv.C0}} {
		c := m.c
		ok := finite(c[0][0]) && finite(c[0][1]) && finite(c[1][0]) && finite(c[1][1]) &&
			c[0][0] > 0 && c[1][1] > 0 && c[0][0]*c[1][1] > c[0][1]*c[1][0] &&
			math.Abs(c[0][1]-c[1][0]) <= 1e-9*math.Sqrt(c[0][0]*c[1][1])
		if !ok {
			return fmt.Errorf("section %q: offset %s: %s = %v: %w", sv.s.Name, mils(off), m.name, c, ErrNotMaxwell)
		}
	}
	// A dielectric (εr ≥ 1) can only raise the self capacitances: C_ii is
	// the minimum of the field energy over potentials with conductor i at
	// 1 V and the others at 0 (Jackson, Classical Electrodynamics, 3rd ed.,
	// §1.12), and the energy of every potential grows with ε; the same holds
	// for the discrete energy form on one mesh. Allow rounding.
	for i := range 2 {
		if conv.C[i][i] < conv.C0[i][i]*(1-1e-9) {
			return fmt.Errorf("section %q: offset %s: C%d%d %g below its vacuum value %g: %w", sv.s.Name, mils(off), i+1, i+1, conv.C[i][i], conv.C0[i][i], ErrNotMaxwell)
		}
	}
	return nil
}
