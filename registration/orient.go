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

// OrientMinGain is the rise in mean site yield below which a turn is not
// worth it: one part per million, below any Monte Carlo resolution.
const OrientMinGain = 1e-6

// Gain returns the rise in mean site yield from turning the parts.
func (o Orientation) Gain() float64 { return o.Turned.Mean - o.AsPlaced.Mean }

// Better reports whether turning the parts raises the group's mean yield by
// more than OrientMinGain.
func (o Orientation) Better() bool { return o.Gain() > OrientMinGain }

// Orient evaluates the group of sites as placed and turned a quarter turn.
func (y *Yield) Orient(sites []int) Orientation {
	o := Orientation{Sites: sites}
	o.AsPlaced = y.orientYield(sites, false)
	o.Turned = y.orientYield(sites, true)
	return o
}

func (y *Yield) orientYield(sites []int, turned bool) OrientYield {
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
		p := r.Prob(&row, s.Nominal).Prob(s.Allowed)
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
