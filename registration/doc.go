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
//
// # Yield
//
// Yield inverts a section's coupling curve against its spec to the interval of
// allowed offsets (SpecInterval; it may be asymmetric about the design offset,
// or empty when the design itself is out of spec) and gives each site's
// probability of landing inside it in closed form (SiteProb: normal terms and
// site_sigma exactly, the two widest uniform terms exactly, further ones by
// their variance). MonteCarlo draws every term once per panel and site_sigma
// once per site, in fixed blocks of panels with one Stream per block, so
// that a seed gives the same counts whatever the number of workers, in memory
// that does not grow with the number of trials. Budget splits each site's
// offset variance among the contributor terms.
//
// # Fitting and compensation
//
// ReadTargets reads measured registration targets; Fit estimates each panel's
// and layer's affine (or similarity, or translation) terms by least squares
// with standard errors from the residual variance and the normal matrix, and
// optionally down-weights mis-measured targets (iteratively reweighted Huber or
// Tukey). LotStats turns the fits into a lot's mean and spread per term, ready
// to be written as contributors. Compensate chooses per-layer artwork scale
// changes that maximise the expected site yield, each site judged against its
// own allowed interval by SiteProb.Prob (or minimise the worst or rms share of
// each site's window used); only the scale difference across the coupled lines
// moves a broadside offset, so among equally good answers it takes the
// smallest change from the applied artwork (Applied), with the drill budget
// and the artwork bound as constraints.
package registration
