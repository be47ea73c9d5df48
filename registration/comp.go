package registration

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize/convex/lp"

	"github.com/regdrift/regdrift/panel"
)

// Objective chooses what a compensation minimises.
type Objective int

const (
	// Worst minimises the largest |broadside offset| over all sites, a linear
	// programme solved by the simplex method (gonum optimize/convex/lp).
	Worst Objective = iota
	// RMS minimises the root mean square broadside offset, a linear least-
	// squares problem.
	RMS
)

// ParseObjective reads "worst" or "rms".
func ParseObjective(s string) (Objective, error) {
	switch s {
	case "worst":
		return Worst, nil
	case "rms":
		return RMS, nil
	}
	return 0, fmt.Errorf("unknown objective %q (want worst or rms)", s)
}

func (o Objective) String() string { return [...]string{"worst", "rms"}[o] }

// CompSite is a coupler site for compensation: where it is, the direction of
// its coupled lines and the layers of its two traces.
type CompSite struct {
	Pos, U       panel.Vec
	Upper, Lower string
}

// CompSettings configures Compensate. The zero value minimises the worst
// offset with artwork scales within ±1000 ppm, continuous, and no drill budget.
type CompSettings struct {
	Objective Objective
	// DrillBudget, when positive, keeps each compensated layer's mean
	// registration to the drilled holes within ±DrillBudget per axis at every
	// site (m), and then chooses the common part of the compensation to make
	// that registration as good as possible.
	DrillBudget float64
	// Max bounds each artwork scale, |factor − 1| ≤ Max; zero means 1000 ppm.
	Max float64
	// Step is the increment the imaging equipment accepts (strain); zero means
	// continuous. Rounded values are chosen among the neighbours of the
	// optimum by the same objective.
	Step float64
}

// AxisComp is the recommended compensation of one layer along one axis.
type AxisComp struct {
	// Scale is the artwork scale change, Factor − 1 (strain): +180e-6 means
	// the artwork is made 180 ppm larger.
	Scale, Factor float64
	// Net is the resulting change of the layer's scale term: the artwork
	// factor f acts before the material moves by its mean scale s, so the
	// layer ends at (1+s)·f − 1 and Net = (f − 1)(1 + s). Compensating s fully
	// takes f = 1/(1+s) [calculated here: (1+s)·f = 1].
	Net float64
	// Free is set when this axis moves no broadside offset at any site (no
	// coupled lines run across it), so that its value comes from the drill
	// budget or is the smallest compensation.
	Free bool
}

// LayerComp is the recommended compensation of one trace layer.
type LayerComp struct {
	Layer string
	// MeanScale is the layer's mean scale term in the model (x, y) before
	// compensation.
	MeanScale [2]float64
	X, Y      AxisComp
}

// PairDiff is the compensation difference across one trace pair, the only
// part of the compensation that moves its broadside offsets.
type PairDiff struct {
	Upper, Lower string
	Net          [2]float64 // Net(upper) − Net(lower), x and y
}

// CompResult is a recommended compensation and what it does.
type CompResult struct {
	Objective Objective
	Layers    []LayerComp
	Pairs     []PairDiff
	// Before and After are the mean across offsets at each site (design
	// offset excluded), m, without and with the compensation.
	Before, After []float64
	// WorstBefore, WorstAfter, RMSBefore and RMSAfter summarise them.
	WorstBefore, WorstAfter, RMSBefore, RMSAfter float64
	// DrillBefore and DrillAfter are the largest mean registration of a trace
	// layer to the drilled holes over the sites, per axis, m.
	DrillBefore, DrillAfter float64
	// Free is the number of degrees of freedom of the compensation that move
	// no offset (the common part), and Common says how they were chosen.
	Free   int
	Common string
	// Notes explain the result for the output.
	Notes []string
}

