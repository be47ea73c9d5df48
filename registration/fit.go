package registration

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/mat"

	"github.com/regdrift/regdrift/panel"
)

// FitModel chooses which affine terms a fit estimates.
type FitModel int

const (
	// Affine estimates all six terms: offset_x, offset_y, rotation, scale_x,
	// scale_y and skew. It needs at least 3 targets not on one line.
	Affine FitModel = iota
	// Similarity estimates offsets, rotation and one scale (scale_x = scale_y),
	// the linearised 2-D conformal (Helmert) transformation. It needs 2 targets.
	Similarity
	// Translation estimates the offsets only. It needs 1 target.
	Translation
)

var fitModelNames = [...]string{"affine", "similarity", "translation"}

func (m FitModel) String() string {
	if m >= 0 && int(m) < len(fitModelNames) {
		return fitModelNames[m]
	}
	return fmt.Sprintf("FitModel(%d)", int(m))
}

// ParseFitModel reads "affine", "similarity" or "translation".
func ParseFitModel(s string) (FitModel, error) {
	for i, n := range fitModelNames {
		if s == n {
			return FitModel(i), nil
		}
	}
	return 0, fmt.Errorf("unknown model %q (want affine, similarity or translation)", s)
}

// Params returns the number of parameters the model estimates.
func (m FitModel) Params() int { return [...]int{6, 4, 2}[m] }

// MinTargets returns the fewest targets that determine the model.
func (m FitModel) MinTargets() int { return [...]int{3, 2, 1}[m] }

// Estimates reports whether the model estimates term k on its own. A
// similarity fit estimates one scale, reported as both scale_x and scale_y.
func (m FitModel) Estimates(k TermKind) bool {
	switch m {
	case Affine:
		return true
	case Similarity:
		return k != Skew
	}
	return k == OffsetX || k == OffsetY
}

// Robust chooses the weight function of an iteratively reweighted fit.
//
// A robust fit runs in two stages. Iteratively reweighted least squares with
// the chosen weights, on each target's radial residual u = |r|/σ̂ in units of
// a robust scale σ̂ (see robustScale), finds the mis-measured targets without
// letting them pull the fit. Then the targets beyond OutlierLimit·σ are
// rejected and the rest refitted by ordinary least squares, re-testing every
// target against the new σ0 until the rejected set is stable (reweighted
// least squares, Rousseeuw & Leroy 1987). The reported terms, σ0 and standard
// errors are those of the final ordinary fit, and the rejected targets are
// the outliers.
type Robust int

const (
	NoRobust Robust = iota // ordinary least squares
	// Huber weights w = min(1, c/u) for a target's standardised radial residual u
	// (Huber 1964, Ann. Math. Statist. 35, 73–101).
	Huber
	// Tukey's biweight w = (1 − (u/c)²)² for u < c and 0 beyond, started from
	// the converged Huber fit because the biweight's objective is not convex
	// (Beaton & Tukey 1974, Technometrics 16, 147–185).
	Tukey
)

// ParseRobust reads "huber" or "tukey".
func ParseRobust(s string) (Robust, error) {
	switch s {
	case "huber":
		return Huber, nil
	case "tukey":
		return Tukey, nil
	case "none", "":
		return NoRobust, nil
	}
	return 0, fmt.Errorf("unknown robust weighting %q (want huber or tukey)", s)
}

func (r Robust) String() string {
	return [...]string{"none", "huber", "tukey"}[r]
}

// Default robust settings.
const (
	// DefaultHuberC is the Rayleigh 95 % point in units of σ: a target's
	// radial residual, for independent N(0, σ) errors in x and y, has the
	// Rayleigh distribution F(r) = 1 − exp(−r²/2σ²), so it exceeds
	// r_p = σ·√(−2 ln(1 − p)) = 2.4477σ at p = 0.95 with probability 5 %
	// [calculated here from that closed form], and an inlier is down-weighted
	// by the Huber function only that often.
	DefaultHuberC = 2.4477
	// DefaultTukeyC is the biweight constant with 95 % efficiency at the
	// normal for one-dimensional residuals (Holland & Welsch 1977, Commun.
	// Statist. A6, 813–827); applied to the radial residual it is conservative.
	DefaultTukeyC = 4.685
	// DefaultOutlierLimit is the standardised radial residual above which a
	// target is reported as an outlier. An inlier exceeds 4σ with probability
	// exp(−4²/2) = 3.4e-4 (Rayleigh tail), about once in 3000 targets.
	DefaultOutlierLimit = 4.0
	// rayleighMedian converts the median radial residual to σ: the Rayleigh
	// median is σ·√(2 ln 2) = 1.1774σ (r_p above at p = 1/2).
	rayleighMedian = 1.1774100225154747
	// MaxCondition bounds the condition number of the column-equilibrated
	// normal matrix. Above it the targets (too few, nearly on one line, or far
	// from the datum) do not determine the terms: cond(N) = cond(A)², so 1e10
	// means that data errors are amplified about 1e5-fold.
	MaxCondition = 1e10
)

