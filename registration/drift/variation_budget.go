package drift

import (
	"math"
	"sort"
	"sync"

	"gonum.org/v1/gonum/integrate/quad"

	"github.com/regdrift/regdrift/registration"
)

// The coupling budget: with process terms, coupling (not offset) is the
// common currency of registration and process terms. By the law of total
// variance, conditional on the offset δ the coupling m + s·t + q·t²
// (variation_quad.go) has mean M(δ) = m(δ) + q(δ) and variance
// V(δ) = s² + 2q² = v₁·(κ² + 2ρ²·v₁), v₁ = Σ sᵢ(δ)²·σᵢ², so
//
//	Var C = Var_δ M(δ) + Σᵢ σᵢ²·E_δ[sᵢ(δ)²·(κ² + 2ρ²·v₁)],
//
// σᵢ² a term's variance at a site (a uniform panel part's w²/3, exact for
// the first-order part whatever the distribution; the 2ρ² part takes
// Var t² = 2, the normal's, which a uniform part lowers), the first part
// registration's, each term of the sum one process term's:
// the second-order term's part of V is shared among the terms in
// proportion to their shares of v₁, the direction it lies along.
// Both expectations are over δ's normal distribution, with smooth
// integrands, which Gauss–Hermite quadrature integrates (gonum
// integrate/quad.Hermite). Registration's part is shared among its
// contributor terms in proportion to their shares of the offset variance
// (registration.Relative.Budget): exact where m is linear in δ, and an
// attribution where it is not (a centred pair, quadratic in δ).

// budgetNodes is the number of Gauss–Hermite nodes: exact for polynomials
// of degree 47 in δ, and m(δ) over ±6σ is a smooth curve.
const budgetNodes = 24

var (
	hermiteOnce             sync.Once
	hermiteX, hermiteWeight [budgetNodes]float64
)

func hermite() (*[budgetNodes]float64, *[budgetNodes]float64) {
	hermiteOnce.Do(func() {
		quad.Hermite{}.FixedLocations(hermiteX[:], hermiteWeight[:], math.Inf(-1), math.Inf(1))
		for i := range hermiteWeight {
			hermiteWeight[i] /= math.SqrtPi // E over a standard normal: x = √2·z
		}
	})
	return &hermiteX, &hermiteWeight
}

// CouplingShare is one source's part of the coupling variance.
type CouplingShare struct {
	Source string  `json:"source"` // "registration" or "variation"
	Name   string  `json:"name"`   // "CONTRIBUTOR: term" or the variation term's name
	Share  float64 `json:"share"`
	SDDB   float64 `json:"sd_db"`
}

// CouplingBudget ranks registration and variation terms together by their
// share of the coupling variance, at the site of lowest yield and as the
// mean over the panel's sites.
type CouplingBudget struct {
	WorstSite string          `json:"worst_site"`
	AtWorst   []CouplingShare `json:"worst_site_terms"`
	Panel     []CouplingShare `json:"panel_terms"`
}

// squareVar returns, at offset off for process row r, the variance v₁ of
// the first-order deviation L and Var(X²) for X = L/√v₁ (unit variance):
// the second-order term q·X² adds q²·Var(X²) to the coupling's variance
// (X symmetric, so Cov(X, X²) = 0). Var(X²) = 2 + γ₂, γ₂ X's excess
// kurtosis: 0 for a normal X; a uniform panel part of half-width w (its
// coupling half-width |s|·w) has fourth cumulant −2(|s|w)⁴/15 (excess
// kurtosis −6/5: Johnson, Kotz & Balakrishnan, Continuous Univariate
// Distributions, vol. 2, 2nd ed., ch. 26), and cumulants of independent
// parts add, so γ₂ = −(2/15)·Σ(|s|w)⁴/v₁².
func (e *Evaluator) squareVar(off float64, r *procRow) (v1, sq float64) {
	var k4 float64
	ws := r.halfWidths()
	for b, va := range r.vars() {
		s := e.termSens(b, off)
		v1 += s * s * va
		if w := ws[b]; w > 0 {
			sw := s * w
			k4 += sw * sw * sw * sw
		}
	}
	sq = 2
	if v1 > 0 {
		sq -= 2.0 / 15 * k4 / (v1 * v1)
	}
	return v1, sq
}