// Contributors returns the compensation as one fixed contributor per layer
// (scale_x and scale_y = Net), to be added to a model.
func (r *CompResult) Contributors() []Contributor {
	var cs []Contributor
	for _, l := range r.Layers {
		c := Contributor{Name: "artwork compensation " + l.Layer, Layers: []string{l.Layer}}
		c.Terms[ScaleX] = Term{Mean: l.X.Net}
		c.Terms[ScaleY] = Term{Mean: l.Y.Net}
		cs = append(cs, c)
	}
	return cs
}

// ErrInfeasible is returned when the bounds and the drill budget leave no
// compensation.
var ErrInfeasible = errors.New("no compensation meets the bounds and the drill budget")

// Internal units of the optimisation: offsets in µm and scales in ppm, so
// that the coefficient of a scale in an offset is the lever arm in metres and
// every number the simplex method sees is of order 1 to 1000.
const (
	toUM  = 1e6
	toPPM = 1e6
)

// linRows is a set of linear forms b_i + a_i·x; caps, when set, bound their
// magnitudes one by one.
type linRows struct {
	a    [][]float64
	b    []float64
	caps []float64
}

func (r *linRows) add(a []float64, b, cap float64) {
	r.a = append(r.a, a)
	r.b = append(r.b, b)
	if r.caps != nil || cap != 0 {
		for len(r.caps) < len(r.b)-1 {
			r.caps = append(r.caps, 0)
		}
		r.caps = append(r.caps, cap)
	}
}

func (r *linRows) value(i int, x []float64) float64 {
	v := r.b[i]
	for j, a := range r.a[i] {
		v += a * x[j]
	}
	return v
}