// FitSettings configures a fit. The zero value is an ordinary least-squares
// affine fit about the panel centre.
type FitSettings struct {
	Model FitModel
	Datum panel.Vec // the point that rotation and scale act about, m
	// Robust selects iterative reweighting; NoRobust is ordinary least squares.
	Robust Robust
	// Tuning is the robust constant c in units of the residual scale σ̂;
	// zero means DefaultHuberC or DefaultTukeyC.
	Tuning float64
	// OutlierLimit: with Robust set, targets whose radial residual exceeds
	// OutlierLimit·σ are rejected and reported as outliers, σ being the
	// residual scale of the targets kept. Zero means DefaultOutlierLimit.
	OutlierLimit float64
	// MaxIter bounds the reweighting iterations of each phase; zero means 50.
	MaxIter int
	// Workers is the number of panel-and-layer fits made at once; zero
	// means GOMAXPROCS. The fits do not depend on it.
	Workers int
}

// Fit is the fitted movement of one layer on one panel.
type Fit struct {
	Panel, Layer string
	Model        FitModel
	// Terms are the fitted affine terms (SI: m, rad, strain); terms the model
	// does not estimate are zero. A similarity fit reports its one scale as
	// both scale_x and scale_y.
	Terms [NumTerms]float64
	// StdErr are the standard errors of the terms, σ0·√(N⁻¹)_kk with N the
	// (weighted) normal matrix; NaN when the fit has no redundancy.
	StdErr [NumTerms]float64
	N      int     // targets
	DOF    int     // redundancy: 2·targets − parameters
	Sigma0 float64 // a-posteriori standard error of unit weight (per axis), m
	// RMS and Max are the root mean square and the largest radial residual
	// over the targets not reported as outliers, m.
	RMS, Max float64
	// Group holds the targets fitted; Target, Fitted, Residual and
	// Outlier give each one's part of the fit, with the group loaded
	// (TargetGroup.Load).
	Group    *TargetGroup
	Outliers []string // names of the targets reported as outliers
	// Scale is the residual scale σ the outlier test used, m (0 for ordinary
	// least squares).
	Scale float64
	// Extent is the smallest rectangle holding every target's nominal
	// position, and MaxMeasured the largest measured displacement |d| of
	// the targets not reported as outliers, m: what a figure of all the
	// fits needs before it loads any group.
	Extent      panel.Rect
	MaxMeasured float64

	// A fit keeps no array per target beside its group: the fitted
	// displacement is recomputed from the parameters by the expression
	// the solver used (fitted), so it is the same to the bit, and the
	// outliers are their sorted indices.
	beta    [NumTerms]float64 // the parameters of the model (not the terms: a similarity has one scale)
	datum   panel.Vec
	outlier []int32 // indices in Group of the outliers, ascending
}

// Len returns the number of targets fitted.
func (f *Fit) Len() int {
	if f.Group == nil {
		return 0
	}
	return f.Group.Len()
}

// Target returns target i of the fit.
func (f *Fit) Target(i int) Target { return f.Group.Target(i) }

// Fitted returns the model's displacement at target i.
func (f *Fit) Fitted(i int) panel.Vec {
	ax, ay := columns(f.Model, f.Group.Pos(i), f.datum)
	return fitted(&ax, &ay, &f.beta, f.Model.Params())
}

// Residual returns target i's measured minus fitted displacement.
func (f *Fit) Residual(i int) panel.Vec {
	d, m := f.Group.D(i), f.Fitted(i)
	return panel.Vec{X: d.X - m.X, Y: d.Y - m.Y}
}

