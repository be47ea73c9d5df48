package registration

import (
	"math/rand/v2"
)

// Draw is one panel's realisation of every contributor's terms.
type Draw [][NumTerms]float64

// NewDraw returns storage for a draw of m.
func (m *Model) NewDraw() Draw { return make(Draw, len(m.Contributors)) }

// Sample fills d with one panel's terms: each term drawn once from its
// distribution with rng. It does not allocate.
func (m *Model) Sample(rng *rand.Rand, d Draw) {
	for i := range m.Contributors {
		c := &m.Contributors[i]
		for k, t := range c.Terms {
			switch t.Dist {
			case Normal:
				d[i][k] = t.Mean + t.Spread*rng.NormFloat64()
			case Uniform:
				d[i][k] = t.Mean + t.Spread*(2*rng.Float64()-1)
			default:
				d[i][k] = t.Mean
			}
		}
	}
}

// Collapse returns the six relative terms of draw d for the pair of r.
func (r *Relative) Collapse(d Draw) [NumTerms]float64 {
	var v [NumTerms]float64
	for i, s := range r.Sign {
		if s == 0 {
			continue
		}
		for k := range v {
			v[k] += s * d[i][k]
		}
	}
	return v
}

// AcrossAt returns the across offset of row for relative terms v, design offset
// and site noise excluded.
func (row *Row) AcrossAt(v *[NumTerms]float64) float64 {
	return row.Across[0]*v[0] + row.Across[1]*v[1] + row.Across[2]*v[2] +
		row.Across[3]*v[3] + row.Across[4]*v[4] + row.Across[5]*v[5] + row.ConstAcross
}