// Compensate recommends per-layer artwork scale compensation in x and y for
// the trace layers of sites, from the model's mean displacements.
//
// Only the difference of two layers' compensation projected across the lines
// moves a broadside offset, so the offsets fix the differences and leave a
// common part free. Compensate first minimises the objective, then chooses
// the common part: with a drill budget it minimises the largest registration
// of the trace layers to the drilled holes (a second linear programme), else
// it takes the smallest compensation (least sum of squares).
func Compensate(m *Model, sites []CompSite, set *CompSettings) (*CompResult, error) {
	if set == nil {
		set = &CompSettings{}
	}
	maxScale := set.Max
	if maxScale <= 0 {
		maxScale = 1000e-6
	}
	// Layers in order of appearance, two variables each (x, y).
	var layers []string
	li := map[string]int{}
	addLayer := func(l string) {
		if _, ok := li[l]; !ok {
			li[l] = len(layers)
			layers = append(layers, l)
		}
	}
	for _, s := range sites {
		if s.Upper != s.Lower {
			addLayer(s.Upper)
			addLayer(s.Lower)
		}
	}
	if len(layers) == 0 {
		return nil, errors.New("no coupler site has its traces on two different layers: compensation cannot move any offset")
	}
	nv := 2 * len(layers)
	// The layers' mean scale terms and bounds on the net change.
	res := &CompResult{Objective: set.Objective}
	meanScale := make([]float64, nv)
	for l, name := range layers {
		for i := range m.Contributors {
			c := &m.Contributors[i]
			if c.Names(name) {
				meanScale[2*l] += c.Terms[ScaleX].Mean
				meanScale[2*l+1] += c.Terms[ScaleY].Mean
			}
		}
	}
	var bounds linRows
	for j := 0; j < nv; j++ {
		a := make([]float64, nv)
		a[j] = 1
		bounds.add(a, 0, maxScale*(1+meanScale[j])*toPPM)
	}
	// Offset rows: e_i = m_i + Σ coef·x (µm, x in ppm).
	type pairKey struct{ u, l string }
	rels := map[pairKey]*Relative{}
	var off linRows
	res.Before = make([]float64, len(sites))
	offIndex := make([]int, len(sites)) // row of each site, or −1
	for i, s := range sites {
		offIndex[i] = -1
		if s.Upper == s.Lower {
			continue
		}
		k := pairKey{s.Upper, s.Lower}
		rel := rels[k]
		if rel == nil {
			rel = m.Relative(s.Upper, s.Lower)
			rels[k] = rel
		}
		row := rel.Row(s.Pos, s.U)
		st := rel.Stats(row)
		res.Before[i] = st.MeanAcross
		a := make([]float64, nv)
		u, l := li[s.Upper], li[s.Lower]
		// Net scale change c moves the layer by c ⊙ r; across the lines that is
		// row.Across[ScaleX]·cx + row.Across[ScaleY]·cy (µm per ppm = m).
		a[2*u] += row.Across[ScaleX]
		a[2*u+1] += row.Across[ScaleY]
		a[2*l] -= row.Across[ScaleX]
		a[2*l+1] -= row.Across[ScaleY]
		offIndex[i] = len(off.b)
		off.add(a, st.MeanAcross*toUM, 0)
	}
	// Drill rows: each trace layer's mean displacement per axis at each site.
	var drill linRows
	for l, name := range layers {
		for _, s := range sites {
			if s.Upper != name && s.Lower != name {
				continue
			}
			d := m.MeanDisplacement(name, s.Pos)
			r := s.Pos.Sub(m.Datum)
			ax := make([]float64, nv)
			ax[2*l] = r.X
			ay := make([]float64, nv)
			ay[2*l+1] = r.Y
			drill.add(ax, d.X*toUM, 0)
			drill.add(ay, d.Y*toUM, 0)
		}
	}
	budget := set.DrillBudget * toUM
	if budget > 0 {
		drill.caps = make([]float64, len(drill.b))
		for i := range drill.caps {
			drill.caps[i] = budget
		}
	}

	// Null space of the offset rows: the common part.
	ata := mat.NewSymDense(nv, nil)
	atb := make([]float64, nv)
	for i := range off.b {
		for a := 0; a < nv; a++ {
			atb[a] += off.a[i][a] * off.b[i]
			for b := a; b < nv; b++ {
				ata.SetSym(a, b, ata.At(a, b)+off.a[i][a]*off.a[i][b])
			}
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(ata, true) {
		return nil, errors.New("compensation: eigen-decomposition failed")
	}
	vals := eig.Values(nil)
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	lmax := slices.Max(vals)
	var null [][]float64
	x := make([]float64, nv)
	for k, lam := range vals {
		v := mat.Col(nil, k, &vecs)
		if lam <= 1e-10*lmax || lmax == 0 {
			null = append(null, v)
			continue
		}
		if set.Objective == RMS {
			// Minimum-norm least squares: x = −Σ v_k (v_kᵀ Aᵀb)/λ_k.
			var g float64
			for j := range v {
				g += v[j] * atb[j]
			}
			for j := range v {
				x[j] -= v[j] * g / lam
			}
		}
	}
	res.Free = len(null)
	var caps linRows
	caps.a, caps.b, caps.caps = append(caps.a, bounds.a...), append(caps.b, bounds.b...), append(caps.caps, bounds.caps...)
	if budget > 0 {
		caps.a, caps.b, caps.caps = append(caps.a, drill.a...), append(caps.b, drill.b...), append(caps.caps, drill.caps...)
	}
	switch set.Objective {
	case Worst:
		var err error
		x, _, err = minimax(nv, &off, &caps, 0, bounds.caps)
		if err != nil {
			return nil, err
		}
	case RMS:
		if v, ok := violated(&caps, x); ok {
			// The least-squares optimum may still fit once the common part moves.
			if len(null) == 0 {
				return nil, fmt.Errorf("%w: the rms optimum breaks %s; try --objective worst or a larger bound", ErrInfeasible, v)
			}
		}
	}
	// The common part.
	if len(null) > 0 {
		nn := len(null)
		// x = x1 + N z: rows in z of any linear form b + a·x.
		inZ := func(src *linRows) *linRows {
			out := &linRows{}
			for i := range src.b {
				az := make([]float64, nn)
				for k := range null {
					for j := range null[k] {
						az[k] += src.a[i][j] * null[k][j]
					}
				}
				var c float64
				if src.caps != nil {
					c = src.caps[i]
				}
				out.add(az, src.value(i, x), c)
			}
			return out
		}
		if budget > 0 {
			// First choice: centre every trace layer on the drilled holes in
			// the least-squares sense (for a layer whose own movement is a
			// pure scale this cancels it exactly). If that breaks the budget
			// or a bound, minimise the worst registration instead.
			zd := inZ(&drill)
			apply := func(z []float64) []float64 {
				y := slices.Clone(x)
				for k := range null {
					for j := range y {
						y[j] += null[k][j] * z[k]
					}
				}
				return y
			}
			res.Common = "the drill budget: the common part centres the trace layers on the drilled holes (least squares over the sites), within the budget"
			z, ok := leastSquares(zd, nn)
			if y := apply(z); ok {
				if _, bad := violated(&caps, y); !bad {
					x = y
				} else {
					ok = false
				}
			}
			if !ok {
				res.Common = "the drill budget: the common part minimises the worst registration of the trace layers to the drilled holes"
				// The null vectors are orthonormal, so |z| ≤ |x1| + |bounds|.
				var reach float64
				for j := range x {
					reach += x[j]*x[j] + bounds.caps[j]*bounds.caps[j]
				}
				zbox := make([]float64, nn)
				for k := range zbox {
					zbox[k] = 2 * math.Sqrt(reach)
				}
				z, _, err := minimax(nn, zd, inZ(&bounds), budget, zbox)
				if err != nil {
					return nil, err
				}
				x = apply(z)
			}
		} else {
			res.Common = "the smallest compensation: the common part minimises the sum of squares of the layers' scale changes"
			y := slices.Clone(x)
			for k := range null {
				var p float64
				for j := range y {
					p += null[k][j] * y[j]
				}
				for j := range y {
					y[j] -= p * null[k][j]
				}
			}
			if _, bad := violated(&bounds, y); !bad {
				x = y
			} else if set.Objective == RMS {
				if v, bad := violated(&bounds, x); bad {
					return nil, fmt.Errorf("%w: the rms optimum breaks %s", ErrInfeasible, v)
				}
			}
		}
	}
	if set.Objective == RMS && budget > 0 {
		if v, bad := violated(&caps, x); bad {
			return nil, fmt.Errorf("%w: at the rms optimum the common part cannot meet %s; try --objective worst", ErrInfeasible, v)
		}
	}
	// Artwork values, rounded to the step.
	art := make([]float64, nv)
	for j := range x {
		art[j] = x[j] / (1 + meanScale[j])
	}
	roundedOK := true
	if set.Step > 0 {
		art, roundedOK = roundToStep(art, set.Step*toPPM, maxScale*toPPM, func(a []float64) (float64, float64, bool) {
			xx := make([]float64, nv)
			for j := range a {
				xx[j] = a[j] * (1 + meanScale[j])
			}
			if budget > 0 {
				if _, bad := violated(&drill, xx); bad {
					return 0, 0, false
				}
			}
			obj := objective(set.Objective, &off, xx)
			var second float64
			if budget > 0 {
				second = worstAbs(&drill, xx)
			} else {
				for _, v := range a {
					second += v * v
				}
			}
			return obj, second, true
		})
		for j := range x {
			x[j] = art[j] * (1 + meanScale[j])
		}
	}
	// Results.
	var ax [2]bool
	for j := 0; j < nv; j++ {
		free := true
		for i := range off.b {
			if off.a[i][j] != 0 {
				free = false
				break
			}
		}
		if j%2 == 0 {
			ax[0] = ax[0] || !free
		} else {
			ax[1] = ax[1] || !free
		}
		l := j / 2
		if j%2 == 0 {
			res.Layers = append(res.Layers, LayerComp{Layer: layers[l], MeanScale: [2]float64{meanScale[j], meanScale[j+1]}})
		}
		a := AxisComp{Scale: art[j] / toPPM, Factor: 1 + art[j]/toPPM, Net: x[j] / toPPM, Free: free}
		if j%2 == 0 {
			res.Layers[l].X = a
		} else {
			res.Layers[l].Y = a
		}
	}
	seen := map[pairKey]bool{}
	for _, s := range sites {
		k := pairKey{s.Upper, s.Lower}
		if s.Upper == s.Lower || seen[k] {
			continue
		}
		seen[k] = true
		u, l := li[s.Upper], li[s.Lower]
		res.Pairs = append(res.Pairs, PairDiff{s.Upper, s.Lower, [2]float64{(x[2*u] - x[2*l]) / toPPM, (x[2*u+1] - x[2*l+1]) / toPPM}})
	}
	res.After = make([]float64, len(sites))
	for i := range sites {
		if r := offIndex[i]; r >= 0 {
			res.After[i] = off.value(r, x) / toUM
		}
	}
	res.WorstBefore, res.RMSBefore = stats(res.Before)
	res.WorstAfter, res.RMSAfter = stats(res.After)
	res.DrillBefore = worstAbs(&drill, make([]float64, nv)) / toUM
	res.DrillAfter = worstAbs(&drill, x) / toUM
	res.Notes = append(res.Notes, "only the difference of two layers' scale compensation across the coupled lines moves a broadside offset")
	if !roundedOK {
		res.Notes = append(res.Notes, "no rounding of the compensation to the step keeps every layer within the drill budget; the nearest multiples are shown")
	}
	var freeAxes []string
	for a, name := range []string{"X", "Y"} {
		if !ax[a] {
			freeAxes = append(freeAxes, name)
		}
	}
	if len(freeAxes) > 0 {
		res.Notes = append(res.Notes, fmt.Sprintf("no site's offset has a %s component (every coupled line runs along %s): %s compensation moves no offset and is set by %s",
			strings.Join(freeAxes, " or "), strings.Join(freeAxes, " or "), strings.Join(freeAxes, " and "), commonRule(budget > 0)))
	}
	if res.Free > 0 {
		res.Notes = append(res.Notes, fmt.Sprintf("%d of the %d values are free (the common part) and were set by %s", res.Free, nv, commonRule(budget > 0)))
	}
	return res, nil
}

// leastSquares returns the z minimising Σ (b_i + a_i·z)², by Cholesky on
// the normal equations (n is at most the number of layers times two); ok is
// false when they are singular.
func leastSquares(r *linRows, n int) ([]float64, bool) {
	nm := mat.NewSymDense(n, nil)
	rhs := mat.NewVecDense(n, nil)
	for i := range r.b {
		for a := 0; a < n; a++ {
			rhs.SetVec(a, rhs.AtVec(a)-r.a[i][a]*r.b[i])
			for b := a; b < n; b++ {
				nm.SetSym(a, b, nm.At(a, b)+r.a[i][a]*r.a[i][b])
			}
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(nm) || ch.Cond() > 1e12 {
		return make([]float64, n), false
	}
	var z mat.VecDense
	if err := ch.SolveVecTo(&z, rhs); err != nil {
		return make([]float64, n), false
	}
	return mat.Col(nil, 0, &z), true
}

func commonRule(budget bool) string {
	if budget {
		return "the drill budget (best registration to the drilled holes)"
	}
	return "the smallest compensation"
}

func stats(e []float64) (worst, rms float64) {
	if len(e) == 0 {
		return 0, 0
	}
	var ss float64
	for _, v := range e {
		worst = math.Max(worst, math.Abs(v))
		ss += v * v
	}
	return worst, math.Sqrt(ss / float64(len(e)))
}

func objective(o Objective, r *linRows, x []float64) float64 {
	if o == Worst {
		return worstAbs(r, x)
	}
	var ss float64
	for i := range r.b {
		v := r.value(i, x)
		ss += v * v
	}
	return math.Sqrt(ss / math.Max(1, float64(len(r.b))))
}

func worstAbs(r *linRows, x []float64) float64 {
	var w float64
	for i := range r.b {
		w = math.Max(w, math.Abs(r.value(i, x)))
	}
	return w
}

// violated reports the first capped row that x breaks beyond rounding.
func violated(r *linRows, x []float64) (string, bool) {
	for i := range r.b {
		if v := r.value(i, x); math.Abs(v) > r.caps[i]*(1+1e-9)+1e-9 {
			return fmt.Sprintf("a limit of %.4g (at %.4g)", r.caps[i], v), true
		}
	}
	return "", false
}

// minimax minimises t subject to |obj_i(x)| ≤ t for every objective row and
// |caps_k(x)| ≤ cap_k for every capped row, and t ≤ tmax when tmax > 0, by
// the simplex method on a growing subset of the rows (constraint generation):
// solve with the rows most likely to bind, add the rows the solution breaks,
// and repeat until it breaks none. The optimum of a problem with thousands of
// sites is fixed by a handful of them, so the linear programmes stay small.
func minimax(nv int, obj, caps *linRows, tmax float64, box []float64) ([]float64, float64, error) {
	active := map[[2]int]bool{} // {0 = objective / 1 = capped, row}
	addExtremes := func(set int, r *linRows) {
		n := len(r.b)
		if n == 0 {
			return
		}
		if n <= 4*nv+8 {
			for i := 0; i < n; i++ {
				active[[2]int{set, i}] = true
			}
			return
		}
		idx := make([]int, n)
		for i := range idx {
			idx[i] = i
		}
		sort.Slice(idx, func(a, b int) bool { return math.Abs(r.b[idx[a]]) > math.Abs(r.b[idx[b]]) })
		for _, i := range idx[:4] {
			active[[2]int{set, i}] = true
		}
		for j := 0; j < nv; j++ {
			lo, hi := 0, 0
			for i := 1; i < n; i++ {
				if r.a[i][j] < r.a[lo][j] {
					lo = i
				}
				if r.a[i][j] > r.a[hi][j] {
					hi = i
				}
			}
			active[[2]int{set, lo}], active[[2]int{set, hi}] = true, true
		}
	}
	addExtremes(0, obj)
	addExtremes(1, caps)
	scale := 1.0
	for _, b := range obj.b {
		scale = math.Max(scale, math.Abs(b))
	}
	tol := 1e-9 * scale
	for iter := 0; iter < 200; iter++ {
		keys := make([][2]int, 0, len(active))
		for k := range active {
			keys = append(keys, k)
		}
		sort.Slice(keys, func(a, b int) bool {
			if keys[a][0] != keys[b][0] {
				return keys[a][0] < keys[b][0]
			}
			return keys[a][1] < keys[b][1]
		})
		x, t, err := solveLP(nv, obj, caps, keys, tmax, box)
		if err != nil {
			return nil, 0, err
		}
		// Find the rows the solution breaks, worst first.
		type viol struct {
			k [2]int
			v float64
		}
		var vs []viol
		for i := range obj.b {
			if v := math.Abs(obj.value(i, x)) - t; v > tol && !active[[2]int{0, i}] {
				vs = append(vs, viol{[2]int{0, i}, v})
			}
		}
		for i := range caps.b {
			if v := math.Abs(caps.value(i, x)) - caps.caps[i]; v > tol && !active[[2]int{1, i}] {
				vs = append(vs, viol{[2]int{1, i}, v})
			}
		}
		if len(vs) == 0 {
			return x, t, nil
		}
		sort.Slice(vs, func(a, b int) bool { return vs[a].v > vs[b].v })
		for _, v := range vs[:min(len(vs), 2*nv+4)] {
			active[v.k] = true
		}
	}
	return nil, 0, errors.New("compensation: the linear programme did not settle in 200 rounds")
}

// solveLP solves the linear programme over the active rows in standard form
// for gonum's simplex method. The free variables are shifted by their bounds,
// x = y − box with y ≥ 0, rather than split into positive and negative parts:
// the split doubles the columns and makes every vertex degenerate, on which
// the simplex method cycled in our tests. Each |row| ≤ bound becomes two
// inequalities with a slack each; y ≤ 2·box and t ≤ tmax close the box.
func solveLP(nv int, obj, caps *linRows, keys [][2]int, tmax float64, box []float64) ([]float64, float64, error) {
	n := nv + 1 // y, t
	var g []float64
	var h []float64
	row := func(a []float64, tc, rhs float64) {
		r := make([]float64, n)
		copy(r, a)
		r[nv] = tc
		// a·x = a·y − a·box.
		for j := 0; j < nv; j++ {
			rhs += a[j] * box[j]
		}
		g = append(g, r...)
		h = append(h, rhs)
	}
	neg := func(a []float64) []float64 {
		out := make([]float64, len(a))
		for i, v := range a {
			out[i] = -v
		}
		return out
	}
	for _, k := range keys {
		if k[0] == 0 {
			a, b := obj.a[k[1]], obj.b[k[1]]
			row(a, -1, -b)
			row(neg(a), -1, b)
		} else {
			a, b, c := caps.a[k[1]], caps.b[k[1]], caps.caps[k[1]]
			row(a, 0, c-b)
			row(neg(a), 0, c+b)
		}
	}
	for j := 0; j < nv; j++ {
		a := make([]float64, nv)
		a[j] = 1
		row(a, 0, box[j]) // x_j ≤ box_j, i.e. y_j ≤ 2·box_j
	}
	tm := tmax
	if !(tm > 0) {
		// t never needs to exceed the worst row at x = 0 plus the box's reach.
		tm = 1
		for _, k := range keys {
			r := obj
			if k[0] == 1 {
				continue
			}
			v := math.Abs(r.b[k[1]])
			for j := 0; j < nv; j++ {
				v += math.Abs(r.a[k[1]][j]) * box[j]
			}
			tm = math.Max(tm, 2*v)
		}
	}
	row(make([]float64, nv), 1, tm)
	// A deterministic perturbation of the right-hand sides, far below any
	// length that matters (1e-9 of each, in µm or ppm), breaks the ties of
	// degenerate vertices (Charnes 1952, Econometrica 20, 160–170).
	for i := range h {
		frac := math.Mod(float64(i+1)*0.6180339887498949, 1)
		h[i] += 1e-9 * (1 + math.Abs(h[i])) * frac
	}
	m := len(h)
	// Standard form [G I][y t s]ᵀ = h, all ≥ 0.
	as := mat.NewDense(m, n+m, nil)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			as.Set(i, j, g[i*n+j])
		}
		as.Set(i, n+i, 1)
	}
	cs := make([]float64, n+m)
	cs[nv] = 1
	// The tolerance is on the reduced costs (the objective is t in µm):
	// with 0 the method can wander forever among vertices whose reduced costs
	// differ from zero by rounding only.
	_, xs, err := lp.Simplex(cs, as, h, 1e-10, nil)
	if err != nil {
		if errors.Is(err, lp.ErrInfeasible) {
			return nil, 0, ErrInfeasible
		}
		return nil, 0, fmt.Errorf("compensation: %w", err)
	}
	x := make([]float64, nv)
	for j := range x {
		x[j] = xs[j] - box[j]
	}
	return x, xs[nv], nil
}

// roundToStep rounds the artwork values a (ppm) to multiples of step within
// ±max. With up to 8 values it tries every combination of the neighbouring
// multiples and keeps the feasible one with the smallest objective, ties
// broken by the second criterion; beyond that it rounds to the nearest. ok is
// false when no candidate tried is feasible (the nearest is returned).
func roundToStep(a []float64, step, max float64, eval func([]float64) (obj, second float64, ok bool)) ([]float64, bool) {
	n := len(a)
	near := make([]float64, n)
	for j, v := range a {
		near[j] = math.Max(-max, math.Min(max, step*math.Round(v/step)))
	}
	bo, bs, bok := eval(near)
	if n > 8 {
		return near, bok
	}
	best := near
	cand := make([]float64, n)
	for mask := 0; mask < 1<<n; mask++ {
		for j, v := range a {
			f := step * math.Floor(v/step)
			if mask>>j&1 == 1 {
				f += step
			}
			if math.Abs(f) > max*(1+1e-12) {
				f = near[j]
			}
			cand[j] = f
		}
		o, s, ok := eval(cand)
		if !ok {
			continue
		}
		if !bok || o < bo*(1-1e-9) || (o <= bo*(1+1e-9) && s < bs) {
			best, bo, bs, bok = slices.Clone(cand), o, s, true
		}
	}
	return best, bok
}
