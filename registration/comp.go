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

// add appends the form b + a·x with cap (0: none); caps is filled with
// zeros for the earlier rows once any row has a cap.
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

// value returns row i at x, b_i + a_i·x.
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
//
// The steps, one function each: the linear forms of the problem
// ([newCompProblem]), the common part's directions and the rms optimum
// ([compProblem.nullSpace]), the objective over the differences
// ([compProblem.optimise]), the common part ([compProblem.chooseCommon]),
// rounding to the equipment's step ([compProblem.roundArtwork]) and the
// summary ([compProblem.result]).
func Compensate(m *Model, sites []CompSite, set *CompSettings) (*CompResult, error) {
	if set == nil {
		set = &CompSettings{}
	}
	p, err := newCompProblem(m, sites, set)
	if err != nil {
		return nil, err
	}
	null, x, err := p.nullSpace()
	if err != nil {
		return nil, err
	}
	if x, err = p.optimise(x, len(null) > 0); err != nil {
		return nil, err
	}
	x, common, err := p.chooseCommon(x, null)
	if err != nil {
		return nil, err
	}
	art, roundedOK := p.roundArtwork(x)
	return p.result(x, art, roundedOK, len(null), common), nil
}

// layerPair names the upper and lower trace layers of a site.
type layerPair struct{ u, l string }

// compProblem is the linear problem of one compensation in the internal
// units (offsets in µm, scales in ppm). Its variables are the net scale
// changes of the trace layers, two per layer: x then y, in the order of
// layers.
type compProblem struct {
	m        *Model
	sites    []CompSite
	set      *CompSettings
	maxScale float64 // bound on |factor − 1|, strain
	budget   float64 // drill budget, µm; 0 means none
	// slackBudget is a drill budget that no allowed compensation can reach,
	// µm, dropped as if none had been given; 0 otherwise.
	slackBudget float64

	layers    []string       // trace layers in order of appearance
	li        map[string]int // index of each layer in layers
	nv        int            // number of variables, 2·len(layers)
	meanScale []float64      // each variable's mean scale term in the model, strain

	bounds   linRows   // |x_j| ≤ maxScale·(1 + meanScale_j), the artwork bound in net terms
	off      linRows   // the mean offset across the lines at each two-layer site, µm
	offIndex []int     // the row of off of each site, or −1
	before   []float64 // the mean offset at each site without compensation, m
	drill    linRows   // each trace layer's mean registration per axis at its sites, capped by the budget
	caps     linRows   // the rows every solution must keep: bounds, and drill when there is a budget
}

// newCompProblem collects the trace layers of sites (those of sites with two
// different layers, in order of appearance) and builds the problem's linear
// forms: the bounds, the offset rows and the drill rows.
func newCompProblem(m *Model, sites []CompSite, set *CompSettings) (*compProblem, error) {
	p := &compProblem{m: m, sites: sites, set: set, maxScale: set.Max, budget: set.DrillBudget * toUM, li: map[string]int{}}
	if p.maxScale <= 0 {
		p.maxScale = 1000e-6
	}
	for _, s := range sites {
		if s.Upper != s.Lower {
			p.addLayer(s.Upper)
			p.addLayer(s.Lower)
		}
	}
	if len(p.layers) == 0 {
		return nil, errors.New("no coupler site has its traces on two different layers: compensation cannot move any offset")
	}
	p.nv = 2 * len(p.layers)
	p.meanScales()
	for j := 0; j < p.nv; j++ {
		a := make([]float64, p.nv)
		a[j] = 1
		p.bounds.add(a, 0, p.maxScale*(1+p.meanScale[j])*toPPM)
	}
	p.offsetRows()
	p.drillRows()
	p.dropSlackBudget()
	p.caps.a, p.caps.b, p.caps.caps = append(p.caps.a, p.bounds.a...), append(p.caps.b, p.bounds.b...), append(p.caps.caps, p.bounds.caps...)
	if p.budget > 0 {
		p.caps.a, p.caps.b, p.caps.caps = append(p.caps.a, p.drill.a...), append(p.caps.b, p.drill.b...), append(p.caps.caps, p.drill.caps...)
	}
	return p, nil
}

