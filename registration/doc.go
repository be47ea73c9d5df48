// Package registration models layer-to-layer misregistration on a panel and
// turns it into the broadside offset at each coupler site.
//
// A Contributor is one source of misregistration (a core's movement through
// lamination, one imaging step, a lamination shift, an artwork compensation, a
// measured residual map) applied to the layers it names. Its displacement field
// about the datum p0 is the first-order affine field
//
//	d(p) = t + θ·ẑ×(p−p0) + diag(sx, sy)·(p−p0) + k·(y−y0)·x̂
//
// with the six terms offset_x, offset_y (t), rotation (θ), scale_x, scale_y (s)
// and skew (k). Each term is fixed, normal {mean, sigma} or uniform
// {mean, half_width}; a contributor may add an isotropic per-site random sigma
// and a measured residual grid (bilinear). A layer's displacement is the sum of
// the contributors that name it.
//
// The model is first order. The exact rotation moves a point by
// (R(θ)−I)(p−p0), whose second-order part is θ²·r/2: at 1 mrad and r = 15 in
// (the corner of an 18 x 24 in panel) that is 0.19 µm, below 0.5 µm for any
// rotation under 1 mrad; the scale terms are exactly linear. The linear model
// is therefore exact enough for registration budgets of a few micrometres.
//
// The broadside offset at a site whose coupled lines run along the unit vector
// u, with normal n = ẑ×u, between upper trace layer A and lower trace layer B is
//
//	δ = n·(d_A(p) − d_B(p)) + δ_design
//
// and the along-line part is u·(d_A − d_B). δ is linear in every term: a
// Relative collapses the contributors of a layer pair into six relative terms
// (each contributor enters with +1 if it names A only, −1 if it names B only and
// 0 if it names both, so that a contributor shared by the two layers — the
// movement of the core that carries both traces — cancels exactly), and a Row
// holds the geometric sensitivities of δ to those six terms at one site. Mean
// and variance at every site then follow in closed form; Sample draws the same
// terms for Monte Carlo.
package registration