// Outlier reports whether target i was rejected as an outlier.
func (f *Fit) Outlier(i int) bool {
	_, ok := slices.BinarySearch(f.outlier, int32(i))
	return ok
}

// fitted returns the displacement of parameters beta on design rows ax, ay:
// the one expression for a fitted value, in the solver and after it.
func fitted(ax, ay, beta *[NumTerms]float64, np int) panel.Vec {
	var fx, fy float64
	for a := 0; a < np; a++ {
		fx += ax[a] * beta[a]
		fy += ay[a] * beta[a]
	}
	return panel.Vec{X: fx, Y: fy}
}

// Errors of a fit, for errors.Is.
var (
	ErrTooFewTargets  = errors.New("too few targets")
	ErrIllConditioned = errors.New("ill-conditioned fit")
)

// FitError is a fit that could not be made; it names the panel and layer.
type FitError struct {
	Panel, Layer string
	Err          error
}

func (e *FitError) Error() string {
	return fmt.Sprintf("panel %q, layer %q: %v", e.Panel, e.Layer, e.Err)
}
func (e *FitError) Unwrap() error { return e.Err }

// FitAll groups targets by panel and layer, in order of first appearance, and
// fits each group.
func FitAll(ts []Target, set *FitSettings) ([]Fit, error) {
	return FitSet(GroupTargets(ts), set)
}

// FitSet fits each group of s, the fits in the order of the groups. Of
// several groups that cannot be fitted, the error names the first (a
// *FitError); an error loading a group is returned as it is.
//
// The groups are independent, so set.Workers goroutines take them in turn,
// each loading its group, fitting it and releasing it, with its own work
// storage: memory for one group's targets and design rows a worker, not for
// the set. A fit keeps only its parameters and its outliers' indices.
func FitSet(s *TargetSet, set *FitSettings) ([]Fit, error) {
	n := len(s.Groups)
	fits := make([]Fit, n)
	errs := make([]error, n)
	workers := runtime.GOMAXPROCS(0)
	if set != nil && set.Workers > 0 {
		workers = set.Workers
	}
	workers = max(1, min(workers, n))
	var next, failed atomic.Int64 // the next group to fit; the first that failed
	failed.Store(int64(n))
	var wg sync.WaitGroup
	for range workers {
		wg.Go(func() {
			var w fitWork
			for {
				i := next.Add(1) - 1
				if i >= failed.Load() {
					return // groups after a failed one need no fit: its error is the one reported
				}
				g := s.Groups[i]
				err := g.Load()
				var f *Fit
				if err == nil {
					f, err = w.fit(g, set)
					g.Release()
				}
				if err != nil {
					errs[i] = err
					for {
						if old := failed.Load(); i >= old || failed.CompareAndSwap(old, i) {
							break
						}
					}
					continue
				}
				fits[i] = *f
			}
		})
	}
	wg.Wait()
	if i := failed.Load(); i < int64(n) {
		return nil, errs[i]
	}
	return fits, nil
}

// FitTargets fits the targets of one panel and layer (taken from the first
// target).
func FitTargets(ts []Target, set *FitSettings) (*Fit, error) {
	b := newSetBuilder(0)
	g := b.newGroup("", "")
	if len(ts) > 0 {
		g.Panel, g.Layer = ts[0].Panel, ts[0].Layer
	}
	for _, t := range ts {
		b.add(g, t.Name, t.Pos, t.D, t.Row) // does not fail without a budget
	}
	var w fitWork
	return w.fit(g, set)
}

// fitWork holds the storage one fit reuses.
type fitWork struct {
	ax, ay  [][NumTerms]float64 // design rows per target, x and y
	nm      *mat.SymDense
	chol    mat.Cholesky
	rhs, bt *mat.VecDense
	inv     mat.SymDense
	// radial is the targets' radial residuals in ascending order, each
	// with its target; a new group starts it empty (see robustScale).
	radial []radialResidual
	// Per target of the group being fitted, reused from group to group:
	// the weights, the fitted displacements and the residuals.
	weights   []float64
	residuals []panel.Vec
}

