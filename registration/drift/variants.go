package drift

import "math"

// VariantComparison is a comparison of placement variants of one design (yield
// with several job files): one line per variant, each with its arrays.
type VariantComparison struct {
	// Trials is the number of Monte Carlo panels per variant; 0 means the
	// comparison is closed form only (site yields exact, part yields as
	// bounds).
	Trials int    `json:"trials"`
	Seed   uint64 `json:"seed"`
	// TurnMinGain is the orientation study's smallest gain worth a turn.
	TurnMinGain float64   `json:"turn_min_gain"`
	Variants    []Variant `json:"variants"`
}

// Variant is one variant's line of a VariantComparison. Monte Carlo figures are
// absent (nil) in a closed-form comparison.
type Variant struct {
	Name    string `json:"name"`
	Job     string `json:"job"`
	Sites   int    `json:"sites"`
	Parts   int    `json:"parts"` // products; coupon parts are not counted
	Coupons int    `json:"coupon_parts,omitempty"`
	// SiteYieldMean is the Monte Carlo mean site yield (nil in a closed-form
	// comparison); SiteYieldMeanClosed the closed-form one.
	SiteYieldMean       *float64 `json:"site_yield_mean"`
	SiteYieldMeanClosed float64  `json:"site_yield_mean_closed"`
	// PartYieldMean and GoodPartsPerPanel are the Monte Carlo part yield and
	// good parts per panel (nil in a closed-form comparison).
	PartYieldMean     *float64   `json:"part_yield_mean"`
	GoodPartsPerPanel *GoodParts `json:"good_parts_per_panel"`
	// PartYieldBounds and GoodPartsBounds bound the same from the
	// closed-form site yields alone (PartBounds).
	PartYieldBounds [2]float64   `json:"part_yield_bounds"`
	GoodPartsBounds [2]float64   `json:"good_parts_per_panel_bounds"`
	Arrays          []YieldArray `json:"arrays"`
	Orientation     []Orient     `json:"orientation,omitempty"`
	// Dominant is, with variation terms, the term of the largest share of
	// the coupling variance over the panel (the coupling budget's first).
	Dominant *CouplingShare `json:"dominant_term,omitempty"`
}

// PartBounds returns, per part instance, bounds on the probability that all
// its sites are in spec from their closed-form site yields pᵢ alone, whatever
// the correlation between them (the sites of a part share the panel's
// terms): the Fréchet bounds max(0, 1 − Σ(1 − pᵢ)) ≤ P(all) ≤ min pᵢ
// (Fréchet 1951, "Sur les tableaux de corrélation dont les marges sont
// données", Ann. Univ. Lyon A 14, 53–77; the lower one is Boole's
// inequality, the union bound on the failures). A part with no sites gets
// [1, 1].
func (a *Analysis) PartBounds() (lo, hi []float64) {
	n := len(a.In.Instances)
	lo, hi = make([]float64, n), make([]float64, n)
	miss := make([]float64, n)
	for k := range hi {
		hi[k] = 1
	}
	for i := range a.Sites {
		k := a.Sites[i].Site.Instance
		if k < 0 {
			continue
		}
		p := a.Sites[i].PInSpec
		miss[k] += 1 - p
		hi[k] = math.Min(hi[k], p)
	}
	for k := range lo {
		lo[k] = math.Max(0, 1-miss[k])
	}
	return lo, hi
}

// Variant returns the variant's line of a comparison, named name. With a
// Monte Carlo run res and its summary sum it carries the run's figures; with
// res and sum nil it is closed form only (arrays and orientation too).
// turnGain is the orientation study's threshold (0: the default).
func (a *Analysis) Variant(name string, sum *YieldSummary, turnGain float64) Variant {
	y := a.Yield
	v := Variant{Name: name, Job: a.In.Source, Sites: len(a.Sites), Parts: y.Products(), Coupons: len(y.Coupons),
		SiteYieldMeanClosed: a.MeanPInSpec()}
	if sum != nil {
		s, p, gp := sum.SiteYieldMean, sum.PartYieldMean, sum.GoodPartsPerPanel
		v.SiteYieldMean, v.PartYieldMean, v.GoodPartsPerPanel = &s, &p, &gp
		v.Arrays, v.Orientation = sum.Arrays, sum.Orientation
	} else {
		v.Arrays, v.Orientation = a.yieldArrays(nil), a.OrientationMC(nil, turnGain)
	}
	cb := (*CouplingBudget)(nil)
	if sum != nil {
		cb = sum.CouplingBudget
	} else {
		cb = a.couplingBudget()
	}
	if cb != nil && len(cb.Panel) > 0 {
		d := cb.Panel[0]
		v.Dominant = &d
	}
	// The panel's bounds are the sums over its product arrays: a sum of
	// bounds bounds the sum.
	for _, g := range v.Arrays {
		if g.Product {
			v.GoodPartsBounds[0] += g.GoodPartsBounds[0]
			v.GoodPartsBounds[1] += g.GoodPartsBounds[1]
		}
	}
	if v.Parts > 0 {
		v.PartYieldBounds = [2]float64{v.GoodPartsBounds[0] / float64(v.Parts), v.GoodPartsBounds[1] / float64(v.Parts)}
	}
	return v
}