// addLayer appends trace layer l to the problem's layers unless it is
// there already.
func (p *compProblem) addLayer(l string) {
	if _, ok := p.li[l]; !ok {
		p.li[l] = len(p.layers)
		p.layers = append(p.layers, l)
	}
}

// meanScales sums the mean scale terms of every contributor that moves each
// trace layer.
func (p *compProblem) meanScales() {
	p.meanScale = make([]float64, p.nv)
	for l, name := range p.layers {
		for i := range p.m.Contributors {
			c := &p.m.Contributors[i]
			w := c.Weight(name)
			p.meanScale[2*l] += w * c.Terms[ScaleX].Mean
			p.meanScale[2*l+1] += w * c.Terms[ScaleY].Mean
		}
	}
}

// offsetRows builds one row per two-layer site, e_i = m_i + Σ coef·x (µm,
// x in ppm), and records the offsets before compensation.
func (p *compProblem) offsetRows() {
	rels := map[layerPair]*Relative{}
	p.before = make([]float64, len(p.sites))
	p.offIndex = make([]int, len(p.sites))
	for i, s := range p.sites {
		p.offIndex[i] = -1
		if s.Upper == s.Lower {
			continue
		}
		k := layerPair{s.Upper, s.Lower}
		rel := rels[k]
		if rel == nil {
			rel = p.m.Relative(s.Upper, s.Lower)
			rels[k] = rel
		}
		row := rel.Row(s.Pos, s.U)
		st := rel.Stats(row)
		p.before[i] = st.MeanAcross
		a := make([]float64, p.nv)
		u, l := p.li[s.Upper], p.li[s.Lower]
		// Net scale change c moves the layer by c ⊙ r; across the lines that is
		// row.Across[ScaleX]·cx + row.Across[ScaleY]·cy (µm per ppm = m).
		a[2*u] += row.Across[ScaleX]
		a[2*u+1] += row.Across[ScaleY]
		a[2*l] -= row.Across[ScaleX]
		a[2*l+1] -= row.Across[ScaleY]
		p.offIndex[i] = len(p.off.b)
		p.off.add(a, st.MeanAcross*toUM, 0)
	}
}

// drillRows builds each trace layer's mean displacement per axis at each of
// its sites, capped by the drill budget when there is one.
func (p *compProblem) drillRows() {
	for l, name := range p.layers {
		for _, s := range p.sites {
			if s.Upper != name && s.Lower != name {
				continue
			}
			d := p.m.MeanDisplacement(name, s.Pos)
			r := s.Pos.Sub(p.m.Datum)
			ax := make([]float64, p.nv)
			ax[2*l] = r.X
			ay := make([]float64, p.nv)
			ay[2*l+1] = r.Y
			p.drill.add(ax, d.X*toUM, 0)
			p.drill.add(ay, d.Y*toUM, 0)
		}
	}
	if p.budget > 0 {
		p.drill.caps = make([]float64, len(p.drill.b))
		for i := range p.drill.caps {
			p.drill.caps[i] = p.budget
		}
	}
}

// dropSlackBudget treats a drill budget that cannot bind as no budget: when
// every drill row's reach, |b| + Σ|a_j|·bound_j over the artwork bounds, stays
// below the budget, the constraint changes nothing the bounds allow, and the
// huge right-hand sides it would put into the linear programme only
// ill-condition it (a budget of 1e8 mil made the simplex method fail).
func (p *compProblem) dropSlackBudget() {
	if p.budget <= 0 {
		return
	}
	reach := 0.0
	for i, a := range p.drill.a {
		r := math.Abs(p.drill.b[i])
		for j, v := range a {
			r += math.Abs(v) * p.bounds.caps[j]
		}
		reach = math.Max(reach, r)
	}
	if p.budget > reach {
		p.slackBudget, p.budget = p.budget, 0
		p.drill.caps = nil
	}
}