// couplingParts returns site k's coupling variance from registration (dB²)
// and from each process term (indexed as process.Model.Terms).
func (a *Analysis) couplingParts(k int, ev *Evaluator, terms []float64) float64 {
	r := &a.Sites[k]
	for i := range terms {
		terms[i] = 0
	}
	mu, sd := r.Offset, r.Stats.SDAcross
	var pr procRow
	if ev.hasProc() {
		ev.Proc.row(&pr, r.Site.Pos)
	}
	mAt := func(x float64) float64 {
		if ev.hasProc() {
			return ev.meanCoupling(x, &pr)
		}
		return ev.Curve.Coupling(x)
	}
	// addTerms adds weight w times each term's part of V at x.
	addTerms := func(w, x float64) {
		_, kappa, rho := ev.Proc.secondAt(x, pr.second)
		v1, sq := ev.squareVar(x, &pr)
		f := kappa*kappa + sq*rho*rho*v1
		for b, bd := range ev.Proc.Bind {
			s := ev.termSens(b, x)
			terms[bd.Term] += w * s * s * pr.vars()[b] * f
		}
	}
	if sd == 0 {
		if ev.hasProc() {
			addTerms(1, mu)
		}
		return 0
	}
	xs, ws := hermite()
	var mean float64
	var ms [budgetNodes]float64
	for j := range xs {
		x := mu + math.Sqrt2*sd*xs[j]
		ms[j] = mAt(x)
		mean += ws[j] * ms[j]
		if ev.hasProc() {
			addTerms(ws[j], x)
		}
	}
	var reg float64
	for j := range xs {
		reg += ws[j] * (ms[j] - mean) * (ms[j] - mean)
	}
	return reg
}

// couplingBudget returns the coupling budget of the analysis (nil without
// process terms).
func (a *Analysis) couplingBudget() *CouplingBudget {
	if a.In.Process.Empty() || len(a.Sites) == 0 {
		return nil
	}
	nt := len(a.In.Process.Terms)
	ev := make([]Evaluator, len(a.Curves))
	for i := range ev {
		if a.used[i] {
			ev[i] = a.Evaluator(i)
		}
	}
	type key struct {
		source string
		name   string
	}
	panelSum := map[key]float64{}
	var worst []CouplingShare
	w := a.WorstYieldSite()
	terms := make([]float64, nt)
	var shares []registration.Share
	for k := range a.Sites {
		r := &a.Sites[k]
		reg := a.couplingParts(k, &ev[r.Section], terms)
		shares = a.Yield.Budget(shares[:0], k)
		vd := r.Stats.SDAcross * r.Stats.SDAcross
		var site []CouplingShare
		for _, s := range shares {
			if vd == 0 {
				break
			}
			term := "site_sigma"
			if s.Term >= 0 {
				term = s.Term.String()
			}
			v := reg * s.Variance / vd
			name := a.Model.Contributors[s.Contributor].Name + ": " + term
			panelSum[key{"registration", name}] += v
			site = append(site, CouplingShare{Source: "registration", Name: name, SDDB: v})
		}
		for t, v := range terms {
			if v == 0 {
				continue
			}
			name := a.In.Process.Terms[t].Name
			panelSum[key{"variation", name}] += v
			site = append(site, CouplingShare{Source: "variation", Name: name, SDDB: v})
		}
		if k == w {
			worst = site
		}
	}
	cb := &CouplingBudget{WorstSite: a.In.Sites[w].Name}
	finish := func(rows []CouplingShare) []CouplingShare {
		var tot float64
		for _, r := range rows {
			tot += r.SDDB // variances until here
		}
		for i := range rows {
			if tot > 0 {
				rows[i].Share = rows[i].SDDB / tot
			}
			rows[i].SDDB = math.Sqrt(rows[i].SDDB)
		}
		sort.SliceStable(rows, func(p, q int) bool { return rows[p].Share > rows[q].Share })
		return rows
	}
	cb.AtWorst = finish(worst)
	n := float64(len(a.Sites))
	var panelRows []CouplingShare
	for k, v := range panelSum {
		panelRows = append(panelRows, CouplingShare{Source: k.source, Name: k.name, SDDB: v / n})
	}
	sort.Slice(panelRows, func(p, q int) bool { // a fixed order before the ranking
		if panelRows[p].Source != panelRows[q].Source {
			return panelRows[p].Source < panelRows[q].Source
		}
		return panelRows[p].Name < panelRows[q].Name
	})
	cb.Panel = finish(panelRows)
	return cb
}
