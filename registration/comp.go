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

// Objective chooses what a compensation optimises.
type Objective int

const (
	// SiteYield maximises the expected site yield, the mean over all sites of
	// each site's closed-form probability of lying inside its own allowed
	// interval (SiteProb.Prob, the rule every command uses). Site yield rather
	// than good parts per panel: the expected number of good sites is exact
	// in closed form by linearity, while a part's yield needs the joint
	// distribution of its sites (they share the panel's terms), which only
	// the Monte Carlo of a yield study has; a smooth closed-form objective is
	// what a gradient optimiser needs, and the after state's part yield is
	// then measured by that study.
	SiteYield Objective = iota
	// Worst minimises the largest fraction of its window a site uses,
	// (|mean − window centre| + 3σ)/half-width: 1 is a site whose mean ± 3σ
	// touches the nearer end of its allowed interval. A linear programme
	// solved by the simplex method (gonum optimize/convex/lp).
	Worst
	// RMS minimises the root mean square of each site's mean offset from its
	// window's centre divided by its half-width, a weighted linear least-
	// squares problem (σ does not move with an artwork scale, so it adds a
	// constant and only the mean term can be optimised).
	RMS
)

// ParseObjective reads "yield", "worst" or "rms".
func ParseObjective(s string) (Objective, error) {
	switch s {
	case "yield":
		return SiteYield, nil
	case "worst":
		return Worst, nil
	case "rms":
		return RMS, nil
	}
	return 0, fmt.Errorf("unknown objective %q (want yield, worst or rms)", s)
}

func (o Objective) String() string { return [...]string{"yield", "worst", "rms"}[o] }

// CompSite is a coupler site for compensation: where it is, the direction of
// its coupled lines, the layers of its two traces, its section's design
// offset and the interval of across offsets in which it meets its spec.
type CompSite struct {
	Pos, U       panel.Vec
	Upper, Lower string
	// Nominal is the design offset of the site's section, m.
	Nominal float64
	// Allowed is the interval of across offsets, design offset included, in
	// which the coupler meets its spec (the section curve's allowed
	// interval); EmptyInterval() for a design that never does. The zero
	// value admits only an offset of exactly zero.
	Allowed Interval
}

// MovementSE is the standard error of a layer's measured mean scale terms
// (strain), from Panels panels: the lot's panel-to-panel standard deviation
// over √Panels. From, when set, says what Panels counts instead (for an
// estimate from a history, "lots of history (EWMA)").
type MovementSE struct {
	X, Y   float64
	Panels int
	From   string
}

// CompSettings configures Compensate. The zero value maximises the expected
// site yield with artwork scales within ±1000 ppm, continuous, no drill
// budget, every layer built at CAD size and no standard errors known.
type CompSettings struct {
	Objective Objective
	// DrillBudget, when positive, keeps each compensated layer's mean
	// registration to the drilled holes within ±DrillBudget per axis at every
	// site (m). It is a constraint only: a budget the recommendation already
	// meets changes nothing.
	DrillBudget float64
	// Max bounds each artwork scale change, |factor − 1| ≤ Max; zero means
	// 1000 ppm.
	Max float64
	// Step is the increment the imaging equipment accepts (strain); zero means
	// continuous. Rounded values are chosen among the neighbours of the
	// optimum by the same objective.
	Step float64
	// Applied is the artwork scale each layer of the analysed lot was built
	// with (nil: CAD size). The model's scales are as built, so "no change"
	// keeps this artwork; it only turns changes into absolute settings.
	Applied AppliedSet
	// SE holds the standard errors of the measured layers' mean scales, by
	// layer; layers without one have no stated uncertainty.
	SE map[string]MovementSE
}

// AxisComp is the recommended compensation of one layer along one axis.
type AxisComp struct {
	// Scale is the artwork scale change from the applied artwork, Factor − 1
	// (strain): +180e-6 means the artwork is made 180 ppm larger than today.
	Scale, Factor float64
	// Applied is the artwork scale the lot was built with and Setting the new
	// absolute artwork scale, (1 + Applied)(1 + Scale) − 1 (the product
	// convention of Applied); SettingFactor is 1 + Setting.
	Applied, Setting, SettingFactor float64
	// Movement is the layer's material movement, its mean scale in the model
	// with the applied artwork taken out, MaterialScale(mean, Applied).
	Movement float64
	// Net is the resulting change of the layer's scale term: the artwork
	// factor f acts before the material moves by its mean scale s, so the
	// layer ends at (1+s)·f − 1 and Net = (f − 1)(1 + s). Compensating s fully
	// takes f = 1/(1+s) [calculated here: (1+s)·f = 1].
	Net float64
	// SE is the standard error of Scale from the lot's measurement (first
	// order: an interior optimum moves one for one with the measured mean
	// scales along the directions that move offsets), 0 when unknown.
	SE float64
	// Free is set when this axis moves no broadside offset at any site (no
	// coupled lines run across it), so that its value is the smallest change
	// (or comes from the drill budget).
	Free bool
}