// nullSpace returns an orthonormal basis of the null space of the offset rows
// (the common part, which moves no offset), from the eigen-decomposition of
// their normal matrix AᵀA, and with the rms objective the minimum-norm least-
// squares solution x = −Σ v_k (v_kᵀ Aᵀb)/λ_k over the other eigenvectors
// (zero for the worst-case objective).
func (p *compProblem) nullSpace() (null [][]float64, x []float64, err error) {
	nv, off := p.nv, &p.off
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
		return nil, nil, errors.New("compensation: eigen-decomposition failed")
	}
	vals := eig.Values(nil)
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	lmax := slices.Max(vals)
	x = make([]float64, nv)
	for k, lam := range vals {
		v := mat.Col(nil, k, &vecs)
		if lam <= 1e-10*lmax || lmax == 0 {
			null = append(null, v)
			continue
		}
		if p.set.Objective == RMS {
			var g float64
			for j := range v {
				g += v[j] * atb[j]
			}
			for j := range v {
				x[j] -= v[j] * g / lam
			}
		}
	}
	return null, x, nil
}

// optimise minimises the objective over the differences: the worst offset by
// the linear programme within the caps, or, for the rms objective, keeps the
// least-squares x and checks it against the caps when no common part is left
// to move it back inside them.
func (p *compProblem) optimise(x []float64, hasNull bool) ([]float64, error) {
	switch p.set.Objective {
	case Worst:
		x, _, err := minimax(p.nv, &p.off, &p.caps, 0, p.bounds.caps)
		return x, err
	case RMS:
		if v, ok := violated(&p.caps, x); ok && !hasNull {
			return nil, fmt.Errorf("%w: the rms optimum breaks %s; try the worst-case objective or a larger bound", ErrInfeasible, v)
		}
	}
	return x, nil
}

// chooseCommon sets the common part of x (x = x1 + N·z with N the null
// vectors): by the drill budget when there is one, else the smallest
// compensation. It returns x and how the common part was chosen ("" when
// there is none).
func (p *compProblem) chooseCommon(x []float64, null [][]float64) ([]float64, string, error) {
	common := ""
	if len(null) > 0 {
		var err error
		if p.budget > 0 {
			x, common, err = p.drillCommon(x, null)
		} else {
			x, common, err = p.smallestCommon(x, null)
		}
		if err != nil {
			return nil, "", err
		}
	}
	if p.set.Objective == RMS && p.budget > 0 {
		if v, bad := violated(&p.caps, x); bad {
			return nil, "", fmt.Errorf("%w: at the rms optimum the common part cannot meet %s; try the worst-case objective", ErrInfeasible, v)
		}
	}
	return x, common, nil
}

// drillCommon chooses the common part with a drill budget. First choice:
// centre every trace layer on the drilled holes in the least-squares sense
// (for a layer whose own movement is a pure scale this cancels it exactly).
// If that breaks the budget or a bound, it minimises the worst registration
// instead (a second linear programme in z).
func (p *compProblem) drillCommon(x []float64, null [][]float64) ([]float64, string, error) {
	nn := len(null)
	zd := inNull(&p.drill, x, null)
	z, ok := leastSquares(zd, nn)
	if y := alongNull(x, null, z); ok {
		if _, bad := violated(&p.caps, y); !bad {
			return y, "the drill budget: the common part centres the trace layers on the drilled holes (least squares over the sites), within the budget", nil
		}
	}
	// The null vectors are orthonormal, so |z| ≤ |x1| + |bounds|.
	var reach float64
	for j := range x {
		reach += x[j]*x[j] + p.bounds.caps[j]*p.bounds.caps[j]
	}
	zbox := make([]float64, nn)
	for k := range zbox {
		zbox[k] = 2 * math.Sqrt(reach)
	}
	z, _, err := minimax(nn, zd, inNull(&p.bounds, x, null), p.budget, zbox)
	if err != nil {
		return nil, "", err
	}
	return alongNull(x, null, z), "the drill budget: the common part minimises the worst registration of the trace layers to the drilled holes", nil
}

