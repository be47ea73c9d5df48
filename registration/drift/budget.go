package drift

import (
	"math"
	"sort"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// CouplingBudget ranks the registration terms and the variation terms
// together by their share of the coupling variance, at the worst site and
// over the panel. Coupling is the common currency: a centred broadside
// pair is quadratic in the offset, an edge-coupled pair does not see the
// offset at all, and a variation term moves coupling directly.
type CouplingBudget struct {
	WorstSite string          `json:"worst_site"`
	AtWorst   []CouplingShare `json:"worst_site_terms"`
	Panel     []CouplingShare `json:"panel_terms"`
}

// CouplingShare is one term's share of the coupling variance.
type CouplingShare struct {
	// Source is "registration" or "variation".
	Source string `json:"source"`
	// Name is the contributor's or the variation term's name; Term the
	// registration term (offset_x ... site_sigma) or the variation's
	// quantity (thickness, er, width, etch, copper, mask).
	Name  string  `json:"name"`
	Term  string  `json:"term"`
	Share float64 `json:"share"`
	// SDDB is the coupling standard deviation the term alone causes, dB
	// (over the panel: the root of its mean variance over the sites).
	SDDB float64 `json:"sd_db"`
}

// budgetStep is the offset step of the central differences that give the
// coupling curve's slope and curvature at a site's mean offset: the curve
// is a monotone cubic through points 0.5 mil apart (section.DefaultOffsets),
// and 0.05 mil is well inside one interval.
const budgetStep = 0.05 * unit.Mil

// budgetKey identifies a term across sites: registration terms by
// contributor and term kind, variation terms by their index (kind −2).
type budgetKey struct {
	source int // 0 registration, 1 variation
	c      int
	t      registration.TermKind
}

// siteCouplingVariance appends to dst each term's coupling variance at site
// k, dB². The offset δ enters to second order about its mean μ: with
// c′, c″ the curve's slope and curvature there and σ² = Σ vᵢ the offset
// variance, a normal δ gives Var c = c′²σ² + ½c″²σ⁴ (the variance of a
// quadratic in a normal variable; e.g. Papoulis, Probability, Random
// Variables and Stochastic Processes, moments of the normal), and term i
// is given c′²vᵢ + ½c″²vᵢσ², its part of σ² times each. A variation term j
// enters first order, sⱼ(μ)²·Var Δpⱼ (the evaluator's model). Cross terms
// between the offset and the process are of higher order and left out.
func (a *Analysis) siteCouplingVariance(dst []budgetEntry, k int, shares []registration.Share, ev *Evaluator) []budgetEntry {
	r := &a.Sites[k]
	c := ev.Curve
	mu := r.Offset
	h := budgetStep
	cp, c0, cm := c.Coupling(mu+h), c.Coupling(mu), c.Coupling(mu-h)
	d1, d2 := (cp-cm)/(2*h), (cp-2*c0+cm)/(h*h)
	s2 := r.Stats.SDAcross * r.Stats.SDAcross
	for _, s := range shares {
		v := d1*d1*s.Variance + 0.5*d2*d2*s.Variance*s2
		dst = append(dst, budgetEntry{budgetKey{0, s.Contributor, s.Term}, v})
	}
	if ev.hasProc() {
		for b, bd := range ev.Proc.Bind {
			sb := ev.termSens(b, mu)
			v := sb * sb * ev.Proc.Model.Terms[bd.Term].Variance()
			dst = append(dst, budgetEntry{budgetKey{1, bd.Term, 0}, v})
		}
	}
	return dst
}

type budgetEntry struct {
	key budgetKey
	v   float64
}

// CouplingBudget returns the coupling-variance budget at the site of
// lowest yield (WorstYieldSite) and over the panel (each term's variance
// averaged over the sites, as shares of their sum). Evaluate must have run.
func (a *Analysis) CouplingBudget() CouplingBudget {
	var out CouplingBudget
	if len(a.Sites) == 0 {
		return out
	}
	ev := make([]*Evaluator, len(a.Curves))
	for i := range a.Curves {
		if a.used[i] {
			e := a.Evaluator(i)
			ev[i] = &e
		}
	}
	w := a.WorstYieldSite()
	sum := map[budgetKey]float64{}
	var shares []registration.Share
	var entries []budgetEntry
	for k := range a.Sites {
		shares = a.Yield.Budget(shares, k)
		entries = a.siteCouplingVariance(entries[:0], k, shares, ev[a.Sites[k].Section])
		for _, e := range entries {
			sum[e.key] += e.v
		}
		if k == w {
			out.WorstSite = a.Sites[k].Site.Name
			at := map[budgetKey]float64{}
			for _, e := range entries {
				at[e.key] += e.v
			}
			out.AtWorst = a.budgetShares(at, 1)
		}
	}
	out.Panel = a.budgetShares(sum, float64(len(a.Sites)))
	return out
}

// budgetShares turns variances (summed over n sites) into ranked shares.
func (a *Analysis) budgetShares(v map[budgetKey]float64, n float64) []CouplingShare {
	out := make([]CouplingShare, 0, len(v))
	keys := make([]budgetKey, 0, len(v))
	for k := range v {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool {
		if v[keys[i]] != v[keys[j]] {
			return v[keys[i]] > v[keys[j]]
		}
		if keys[i].source != keys[j].source {
			return keys[i].source < keys[j].source
		}
		if keys[i].c != keys[j].c {
			return keys[i].c < keys[j].c
		}
		return keys[i].t < keys[j].t
	})
	// The total in the keys' order: a map's order would change its last
	// bits from run to run.
	var tot float64
	for _, k := range keys {
		tot += v[k]
	}
	for _, k := range keys {
		if !(v[k] > 0) {
			continue // a term that moves nothing at these sites
		}
		s := CouplingShare{SDDB: math.Sqrt(v[k] / n)}
		if tot > 0 {
			s.Share = v[k] / tot
		}
		if k.source == 0 {
			s.Source, s.Name, s.Term = "registration", a.Model.Contributors[k.c].Name, "site_sigma"
			if k.t >= 0 {
				s.Term = k.t.String()
			}
		} else {
			t := &a.In.Process.Terms[k.c]
			s.Source, s.Name, s.Term = "variation", t.Name, t.Quantity.String()
		}
		out = append(out, s)
	}
	return out
}