// columns fills the design rows of the model at r = p − p0: the displacement
// per unit of each parameter.
func columns(m FitModel, p, p0 panel.Vec) (ax, ay [NumTerms]float64) {
	switch m {
	case Affine:
		b := Basis(p, p0)
		for k := range b {
			ax[k], ay[k] = b[k].X, b[k].Y
		}
	case Similarity:
		r := p.Sub(p0)
		// d = t + θ·ẑ×r + s·r: the linear conformal transformation
		// x' = a·x − b·y + c, y' = b·x + a·y + d with a = 1 + s, b = θ
		// (Ghilani & Wolf, Adjustment Computations, 4th ed., ch. 18).
		ax = [NumTerms]float64{1, 0, -r.Y, r.X}
		ay = [NumTerms]float64{0, 1, r.X, r.Y}
	default:
		ax[0], ay[1] = 1, 1
	}
	return ax, ay
}

func (w *fitWork) fit(g *TargetGroup, set *FitSettings) (*Fit, error) {
	if set == nil {
		set = &FitSettings{}
	}
	m := set.Model
	np := m.Params()
	n := g.Len()
	f := &Fit{Model: m, N: n, Group: g, Panel: g.Panel, Layer: g.Layer, datum: set.Datum}
	if n < m.MinTargets() {
		return nil, &FitError{f.Panel, f.Layer, fmt.Errorf("%w: %d target(s), the %s model needs at least %d", ErrTooFewTargets, n, m, m.MinTargets())}
	}
	w.ax, w.ay = w.ax[:0], w.ay[:0]
	for i := range n {
		ax, ay := columns(m, g.Pos(i), set.Datum)
		w.ax, w.ay = append(w.ax, ax), append(w.ay, ay)
	}
	if w.nm == nil || w.nm.SymmetricDim() != np {
		w.nm = mat.NewSymDense(np, nil)
		w.rhs = mat.NewVecDense(np, nil)
		w.bt = mat.NewVecDense(np, nil)
	}
	w.radial = w.radial[:0]
	w.weights = slices.Grow(w.weights[:0], n)[:n]
	for i := range w.weights {
		w.weights[i] = 1
	}
	w.residuals = slices.Grow(w.residuals[:0], n)[:n]
	var beta [NumTerms]float64
	var scale [NumTerms]float64
	if err := w.solve(g, f, np, &beta, &scale, true); err != nil {
		return nil, err
	}
	if set.Robust != NoRobust {
		maxIter := set.MaxIter
		if maxIter <= 0 {
			maxIter = 50
		}
		lim := set.OutlierLimit
		if lim <= 0 {
			lim = DefaultOutlierLimit
		}
		phases := []Robust{Huber}
		if set.Robust == Tukey {
			phases = append(phases, Tukey)
		}
		for _, ph := range phases {
			c := DefaultHuberC
			if ph == Tukey {
				c = DefaultTukeyC
			}
			if ph == set.Robust && set.Tuning > 0 {
				c = set.Tuning
			}
			for it := 0; it < maxIter; it++ {
				s := w.robustScale(np, lim)
				f.Scale = s
				for i, r := range w.residuals {
					u := math.Hypot(r.X, r.Y) / s
					w.weights[i] = robustWeight(ph, u, c)
				}
				prev := beta
				// The condition was checked with full weights; the reweighted
				// systems only need to stay positive definite here.
				if err := w.solve(g, f, np, &beta, &scale, false); err != nil {
					var fe *FitError
					if errors.As(err, &fe) {
						fe.Err = fmt.Errorf("robust %s reweighting kept too few targets: %w", ph, fe.Err)
					}
					return nil, err
				}
				// Converged when no parameter moves the fitted field by more
				// than 1e-6 of the residual scale: the reweighted refit below
				// settles the terms exactly, this only has to sort the targets.
				done := true
				for k := 0; k < np; k++ {
					if math.Abs(beta[k]-prev[k])/scale[k] > 1e-6*s {
						done = false
					}
				}
				if done {
					break
				}
			}
		}
		// Reweighted least squares (Rousseeuw & Leroy 1987, Robust Regression
		// and Outlier Detection, Wiley, sec. 1.2 and ch. 3): reject the targets
		// beyond lim·σ̂ of the robust fit, refit the others by ordinary least
		// squares and re-test every target against the new σ0 until the set
		// is stable. The reported terms, σ0 and standard errors are those of
		// that final fit, so they keep their usual meaning.
		out := make([]bool, n)
		s := w.robustScale(np, lim)
		for i, r := range w.residuals {
			out[i] = math.Hypot(r.X, r.Y) > lim*s
		}
		for it := 0; it < 10; it++ {
			kept := 0
			for i := range out {
				w.weights[i] = 1
				if out[i] {
					w.weights[i] = 0
				} else {
					kept++
				}
			}
			if err := w.solve(g, f, np, &beta, &scale, true); err != nil {
				var fe *FitError
				if errors.As(err, &fe) {
					fe.Err = fmt.Errorf("after rejecting outliers: %w", fe.Err)
				}
				return nil, err
			}
			if 2*kept-np <= 0 {
				break
			}
			var ss float64
			for i, r := range w.residuals {
				if !out[i] {
					ss += r.X*r.X + r.Y*r.Y
				}
			}
			s = math.Max(math.Sqrt(ss/float64(2*kept-np)), 1e-12)
			same := true
			for i, r := range w.residuals {
				o := math.Hypot(r.X, r.Y) > lim*s
				if o != out[i] {
					same = false
				}
				out[i] = o
			}
			if same {
				break
			}
		}
		f.Scale = s
		for i := range out {
			if w.weights[i] == 0 {
				f.Outliers = append(f.Outliers, g.Name(i))
				f.outlier = append(f.outlier, int32(i))
			}
		}
	}
	w.finish(f, np, &beta)
	return f, nil
}

