package registration

import (
	"math"

	"github.com/regdrift/regdrift/panel"
)

// Relative is the displacement of an upper trace layer relative to a lower one,
// d_A − d_B, collapsed from the model's contributors.
type Relative struct {
	Upper, Lower string
	Datum        panel.Vec
	// Sign is, per contributor of the model, its weight on Upper minus its
	// weight on Lower (Contributor.Weight): +1 if it names Upper only, −1 if
	// it names Lower only and 0 if it moves both alike or names neither.
	Sign []float64
	// Mean and Var are the mean and variance of the six relative terms: sums over
	// contributors of Sign·mean and Sign²·variance (terms are independent).
	Mean, Var [NumTerms]float64
	// SiteVar is the per-site random variance per axis, Σ Sign²·site_sigma².
	SiteVar float64

	model *Model
}

// Relative collapses the model for the layer pair (upper, lower).
func (m *Model) Relative(upper, lower string) *Relative {
	r := &Relative{Upper: upper, Lower: lower, Datum: m.Datum, Sign: make([]float64, len(m.Contributors)), model: m}
	for i := range m.Contributors {
		c := &m.Contributors[i]
		s := c.Weight(upper) - c.Weight(lower)
		r.Sign[i] = s
		if s == 0 {
			continue
		}
		for k := range c.Terms {
			r.Mean[k] += s * c.Terms[k].Mean
			r.Var[k] += s * s * c.Terms[k].Variance()
		}
		r.SiteVar += s * s * c.SiteSigma * c.SiteSigma
	}
	return r
}

// Model returns the model r was collapsed from.
func (r *Relative) Model() *Model { return r.model }

// Row holds what the offsets at one site depend on: δ_across = Across·v +
// ConstAcross and δ_along = Along·v + ConstAlong for relative terms v, plus an
// independent per-site random part of variance SiteVar on each.
type Row struct {
	Across, Along [NumTerms]float64
	// ConstAcross and ConstAlong hold the residual grids' relative displacement
	// projected on n and u; the design offset is not included.
	ConstAcross, ConstAlong float64
}

// Row returns the sensitivity row of a site at p whose coupled lines run along
// the unit vector u.
func (r *Relative) Row(p, u panel.Vec) Row {
	n := u.Perp()
	b := Basis(p, r.Datum)
	var row Row
	for k := range b {
		row.Across[k] = n.Dot(b[k])
		row.Along[k] = u.Dot(b[k])
	}
	for i := range r.model.Contributors {
		c := &r.model.Contributors[i]
		if r.Sign[i] == 0 || c.Residual == nil {
			continue
		}
		d := c.Residual.At(p)
		row.ConstAcross += r.Sign[i] * n.Dot(d)
		row.ConstAlong += r.Sign[i] * u.Dot(d)
	}
	return row
}

// Rows returns the rows of the given sites.
func (r *Relative) Rows(sites []panel.Site) []Row {
	rows := make([]Row, len(sites))
	for i, s := range sites {
		rows[i] = r.Row(s.Pos, s.U)
	}
	return rows
}

// Stats is the closed-form distribution of the offsets at one site.
type Stats struct {
	MeanAcross, SDAcross float64 // design offset excluded
	MeanAlong, SDAlong   float64
}

// Stats returns the mean and standard deviation of the across and along
// offsets for row: the mean is linear in the term means, the variance is
// Σ_k row_k²·Var_k + SiteVar because the terms are independent.
func (r *Relative) Stats(row Row) Stats {
	var s Stats
	var va, vu float64
	for k := range row.Across {
		s.MeanAcross += row.Across[k] * r.Mean[k]
		s.MeanAlong += row.Along[k] * r.Mean[k]
		va += row.Across[k] * row.Across[k] * r.Var[k]
		vu += row.Along[k] * row.Along[k] * r.Var[k]
	}
	s.MeanAcross += row.ConstAcross
	s.MeanAlong += row.ConstAlong
	s.SDAcross = math.Sqrt(va + r.SiteVar)
	s.SDAlong = math.Sqrt(vu + r.SiteVar)
	return s
}

// Share is one contributor term's part of the across-offset variance at a site.
type Share struct {
	Contributor int      // index into Model.Contributors
	Term        TermKind // or -1 for the contributor's site_sigma
	Variance    float64  // m²
}

// Budget returns, for row, the across-offset variance caused by each
// contributor term and each site_sigma with a non-zero share; the shares sum to
// SDAcross². dst is reused if it has capacity.
func (r *Relative) Budget(dst []Share, row Row) []Share {
	dst = dst[:0]
	for i := range r.model.Contributors {
		if r.Sign[i] == 0 {
			continue
		}
		c := &r.model.Contributors[i]
		s2 := r.Sign[i] * r.Sign[i]
		for k := range c.Terms {
			if v := s2 * row.Across[k] * row.Across[k] * c.Terms[k].Variance(); v > 0 {
				dst = append(dst, Share{i, TermKind(k), v})
			}
		}
		if c.SiteSigma > 0 {
			dst = append(dst, Share{i, -1, s2 * c.SiteSigma * c.SiteSigma})
		}
	}
	return dst
}