// LayerComp is the recommended compensation of one trace layer.
type LayerComp struct {
	Layer string
	// MeanScale is the layer's mean scale term in the model (x, y) before
	// compensation, as built (applied artwork included).
	MeanScale [2]float64
	X, Y      AxisComp
}

// PairDiff is the compensation difference across one trace pair, the only
// part of the compensation that moves its broadside offsets.
type PairDiff struct {
	Upper, Lower string
	Net          [2]float64 // Net(upper) − Net(lower), x and y
	SE           [2]float64 // its standard error, 0 when unknown
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
	// YieldBefore and YieldAfter are the predicted mean site yield (closed
	// form, SiteProb.Prob over each site's allowed interval) keeping the
	// applied artwork and with the recommendation.
	YieldBefore, YieldAfter float64
	// UsedBefore and UsedAfter are the largest fraction of its window a site
	// with a window uses (see Worst); NaN when no site has a window.
	UsedBefore, UsedAfter float64
	// BelowApplied is set when the recommendation predicts a lower site
	// yield than keeping the applied artwork (a binding constraint, or an
	// objective other than yield); the notes say why.
	BelowApplied bool
	// StepFinerThanSE is set when the rounding step is finer than the
	// largest standard error of a change that moves an offset.
	StepFinerThanSE bool
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

// yieldTie is the difference of mean site yield below which two
// compensations count as equally good, and the smaller change wins: 1e-9 is
// 1e-5 of one site on a 10,000-site panel, far below any yield a lot can
// show, and far above the rounding of a sum of 10⁴ probabilities (~1e-12).
const yieldTie = 1e-9

// linRows is a set of linear forms b_i + a_i·x; caps, when set, bound their
// magnitudes one by one. give, when set, adds a fixed amount to each row's
// magnitude in a minimax objective, |b_i + a_i·x| + give_i.
type linRows struct {
	a    [][]float64
	b    []float64
	caps []float64
	give []float64
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

// giveOf returns row i's give (0 without).
func (r *linRows) giveOf(i int) float64 {
	if r.give == nil {
		return 0
	}
	return r.give[i]
}

// Compensate recommends per-layer artwork scale changes in x and y for the
// trace layers of sites, from the model's mean displacements (the lot as
// built, so that no change keeps today's artwork).
//
// Only the difference of two layers' compensation projected across the lines
// moves a broadside offset, so the offsets fix the differences and leave a
// common part free. Compensate optimises the objective over the differences,
// then takes the smallest change from the applied artwork (the common part
// zero: least sum of squares); the drill budget and the artwork bound are
// constraints only, consulted when that answer breaks them.
//
// The steps: the linear forms of the problem ([newCompProblem]), the null and
// range spaces of the offsets ([compProblem.spaces]), the objective
// ([compProblem.maxYield], [compProblem.minimaxWindow],
// [compProblem.rmsWindow]), the constraints ([compProblem.settle]), rounding
// to the equipment's step ([compProblem.roundArtwork]) and the summary
// ([compProblem.result]).
func Compensate(m *Model, sites []CompSite, set *CompSettings) (*CompResult, error) {
	if set == nil {
		set = &CompSettings{}
	}
	p, err := newCompProblem(m, sites, set)
	if err != nil {
		return nil, err
	}
	null, rng, err := p.spaces()
	if err != nil {
		return nil, err
	}
	var x []float64
	var common string
	switch p.set.Objective {
	case SiteYield:
		x, common, err = p.maxYield(null, rng)
	case Worst:
		x, common, err = p.minimaxWindow(null)
	default:
		x, common, err = p.rmsWindow(null, rng)
	}
	if err != nil {
		return nil, err
	}
	art, roundedOK := p.roundArtwork(x)
	keep := make([]float64, p.nv)
	if p.set.Objective == SiteYield && p.yield(x) < p.yield(keep)-yieldTie && p.feasible(keep) {
		// The constraints or the rounding cost more than the optimum gains:
		// today's artwork is the better recommendation.
		x, art = keep, slices.Clone(keep)
		common = "no change: within the constraints and the step no compensation beats the applied artwork"
		roundedOK = true
	}
	return p.result(x, art, roundedOK, len(null), common, rng), nil
}

// layerPair names the upper and lower trace layers of a site.
type layerPair struct{ u, l string }

// compProblem is the problem of one compensation in the internal units
// (offsets in µm, scales in ppm). Its variables are the net scale changes of
// the trace layers, two per layer: x then y, in the order of layers.
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

	// prob and allowed are each offset row's closed-form offset distribution
	// at no change and its allowed interval; fixedYield is the summed
	// probability of the sites compensation cannot move.
	prob       []SiteProb
	allowed    []Interval
	fixedYield float64
	// norm holds the windowed rows normalised by their half-width, with the
	// 3σ give: (|b + a·x − centre| + 3σ)/half-width is the window used.
	norm linRows
	// windowed is the number of two-layer sites with a window.
	windowed int
}

// newCompProblem collects the trace layers of sites (those of sites with two
// different layers, in order of appearance) and builds the problem's linear
// forms: the bounds, the offset rows, the normalised rows and the drill rows.
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
	if p.windowed == 0 {
		// No site can meet its spec: nothing to weigh by windows, so the
		// objectives fall back to the plain offsets (|offset| in µm as the
		// rows to minimise), the yield objective to their worst case.
		p.norm = linRows{a: p.off.a, b: p.off.b}
		if p.set.Objective == SiteYield {
			p.set = &CompSettings{Objective: Worst, DrillBudget: set.DrillBudget, Max: set.Max, Step: set.Step, Applied: set.Applied, SE: set.SE}
		}
	}
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
// x in ppm), its closed-form distribution and window, the normalised row of
// a windowed site, and records the offsets before compensation.
func (p *compProblem) offsetRows() {
	rels := map[layerPair]*Relative{}
	p.before = make([]float64, len(p.sites))
	p.offIndex = make([]int, len(p.sites))
	p.norm.give = []float64{}
	for i, s := range p.sites {
		p.offIndex[i] = -1
		k := layerPair{s.Upper, s.Lower}
		rel := rels[k]
		if rel == nil {
			rel = p.m.Relative(s.Upper, s.Lower)
			rels[k] = rel
		}
		row := rel.Row(s.Pos, s.U)
		if s.Upper == s.Lower {
			p.fixedYield += rel.Prob(&row, s.Nominal).Prob(s.Allowed)
			continue
		}
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
		p.prob = append(p.prob, rel.Prob(&row, s.Nominal))
		p.allowed = append(p.allowed, s.Allowed)
		if iv := s.Allowed; !iv.Empty() && iv.Hi > iv.Lo {
			// In the design-offset-excluded frame of the row the window's
			// centre is (Lo + Hi)/2 − nominal.
			h := (iv.Hi - iv.Lo) / 2 * toUM
			c := ((iv.Lo+iv.Hi)/2 - s.Nominal) * toUM
			an := make([]float64, p.nv)
			for j := range a {
				an[j] = a[j] / h
			}
			p.norm.add(an, (st.MeanAcross*toUM-c)/h, 0)
			p.norm.give = append(p.norm.give, 3*st.SDAcross*toUM/h)
			p.windowed++
		}
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

// spaces returns orthonormal bases of the null space of the offset rows (the
// common part, which moves no offset) and of its complement (the range, the
// directions that do), from the eigen-decomposition of their normal matrix
// AᵀA.
func (p *compProblem) spaces() (null, rng [][]float64, err error) {
	vals, vecs, err := normalEigen(&p.off, p.nv)
	if err != nil {
		return nil, nil, err
	}
	lmax := slices.Max(vals)
	for k, lam := range vals {
		v := mat.Col(nil, k, vecs)
		if lam <= 1e-10*lmax || lmax == 0 {
			null = append(null, v)
		} else {
			rng = append(rng, v)
		}
	}
	return null, rng, nil
}

// normalEigen returns the eigenvalues and eigenvectors (columns) of rᵀr.
func normalEigen(r *linRows, nv int) ([]float64, *mat.Dense, error) {
	ata := mat.NewSymDense(nv, nil)
	for i := range r.b {
		for a := 0; a < nv; a++ {
			for b := a; b < nv; b++ {
				ata.SetSym(a, b, ata.At(a, b)+r.a[i][a]*r.a[i][b])
			}
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(ata, true) {
		return nil, nil, errors.New("compensation: eigen-decomposition failed")
	}
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	return eig.Values(nil), &vecs, nil
}

// minimaxWindow minimises the largest window used by the linear programme,
// first within the artwork bounds alone and, only when that answer breaks
// the drill budget, within the budget too, so that a budget that does not
// bind cannot change the answer.
func (p *compProblem) minimaxWindow(null [][]float64) ([]float64, string, error) {
	x, _, err := minimax(p.nv, &p.norm, &p.bounds, 0, p.bounds.caps)
	if err != nil {
		return nil, "", err
	}
	if y, common, ok := p.settle(x, null); ok {
		return y, common, nil
	}
	if p.budget <= 0 {
		return x, "the common part as the linear programme left it (leaving it out breaks a bound)", nil
	}
	if x, _, err = minimax(p.nv, &p.norm, &p.caps, 0, p.bounds.caps); err != nil {
		return nil, "", err
	}
	if y, common, ok := p.settle(x, null); ok {
		return y, common, nil
	}
	return x, "the drill budget binds: the common part is as the linear programme within the budget left it", nil
}

// rmsWindow is the weighted least-squares optimum over the normalised rows,
// x = −Σ v_k (v_kᵀ Aᵀb)/λ_k over the eigenvectors of their normal matrix
// with λ_k > 0 (the minimum-norm solution), then the constraints.
func (p *compProblem) rmsWindow(null, rng [][]float64) ([]float64, string, error) {
	x, err := minNormLS(&p.norm, p.nv)
	if err != nil {
		return nil, "", err
	}
	if y, common, ok := p.settle(x, null); ok {
		return y, common, nil
	}
	if v, bad := violated(&p.caps, x); bad {
		return nil, "", fmt.Errorf("%w: the rms optimum breaks %s; try the worst-case objective or a larger bound", ErrInfeasible, v)
	}
	return x, "the least-squares optimum as it stands", nil
}

// minNormLS returns the minimum-norm x minimising Σ (b_i + a_i·x)²,
// x = −Σ v_k (v_kᵀ Aᵀb)/λ_k over the eigenvectors of AᵀA with λ_k > 0 (the
// pseudo-inverse solution, Golub & Van Loan, Matrix Computations, 4th ed.,
// sec. 5.5.1).
func minNormLS(r *linRows, nv int) ([]float64, error) {
	vals, vecs, err := normalEigen(r, nv)
	if err != nil {
		return nil, err
	}
	atb := make([]float64, nv)
	for i := range r.b {
		for j := range atb {
			atb[j] += r.a[i][j] * r.b[i]
		}
	}
	lmax := slices.Max(vals)
	x := make([]float64, nv)
	for k, lam := range vals {
		if lam <= 1e-10*lmax || lmax == 0 {
			continue
		}
		v := mat.Col(nil, k, vecs)
		var g float64
		for j := range v {
			g += v[j] * atb[j]
		}
		for j := range v {
			x[j] -= v[j] * g / lam
		}
	}
	return x, nil
}

// feasible reports whether x keeps every capped row.
func (p *compProblem) feasible(x []float64) bool {
	_, bad := violated(&p.caps, x)
	return !bad
}

// settle applies the constraints to an optimum x of the differences: the
// smallest change (x with its common part removed) when that keeps the
// bounds and the budget, else, with a budget, a common part that brings it
// within them (drillCommon); ok is false when neither does.
func (p *compProblem) settle(x []float64, null [][]float64) ([]float64, string, bool) {
	const smallest = "the smallest change from the applied artwork: the common part, which moves no offset, is left out (least sum of squares of the layers' changes)"
	y := removeNull(x, null)
	if p.feasible(y) {
		return y, smallest, true
	}
	if len(null) > 0 && p.budget > 0 {
		if z, common, err := p.drillCommon(y, null); err == nil && p.feasible(z) {
			return z, common, true
		}
	}
	if p.feasible(x) {
		return x, "the common part as the optimiser left it (leaving it out breaks a bound)", true
	}
	return nil, "", false
}

// removeNull returns x with its components along the null vectors removed.
func removeNull(x []float64, null [][]float64) []float64 {
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
	return y
}

// drillCommon chooses the common part when the smallest change breaks the
// drill budget: the smallest change (least sum of squares of the layers'
// changes) whose common part keeps the budget and the bounds. A feasible
// common part comes first (x = x1 + N·z): the one centring the trace layers
// on the drilled holes by least squares when that keeps the budget, else the
// linear programme's, minimising the worst registration; the penalty method
// then minimises |x1 + N·z|² from z = 0 and backInside brings the end onto
// the feasible set along the segment from that point.
func (p *compProblem) drillCommon(x []float64, null [][]float64) ([]float64, string, error) {
	nn := len(null)
	zd := inNull(&p.drill, x, null)
	// The null vectors are orthonormal, so |z| ≤ |x1| + |bounds|.
	var reach float64
	for j := range x {
		reach += x[j]*x[j] + p.bounds.caps[j]*p.bounds.caps[j]
	}
	zbox := make([]float64, nn)
	for k := range zbox {
		zbox[k] = 2 * math.Sqrt(reach)
	}
	capsZ := inNull(&p.caps, x, null)
	zf, err := minNormLS(zd, nn)
	if _, bad := violated(capsZ, zf); err != nil || bad {
		if zf, _, err = minimax(nn, zd, inNull(&p.bounds, x, null), p.budget, zbox); err != nil {
			return nil, "", err
		}
	}
	scale := 1 / (norm2(x) + 1) // keeps the objective of order 1 beside the penalty
	z := penaltyMin(func(z []float64) float64 { return norm2(alongNull(x, null, z)) * scale },
		func(g, z []float64) {
			y := alongNull(x, null, z)
			for k := range null {
				for j := range y {
					g[k] += 2 * scale * y[j] * null[k][j]
				}
			}
		}, capsZ, make([]float64, nn))
	return alongNull(x, null, backInside(zf, z, capsZ)), "the drill budget binds: the common part is the smallest change that keeps every trace layer within the budget", nil
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

// score returns the objective of x to minimise, never negative (roundToStep
// compares relatively): the yield shortfall 1 − yield, the worst window used,
// or the rms of the normalised rows.
func (p *compProblem) score(x []float64) float64 {
	switch p.set.Objective {
	case SiteYield:
		return 1 - p.yield(x)
	case Worst:
		return objective(Worst, &p.norm, x)
	}
	return objective(RMS, &p.norm, x)
}

// roundArtwork returns the artwork scale changes (ppm) for the net changes
// x, art_j = x_j/(1 + meanScale_j). With a step it rounds them to multiples
// of it (roundToStep, by the same objective, ties broken by the size of the
// change), moves x to match, and reports whether the rounding kept the
// constraints.
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
		var second float64
		for _, v := range a {
			second += v * v
		}
		return p.score(xx), second, true
	})
	for j := range x {
		x[j] = art[j] * (1 + p.meanScale[j])
	}
	return art, ok
}

// result summarises the compensation x (net, ppm) with artwork values art:
// per layer and axis, per trace pair, the offsets, yields and drill
// registration before and after, and the notes.
func (p *compProblem) result(x, art []float64, roundedOK bool, free int, common string, rng [][]float64) *CompResult {
	res := &CompResult{Objective: p.set.Objective, Before: p.before, Free: free, Common: common}
	cov := p.changeCov(rng)
	var moved [2]bool // whether any site's offset has an x (y) component
	res.Layers, moved = p.layerComps(x, art, cov)
	seen := map[layerPair]bool{}
	for _, s := range p.sites {
		k := layerPair{s.Upper, s.Lower}
		if s.Upper == s.Lower || seen[k] {
			continue
		}
		seen[k] = true
		u, l := p.li[s.Upper], p.li[s.Lower]
		d := PairDiff{Upper: s.Upper, Lower: s.Lower, Net: [2]float64{(x[2*u] - x[2*l]) / toPPM, (x[2*u+1] - x[2*l+1]) / toPPM}}
		if cov != nil {
			for a := 0; a < 2; a++ {
				i, j := 2*u+a, 2*l+a
				v := cov.At(i, i) + cov.At(j, j) - 2*cov.At(i, j)
				d.SE[a] = math.Sqrt(math.Max(v, 0)) / toPPM
			}
		}
		res.Pairs = append(res.Pairs, d)
	}
	res.After = make([]float64, len(p.sites))
	for i := range p.sites {
		if r := p.offIndex[i]; r >= 0 {
			res.After[i] = p.off.value(r, x) / toUM
		}
	}
	keep := make([]float64, p.nv)
	res.WorstBefore, res.RMSBefore = stats(res.Before)
	res.WorstAfter, res.RMSAfter = stats(res.After)
	res.YieldBefore, res.YieldAfter = p.yield(keep), p.yield(x)
	if p.windowed > 0 {
		res.UsedBefore, res.UsedAfter = objective(Worst, &p.norm, keep), objective(Worst, &p.norm, x)
	} else {
		res.UsedBefore, res.UsedAfter = math.NaN(), math.NaN()
	}
	res.BelowApplied = res.YieldAfter < res.YieldBefore-yieldTie
	res.DrillBefore = worstAbs(&p.drill, keep) / toUM
	res.DrillAfter = worstAbs(&p.drill, x) / toUM
	res.Notes = p.notes(res, roundedOK, moved)
	return res
}

// changeCov returns the covariance (ppm²) of the recommended net changes
// from the standard errors of the measured mean scales, nil when none is
// known. At an interior optimum the objective depends on the mean scale s and
// the change x only through s + x along the range directions, so the optimum
// moves by −P·δs for a change δs of the measured means, P = V·Vᵀ the
// projector onto the range: Cov(x) = P·Σ·P with Σ = diag(SE²) [calculated
// here].
func (p *compProblem) changeCov(rng [][]float64) *mat.SymDense {
	if len(p.set.SE) == 0 || len(rng) == 0 {
		return nil
	}
	nv := p.nv
	sig := make([]float64, nv)
	any := false
	for l, name := range p.layers {
		if se, ok := p.set.SE[name]; ok {
			sig[2*l], sig[2*l+1] = se.X*toPPM, se.Y*toPPM
			any = any || se.X > 0 || se.Y > 0
		}
	}
	if !any {
		return nil
	}
	proj := mat.NewDense(nv, nv, nil)
	for _, v := range rng {
		for i := range v {
			for j := range v {
				proj.Set(i, j, proj.At(i, j)+v[i]*v[j])
			}
		}
	}
	cov := mat.NewSymDense(nv, nil)
	for i := 0; i < nv; i++ {
		for j := i; j < nv; j++ {
			var s float64
			for k := 0; k < nv; k++ {
				s += proj.At(i, k) * sig[k] * sig[k] * proj.At(k, j)
			}
			cov.SetSym(i, j, s)
		}
	}
	return cov
}

// layerComps returns each layer's compensation and which axes move an offset
// somewhere. A variable is free when no offset row depends on it.
func (p *compProblem) layerComps(x, art []float64, cov *mat.SymDense) ([]LayerComp, [2]bool) {
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
		ap := p.set.Applied[p.layers[l]]
		applied := ap.ScaleX
		if j%2 == 1 {
			applied = ap.ScaleY
		}
		change := art[j] / toPPM
		setting := (1+applied)*(1+change) - 1
		a := AxisComp{Scale: change, Factor: 1 + change, Applied: applied, Setting: setting, SettingFactor: 1 + setting,
			Movement: MaterialScale(p.meanScale[j], applied), Net: x[j] / toPPM, Free: free}
		if cov != nil {
			a.SE = math.Sqrt(math.Max(cov.At(j, j), 0)) / toPPM
		}
		if j%2 == 0 {
			layers[l].X = a
		} else {
			layers[l].Y = a
		}
	}
	return layers, moved
}

// notes explains the result: that only differences matter, a rounding that
// broke the budget, axes that move no offset, the free values, a yield below
// the applied artwork's and a step finer than the standard error.
func (p *compProblem) notes(res *CompResult, roundedOK bool, moved [2]bool) []string {
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
	if res.Free > 0 {
		notes = append(notes, fmt.Sprintf("%d of the %d values are free (the common part) and were set by %s", res.Free, p.nv, commonRule(p.budget > 0)))
	}
	if res.BelowApplied {
		why := "the drill budget, the artwork bound or the step cost more than the optimum gains"
		if !p.feasible(make([]float64, p.nv)) {
			why = "keeping the applied artwork itself breaks the drill budget or the artwork bound, and keeping them costs yield"
		} else if p.set.Objective != SiteYield {
			why = fmt.Sprintf("the %s objective does not maximise yield; --objective yield does", p.set.Objective)
		}
		notes = append(notes, fmt.Sprintf("WARNING: the recommendation predicts a LOWER site yield (%.4f %%) than keeping the applied artwork (%.4f %%): %s",
			100*res.YieldAfter, 100*res.YieldBefore, why))
	}
	if p.windowed == 0 {
		notes = append(notes, fmt.Sprintf("no coupler site can meet its spec at any offset (every design is out of spec): the %s objective judged the plain offsets instead", p.set.Objective))
	} else if p.windowed < len(p.off.b) {
		notes = append(notes, fmt.Sprintf("%d of %d coupler sites never meet their spec (design out of spec) and do not weigh in the objective", len(p.off.b)-p.windowed, len(p.off.b)))
	}
	notes = append(notes, p.seNotes(res, moved)...)
	return notes
}

// seNotes states the recommendation's standard error and flags a step finer
// than it (setting res.StepFinerThanSE).
func (p *compProblem) seNotes(res *CompResult, moved [2]bool) []string {
	var worst float64
	panels, from := 0, "panels"
	for _, l := range res.Layers {
		for a, ax := range []AxisComp{l.X, l.Y} {
			if moved[a] && !ax.Free {
				worst = math.Max(worst, ax.SE)
			}
		}
		if se, ok := p.set.SE[l.Layer]; ok && (panels == 0 || se.Panels < panels) {
			panels = se.Panels
			if se.From != "" {
				from = se.From
			}
		}
	}
	if worst == 0 {
		if len(p.set.SE) > 0 {
			return []string{"the measured lot gives no standard error of the recommendation (one panel, or no panel-to-panel spread)"}
		}
		return nil
	}
	notes := []string{fmt.Sprintf("standard error of the recommended changes: up to %.2f ppm (from %d %s; it shrinks as 1/√n)", worst*1e6, panels, from)}
	if s := p.set.Step; s > 0 && s < worst {
		res.StepFinerThanSE = true
		notes = append(notes, fmt.Sprintf("the step of %.3g ppm is finer than that standard error (%.2f ppm): the rounded digits are below what the measurement resolves", s*1e6, worst*1e6))
	}
	return notes
}

// commonRule names how the common part is set, for the notes.
func commonRule(budget bool) string {
	if budget {
		return "the smallest change from the applied artwork, moved only where the drill budget binds"
	}
	return "the smallest change from the applied artwork"
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

// objective returns the value of o over the rows r at x: the largest
// |row| + give, or the rows' root mean square.
func objective(o Objective, r *linRows, x []float64) float64 {
	if o == Worst {
		var w float64
		for i := range r.b {
			w = math.Max(w, math.Abs(r.value(i, x))+r.giveOf(i))
		}
		return w
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

// capSlack is the relative (and, in µm or ppm, absolute) amount by which a
// row may pass its cap and still count as kept: the simplex method's
// solutions sit on the caps with right-hand sides perturbed by up to
// 1e-9·(1 + |h|) (solveLP), so the slack is a hundred times that, and still
// 1e-7 of a cap, far below any length or scale that matters.
const capSlack = 1e-7

// violated reports the first capped row that x breaks beyond rounding.
func violated(r *linRows, x []float64) (string, bool) {
	for i := range r.b {
		if v := r.value(i, x); math.Abs(v) > r.caps[i]*(1+capSlack)+capSlack {
			return fmt.Sprintf("a limit of %.4g (at %.4g)", r.caps[i], v), true
		}
	}
	return "", false
}

// minimax minimises t subject to |obj_i(x)| + give_i ≤ t for every objective row and
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
		sort.Slice(idx, func(a, b int) bool {
			return math.Abs(r.b[idx[a]])+r.giveOf(idx[a]) > math.Abs(r.b[idx[b]])+r.giveOf(idx[b])
		})
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
	for i, b := range obj.b {
		scale = math.Max(scale, math.Abs(b)+obj.giveOf(i))
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
			if v := math.Abs(obj.value(i, x)) + obj.giveOf(i) - t; v > tol && !active[[2]int{0, i}] {
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
			a, b, d := obj.a[k[1]], obj.b[k[1]], obj.giveOf(k[1])
			row(a, -1, -b-d)
			row(neg(a), -1, b-d)
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
			v := math.Abs(r.b[k[1]]) + r.giveOf(k[1])
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