// smallestCommon removes the common part from x (the least sum of squares of
// the layers' scale changes), unless that breaks a bound; then it keeps x,
// which for the rms objective must itself meet the bounds.
func (p *compProblem) smallestCommon(x []float64, null [][]float64) ([]float64, string, error) {
	const common = "the smallest compensation: the common part minimises the sum of squares of the layers' scale changes"
	y := slices.Clone(x)
	for k := range null {
		var pr float64
		for j := range y {
			pr += null[k][j] * y[j]
		}
		for j := range y {
			y[j] -= pr * null[k][j]
		}
	}
	if _, bad := violated(&p.bounds, y); !bad {
		return y, common, nil
	}
	if p.set.Objective == RMS {
		if v, bad := violated(&p.bounds, x); bad {
			return nil, "", fmt.Errorf("%w: the rms optimum breaks %s", ErrInfeasible, v)
		}
	}
	return x, common, nil
}

// inNull returns the rows of src as linear forms in z, for x = x1 + N·z with
// N the null vectors.
func inNull(src *linRows, x1 []float64, null [][]float64) *linRows {
	out := &linRows{}
	for i := range src.b {
		az := make([]float64, len(null))
		for k := range null {
			for j := range null[k] {
				az[k] += src.a[i][j] * null[k][j]
			}
		}
		var c float64
		if src.caps != nil {
			c = src.caps[i]
		}
		out.add(az, src.value(i, x1), c)
	}
	return out
}

// alongNull returns x1 + N·z.
func alongNull(x1 []float64, null [][]float64, z []float64) []float64 {
	y := slices.Clone(x1)
	for k := range null {
		for j := range y {
			y[j] += null[k][j] * z[k]
		}
	}
	return y
}

// roundArtwork returns the artwork scale changes (ppm) for the net changes
// x, art_j = x_j/(1 + meanScale_j). With a step it rounds them to multiples
// of it (roundToStep, by the same objective, ties broken by the drill
// registration or the size of the compensation), moves x to match, and
// reports whether the rounding kept the drill budget.
func (p *compProblem) roundArtwork(x []float64) (art []float64, ok bool) {
	nv := p.nv
	art = make([]float64, nv)
	for j := range x {
		art[j] = x[j] / (1 + p.meanScale[j])
	}
	if p.set.Step <= 0 {
		return art, true
	}
	art, ok = roundToStep(art, p.set.Step*toPPM, p.maxScale*toPPM, func(a []float64) (float64, float64, bool) {
		xx := make([]float64, nv)
		for j := range a {
			xx[j] = a[j] * (1 + p.meanScale[j])
		}
		if p.budget > 0 {
			if _, bad := violated(&p.drill, xx); bad {
				return 0, 0, false
			}
		}
		obj := objective(p.set.Objective, &p.off, xx)
		var second float64
		if p.budget > 0 {
			second = worstAbs(&p.drill, xx)
		} else {
			for _, v := range a {
				second += v * v
			}
		}
		return obj, second, true
	})
	for j := range x {
		x[j] = art[j] * (1 + p.meanScale[j])
	}
	return art, ok
}