// robustWeight returns the weight of a target with standardised radial
// residual u.
func robustWeight(r Robust, u, c float64) float64 {
	switch r {
	case Huber:
		if u <= c {
			return 1
		}
		return c / u
	case Tukey:
		if u >= c {
			return 0
		}
		q := u / c
		return (1 - q*q) * (1 - q*q)
	}
	return 1
}

// robustScale estimates σ in two steps. It starts from the median radial
// residual, σ̂ = med|r|/1.1774 (the Rayleigh median σ·√(2 ln 2)), which
// ignores up to half the targets but scatters by some 15 % with 25 targets;
// it then refines σ̂ as the root mean square of the residuals within
// lim·σ̂, σ̂² = Σ|r|²/(2n' − p) over those n' targets, until that set is
// stable. Truncating a Rayleigh distribution at 4σ biases σ² by 0.3 % only.
// The floor of 1 pm keeps an exact fit from dividing by zero.
//
// The residuals move little from one reweighting to the next, so the
// targets are sorted in the order the last call left them in, where an
// insertion sort has little to do; it hands over to a full sort once it has
// moved more than a few entries per target. Either way the values come out
// in the same ascending order, and so do the sums over them.
func (w *fitWork) robustScale(np int, lim float64) float64 {
	n := len(w.residuals)
	if len(w.radial) != n {
		w.radial = w.radial[:0]
		for i, r := range w.residuals {
			w.radial = append(w.radial, radialResidual{math.Hypot(r.X, r.Y), int32(i)})
		}
		slices.SortFunc(w.radial, compareRadial)
	} else {
		for k := range w.radial {
			r := w.residuals[w.radial[k].i]
			w.radial[k].r = math.Hypot(r.X, r.Y)
		}
		sortNearlySorted(w.radial)
	}
	med := w.radial[n/2].r
	if n%2 == 0 {
		med = (w.radial[n/2-1].r + w.radial[n/2].r) / 2
	}
	s := med / rayleighMedian
	if dof := 2*n - np; dof > 0 {
		s *= math.Sqrt(float64(2*n) / float64(dof))
	}
	s = math.Max(s, 1e-12)
	kept := -1
	for it := 0; it < 10; it++ {
		var ss float64
		k := 0
		for _, e := range w.radial {
			if r := e.r; r <= lim*s {
				ss += r * r
				k++
			}
		}
		if k == kept || 2*k-np <= 0 {
			break
		}
		kept = k
		s = math.Max(math.Sqrt(ss/float64(2*k-np)), 1e-12)
	}
	return s
}

// radialResidual is a target's radial residual |r| and its index.
type radialResidual struct {
	r float64
	i int32
}

