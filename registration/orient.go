package registration

import "math"

// OrientYield summarises the closed-form yield of a group of sites in one
// orientation.
type OrientYield struct {
	Mean  float64 // mean closed-form site yield
	Worst float64 // lowest closed-form site yield
	// RMSAcross is the root mean square across offset over the group,
	// √(mean(μ² + σ²)) with the design offset excluded, m.
	RMSAcross float64
}

// Orientation compares a group of sites (typically the couplers of one
// step-and-repeat array) as placed and with every part turned a quarter turn.
// Only the offset across the coupled lines moves the coupling, so turning the
// lines from u to ẑ×u swaps which relative displacement component they see:
// lines should run along the panel axis with the larger relative error, so
// that the smaller one is across them.
//
// The turn is evaluated with each coupler kept at its position; a real
// re-stepped array moves couplers within each part, which changes the
// position-dependent terms by at most the part size over the panel size.
type Orientation struct {
	Sites    []int // site indices of the group
	AsPlaced OrientYield
	Turned   OrientYield
}

// OrientMinGain is the default smallest rise in a group's mean site yield
// for which the study recommends a turn: half a percentage point, one coupler
// in two hundred. Turning an array re-steps the panel (a new panel plan, new
// artwork, often a new nesting of the parts), which a gain smaller than this
// does not pay for; a user with other costs gives another threshold.
const OrientMinGain = 0.005

// Gain returns the rise in mean site yield from turning the parts.
func (o Orientation) Gain() float64 { return o.Turned.Mean - o.AsPlaced.Mean }

// TurnThreshold returns the gain a turn must exceed: the larger of minGain
// (OrientMinGain when 0) and resolution, the Monte Carlo resolution of the
// group's mean site yield (GroupResolution; 0 when no Monte Carlo ran). A gain
// the run could not resolve could not be confirmed by it either, however the
// closed form ranks the two orientations.
func TurnThreshold(minGain, resolution float64) float64 {
	if minGain == 0 {
		minGain = OrientMinGain
	}
	return math.Max(minGain, resolution)
}

// Recommend reports whether turning the parts raises the group's mean site
// yield by more than TurnThreshold(minGain, resolution).
func (o Orientation) Recommend(minGain, resolution float64) bool {
	return o.Gain() > TurnThreshold(minGain, resolution)
}

// Better reports whether turning the parts raises the group's mean yield by
// more than OrientMinGain, with no Monte Carlo resolution to respect.
func (o Orientation) Better() bool { return o.Recommend(0, 0) }

// GroupResolution returns the Monte Carlo resolution of the mean site yield
// of a group of sites: twice its standard error (about 95 % two-sided
// confidence for a normal estimate). The sites of one panel draw the same
// panel terms, so their outcomes are correlated and the standard error of
// their mean is not the binomial one of independent sites; the triangle
// inequality for standard deviations, sd(Σ Xᵢ/n) ≤ Σ sd(Xᵢ)/n, bounds it by
// the mean of the sites' binomial errors √(pᵢ(1−pᵢ)/N), with equality when
// the sites are fully correlated. It is 0 for an empty group.
func (r *MCResult) GroupResolution(sites []int) float64 {
	if len(sites) == 0 {
		return 0
	}
	var s float64
	for _, i := range sites {
		s += r.SiteSE(i)
	}
	return 2 * s / float64(len(sites))
}

// Orient evaluates the group of sites as placed and turned a quarter turn.
func (y *Yield) Orient(sites []int) Orientation { return y.OrientBy(sites, nil) }

// OrientBy is Orient with prob giving site i's probability of being in spec
// for the sensitivity row row (its own or the turned one's); nil is the
// closed form of the across offset against the site's allowed interval. A
// caller whose coupling depends on more than the offset (process variation
// terms) passes its own evaluator, so that the study judges a site as the
// yield does.
func (y *Yield) OrientBy(sites []int, prob func(i int, row *Row) float64) Orientation {
	o := Orientation{Sites: sites}
	o.AsPlaced = y.orientYield(sites, false, prob)
	o.Turned = y.orientYield(sites, true, prob)
	return o
}

func (y *Yield) orientYield(sites []int, turned bool, prob func(i int, row *Row) float64) OrientYield {
	oy := OrientYield{Worst: 1}
	if len(sites) == 0 {
		return OrientYield{}
	}
	var sum, ms float64
	for _, i := range sites {
		s := y.Sites[i]
		r := y.Pairs[y.Pair[i]]
		row := y.Rows[i]
		if turned {
			row = r.Row(s.Pos, s.U.Perp())
		}
		var p float64
		if prob != nil {
			p = prob(i, &row)
		} else {
			p = r.Prob(&row, s.Nominal).Prob(s.Allowed)
		}
		sum += p
		oy.Worst = math.Min(oy.Worst, p)
		st := r.Stats(row)
		ms += st.MeanAcross*st.MeanAcross + st.SDAcross*st.SDAcross
	}
	n := float64(len(sites))
	oy.Mean = sum / n
	oy.RMSAcross = math.Sqrt(ms / n)
	return oy
}