// result summarises the compensation x (net, ppm) with artwork values art:
// per layer and axis, per trace pair, the offsets and drill registration
// before and after, and the notes.
func (p *compProblem) result(x, art []float64, roundedOK bool, free int, common string) *CompResult {
	res := &CompResult{Objective: p.set.Objective, Before: p.before, Free: free, Common: common}
	var moved [2]bool // whether any site's offset has an x (y) component
	res.Layers, moved = p.layerComps(x, art)
	seen := map[layerPair]bool{}
	for _, s := range p.sites {
		k := layerPair{s.Upper, s.Lower}
		if s.Upper == s.Lower || seen[k] {
			continue
		}
		seen[k] = true
		u, l := p.li[s.Upper], p.li[s.Lower]
		res.Pairs = append(res.Pairs, PairDiff{s.Upper, s.Lower, [2]float64{(x[2*u] - x[2*l]) / toPPM, (x[2*u+1] - x[2*l+1]) / toPPM}})
	}
	res.After = make([]float64, len(p.sites))
	for i := range p.sites {
		if r := p.offIndex[i]; r >= 0 {
			res.After[i] = p.off.value(r, x) / toUM
		}
	}
	res.WorstBefore, res.RMSBefore = stats(res.Before)
	res.WorstAfter, res.RMSAfter = stats(res.After)
	res.DrillBefore = worstAbs(&p.drill, make([]float64, p.nv)) / toUM
	res.DrillAfter = worstAbs(&p.drill, x) / toUM
	res.Notes = p.notes(res.Free, roundedOK, moved)
	return res
}

// layerComps returns each layer's compensation and which axes move an offset
// somewhere. A variable is free when no offset row depends on it.
func (p *compProblem) layerComps(x, art []float64) ([]LayerComp, [2]bool) {
	var layers []LayerComp
	var moved [2]bool
	for j := 0; j < p.nv; j++ {
		free := true
		for i := range p.off.b {
			if p.off.a[i][j] != 0 {
				free = false
				break
			}
		}
		moved[j%2] = moved[j%2] || !free
		l := j / 2
		if j%2 == 0 {
			layers = append(layers, LayerComp{Layer: p.layers[l], MeanScale: [2]float64{p.meanScale[j], p.meanScale[j+1]}})
		}
		a := AxisComp{Scale: art[j] / toPPM, Factor: 1 + art[j]/toPPM, Net: x[j] / toPPM, Free: free}
		if j%2 == 0 {
			layers[l].X = a
		} else {
			layers[l].Y = a
		}
	}
	return layers, moved
}

// notes explains the result: that only differences matter, a rounding that
// broke the budget, axes that move no offset, and the free values.
func (p *compProblem) notes(free int, roundedOK bool, moved [2]bool) []string {
	notes := []string{"only the difference of two layers' scale compensation across the coupled lines moves a broadside offset"}
	if !roundedOK {
		notes = append(notes, "no rounding of the compensation to the step keeps every layer within the drill budget; the nearest multiples are shown")
	}
	if p.slackBudget > 0 {
		notes = append(notes, fmt.Sprintf("the drill budget of %.4g µm cannot bind (no compensation within the artwork bound moves a layer that far from the drilled holes), so it is treated as none", p.slackBudget))
	}
	var freeAxes []string
	for a, name := range []string{"X", "Y"} {
		if !moved[a] {
			freeAxes = append(freeAxes, name)
		}
	}
	if len(freeAxes) > 0 {
		notes = append(notes, fmt.Sprintf("no site's offset has a %s component (every coupled line runs along %s): %s compensation moves no offset and is set by %s",
			strings.Join(freeAxes, " or "), strings.Join(freeAxes, " or "), strings.Join(freeAxes, " and "), commonRule(p.budget > 0)))
	}
	if free > 0 {
		notes = append(notes, fmt.Sprintf("%d of the %d values are free (the common part) and were set by %s", free, p.nv, commonRule(p.budget > 0)))
	}
	return notes
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

// commonRule names how the common part is set, for the notes.
func commonRule(budget bool) string {
	if budget {
		return "the drill budget (best registration to the drilled holes)"
	}
	return "the smallest compensation"
}

// stats returns the largest |e_i| and the root mean square of e (0 for none).
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

// objective returns the value of o over the rows r at x: the largest |row|
// or their root mean square.
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

// worstAbs returns the largest |row| of r at x.
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