func compareRadial(a, b radialResidual) int { return cmp.Compare(a.r, b.r) }

// sortNearlySorted sorts a by r: by insertion while that has moved at most
// 4 entries per element, then by slices.SortFunc.
func sortNearlySorted(a []radialResidual) {
	moves, budget := 0, 4*len(a)
	for i := 1; i < len(a); i++ {
		x := a[i]
		j := i
		for j > 0 && a[j-1].r > x.r {
			a[j] = a[j-1]
			j--
		}
		a[j] = x
		if moves += i - j; moves > budget {
			slices.SortFunc(a, compareRadial)
			return
		}
	}
}

// solve forms the weighted normal equations, equilibrates their columns,
// checks the condition and solves by Cholesky. It leaves the parameters in
// beta, the column scales 1/√N_kk in scale and the residuals in f.
func (w *fitWork) solve(g *TargetGroup, f *Fit, np int, beta, scale *[NumTerms]float64, checkCond bool) error {
	var nm [NumTerms][NumTerms]float64
	var rhs [NumTerms]float64
	for i, d := range g.loaded().d {
		wt := w.weights[i]
		if wt == 0 {
			continue
		}
		ax, ay := &w.ax[i], &w.ay[i]
		for a := 0; a < np; a++ {
			rhs[a] += wt * (ax[a]*d.X + ay[a]*d.Y)
			for b := a; b < np; b++ {
				nm[a][b] += wt * (ax[a]*ax[b] + ay[a]*ay[b])
			}
		}
	}
	for a := 0; a < np; a++ {
		if !(nm[a][a] > 0) {
			return &FitError{f.Panel, f.Layer, fmt.Errorf("%w: the targets do not determine %s", ErrIllConditioned, paramName(f.Model, a))}
		}
		scale[a] = 1 / math.Sqrt(nm[a][a])
	}
	for a := 0; a < np; a++ {
		w.rhs.SetVec(a, rhs[a]*scale[a])
		for b := a; b < np; b++ {
			w.nm.SetSym(a, b, nm[a][b]*scale[a]*scale[b])
		}
	}
	if !w.chol.Factorize(w.nm) {
		return &FitError{f.Panel, f.Layer, fmt.Errorf("%w: the normal matrix is singular (targets on one line, or too few of them)", ErrIllConditioned)}
	}
	if checkCond {
		if c := w.chol.Cond(); c > MaxCondition {
			return &FitError{f.Panel, f.Layer, fmt.Errorf("%w: condition number %.3g of the normal matrix (targets nearly on one line or bunched far from the datum)", ErrIllConditioned, c)}
		}
	}
	if err := w.chol.SolveVecTo(w.bt, w.rhs); err != nil {
		return &FitError{f.Panel, f.Layer, fmt.Errorf("%w: %v", ErrIllConditioned, err)}
	}
	*beta = [NumTerms]float64{}
	for a := 0; a < np; a++ {
		beta[a] = w.bt.AtVec(a) * scale[a]
	}
	for i, d := range g.loaded().d {
		m := fitted(&w.ax[i], &w.ay[i], beta, np)
		w.residuals[i] = panel.Vec{X: d.X - m.X, Y: d.Y - m.Y}
	}
	return nil
}

func paramName(m FitModel, a int) string {
	if m == Similarity && a == 3 {
		return "scale"
	}
	return TermKind(a).String()
}

// finish maps the parameters to terms and computes σ0, the standard errors
// and the residual statistics. w.chol still holds the last factorisation.
func (w *fitWork) finish(f *Fit, np int, beta *[NumTerms]float64) {
	var scale [NumTerms]float64
	var sw, swr float64
	for i, r := range w.residuals {
		wt := w.weights[i]
		sw += 2 * wt
		swr += wt * (r.X*r.X + r.Y*r.Y)
	}
	for a := 0; a < np; a++ {
		scale[a] = 1 / math.Sqrt(w.nmDiag(f, a))
	}
	f.DOF = 2*f.N - np
	// With weights the redundancy is counted in effective observations Σw.
	red := sw - float64(np)
	var se [NumTerms]float64
	if f.DOF > 0 && red > 0 {
		f.Sigma0 = math.Sqrt(swr / red)
		w.chol.InverseTo(&w.inv)
		for a := 0; a < np; a++ {
			se[a] = f.Sigma0 * math.Sqrt(w.inv.At(a, a)) * scale[a]
		}
	} else {
		for a := range se {
			se[a] = math.NaN()
		}
	}
	f.Terms = [NumTerms]float64{}
	f.StdErr = [NumTerms]float64{}
	switch f.Model {
	case Similarity:
		f.Terms = [NumTerms]float64{beta[0], beta[1], beta[2], beta[3], beta[3], 0}
		f.StdErr = [NumTerms]float64{se[0], se[1], se[2], se[3], se[3], 0}
	default:
		for a := 0; a < np; a++ {
			f.Terms[a], f.StdErr[a] = beta[a], se[a]
		}
	}
	f.beta = *beta
	var ss float64
	n := 0
	f.Max, f.MaxMeasured = 0, 0
	g := f.Group
	lo := panel.Vec{X: math.Inf(1), Y: math.Inf(1)}
	hi := panel.Vec{X: math.Inf(-1), Y: math.Inf(-1)}
	for i, r := range w.residuals {
		p := g.Pos(i)
		lo = panel.Vec{X: math.Min(lo.X, p.X), Y: math.Min(lo.Y, p.Y)}
		hi = panel.Vec{X: math.Max(hi.X, p.X), Y: math.Max(hi.Y, p.Y)}
		if f.Outlier(i) {
			continue
		}
		d := math.Hypot(r.X, r.Y)
		ss += d * d
		n++
		f.Max = math.Max(f.Max, d)
		dm := g.D(i)
		f.MaxMeasured = math.Max(f.MaxMeasured, math.Hypot(dm.X, dm.Y))
	}
	f.Extent = panel.Rect{Min: lo, Max: hi}
	if n > 0 {
		f.RMS = math.Sqrt(ss / float64(n))
	}
}

// nmDiag returns the weighted normal matrix's diagonal entry a.
func (w *fitWork) nmDiag(f *Fit, a int) float64 {
	var s float64
	for i := range w.residuals {
		s += w.weights[i] * (w.ax[i][a]*w.ax[i][a] + w.ay[i][a]*w.ay[i][a])
	}
	return s
}

// Lot is the spread of one layer's fitted terms over the panels of a lot.
type Lot struct {
	Layer  string
	Model  FitModel
	Panels int
	// Mean and SD are the mean and the sample standard deviation (n − 1) of
	// each term over the panels; SD is zero for a single panel. SD includes the
	// fits' own estimation error, so it slightly overstates the panel-to-panel
	// spread when the standard errors are not small beside it.
	Mean, SD [NumTerms]float64
}

// LotStats returns one Lot per layer, in order of first appearance.
func LotStats(fits []Fit) []Lot {
	var order []string
	by := map[string][]*Fit{}
	for i := range fits {
		l := fits[i].Layer
		if _, ok := by[l]; !ok {
			order = append(order, l)
		}
		by[l] = append(by[l], &fits[i])
	}
	lots := make([]Lot, 0, len(order))
	for _, l := range order {
		fs := by[l]
		lot := Lot{Layer: l, Model: fs[0].Model, Panels: len(fs)}
		for k := 0; k < NumTerms; k++ {
			var s float64
			for _, f := range fs {
				s += f.Terms[k]
			}
			mean := s / float64(len(fs))
			var v float64
			for _, f := range fs {
				v += (f.Terms[k] - mean) * (f.Terms[k] - mean)
			}
			lot.Mean[k] = mean
			if len(fs) > 1 {
				lot.SD[k] = math.Sqrt(v / float64(len(fs)-1))
			}
		}
		lots = append(lots, lot)
	}
	return lots
}

// MeasuredLayers returns the layers the lots measure, both of a relative
// pair ("L3-L4").
func MeasuredLayers(lots []Lot) map[string]bool {
	measured := map[string]bool{}
	for _, l := range lots {
		u, lo, rel := SplitLayer(l.Layer)
		measured[u] = true
		if rel {
			measured[lo] = true
		}
	}
	return measured
}

// Contributor returns the lot as a contributor naming its layer: normal terms
// with the lot means and standard deviations. A relative lot ("L3-L4") names
// its first layer only, so that it moves the pair by the measured amount.
func (l *Lot) Contributor(name string) Contributor {
	upper, _, _ := SplitLayer(l.Layer)
	c := Contributor{Name: name, Layers: []string{upper}}
	for k := 0; k < NumTerms; k++ {
		if !l.Model.Estimates(TermKind(k)) {
			continue
		}
		t := Term{Mean: l.Mean[k], Spread: l.SD[k]}
		if t.Spread > 0 {
			t.Dist = Normal
		}
		c.Terms[k] = t
	}
	return c
}

// PooledResiduals returns the mean residual field of a layer over all its
// panels on a regular nx × ny grid spanning its targets: each node holds the
// Gaussian-weighted mean (σ = 0.35 node spacings along each
// axis, so that a target one spacing away weighs 1.7 % of one at the node) of the residuals of the
// targets not reported as outliers. It returns nil when the layer has no
// targets. The grid is what the affine model leaves unexplained and is ready
// for a contributor's residual.
//
// The grid is accumulated target by target into every node's sums, in the
// order of the fits and of their targets, each fit's group loaded in turn,
// so it needs memory for the nodes and one group, not a copy of every
// residual. The error is that of a group that could not be loaded.
func PooledResiduals(fits []Fit, layer string, nx, ny int) (*Grid, error) {
	lo := panel.Vec{X: math.Inf(1), Y: math.Inf(1)}
	hi := panel.Vec{X: math.Inf(-1), Y: math.Inf(-1)}
	n := 0
	for i := range fits {
		f := &fits[i]
		if f.Layer != layer || f.Len() == 0 {
			continue
		}
		if err := f.Group.Load(); err != nil {
			return nil, err
		}
		for j := range f.Len() {
			if f.Outlier(j) {
				continue
			}
			p := f.Group.Pos(j)
			lo = panel.Vec{X: math.Min(lo.X, p.X), Y: math.Min(lo.Y, p.Y)}
			hi = panel.Vec{X: math.Max(hi.X, p.X), Y: math.Max(hi.Y, p.Y)}
			n++
		}
		f.Group.Release()
	}
	if n == 0 {
		return nil, nil
	}
	nx, ny = max(nx, 2), max(ny, 2)
	if hi.X == lo.X {
		nx = 1
	}
	if hi.Y == lo.Y {
		ny = 1
	}
	g := &Grid{X: make([]float64, nx), Y: make([]float64, ny), DX: make([][]float64, ny), DY: make([][]float64, ny)}
	step := func(n int, a, b float64) float64 {
		if n == 1 {
			return 0
		}
		return (b - a) / float64(n-1)
	}
	sx, sy := step(nx, lo.X, hi.X), step(ny, lo.Y, hi.Y)
	hx, hy := 0.35*sx, 0.35*sy
	if hx == 0 {
		hx = 1
	}
	if hy == 0 {
		hy = 1
	}
	for i := range g.X {
		g.X[i] = lo.X + float64(i)*sx
	}
	for j := range g.Y {
		g.Y[j] = lo.Y + float64(j)*sy
	}
	sw := make([]float64, nx*ny)
	dx := make([]float64, nx*ny)
	dy := make([]float64, nx*ny)
	for fi := range fits {
		f := &fits[fi]
		if f.Layer != layer || f.Len() == 0 {
			continue
		}
		if err := f.Group.Load(); err != nil {
			return nil, err
		}
		for t := range f.Len() {
			if f.Outlier(t) {
				continue
			}
			p, r := f.Group.Pos(t), f.Residual(t)
			for j, y := range g.Y {
				for i, x := range g.X {
					ex, ey := (p.X-x)/hx, (p.Y-y)/hy
					k := math.Exp(-0.5 * (ex*ex + ey*ey))
					sw[j*nx+i] += k
					dx[j*nx+i] += k * r.X
					dy[j*nx+i] += k * r.Y
				}
			}
		}
		f.Group.Release()
	}
	for j := range g.Y {
		g.DX[j], g.DY[j] = make([]float64, nx), make([]float64, nx)
		for i := range g.X {
			if q := j*nx + i; sw[q] > 1e-12 {
				g.DX[j][i], g.DY[j][i] = dx[q]/sw[q], dy[q]/sw[q]
			}
		}
	}
	return g, nil
}
