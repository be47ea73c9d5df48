// Package drift joins a panel's registration statistics to the coupling
// curves of its cross-sections: for every coupler site it gives the coupling
// at the mean offset, the drift from the design coupling, the margin to the
// spec, the worst drift within ±3σ and the probability of meeting the spec;
// over the panel it gives the map summary, the yield study, the offset
// tolerance for the drawing and the comparison before and after artwork
// compensation, each with its JSON form and CSV writer.
//
// It takes the sites, the sections and a registration model (an Input), not a
// job file, and solver settings (Settings, zero meaning default).
//
// # One rule for each concept
//
// How far to solve. Each section's curve is solved once, over the offsets
// that SolveSection chooses: at least the reach of every site that uses it
// (SiteReach: its mean offset from the design ± 3σ, with a tenth to spare,
// which the map reads), and never less than the ±5 mil of
// section.DefaultOffsets, rounded up to SpanStep so that near-equal models
// share one cached curve; the span is then doubled, at most MaxDoublings
// times, while the coupling is still inside the spec window at an end of the
// range, for the spec and for the spec re-centred on the design's own
// coupling. The doubling brings the ends of the allowed interval inside the
// range, so the yield integral over it is exact however far the tails reach;
// Warnings says when an end stays cut within YieldSigmas of a site. With
// process terms the window widened by the sites' process reach (the offset
// domain, bindProc) is one more window the same doubling holds, where a
// site reaches the cut end (SolveCurves). Map,
// yield, tolerance, comparison and sweep read the same curve (the same cache
// key).
//
// One evaluator. Evaluator turns a site's sensitivity row into every
// quantity (Eval); Evaluator.Value computes one quantity by the same steps,
// for the per-pixel fields of the figures. With process variation terms
// (Input.Process, package registration/process) the same evaluator adds
// Σ sᵢ(δ)·Δpᵢ to the curve, first order in the terms and exact in the
// offset, with a second-order term along the direction of steepest change
// fitted by direct solves, following each site's own means
// (variation_quad.go), and P(in spec) integrates
// the offset (variation.go); without them every number is the
// registration-only one.
//
// In spec. A site is in spec when its mean across offset lies in the allowed
// interval: the connected interval of offsets about the design offset over
// which the coupling stays in the spec window (registration.SpecInterval).
// Its margin is the distance in dB from the coupling at the mean to the
// nearer spec limit, positive in spec and negative out of it — also where the
// coupling re-enters the window away from the design offset, since a site
// there has passed out of spec on the way. The yield is the probability of the
// same interval.
//
// Direction. Couplers are grouped by section and line direction in whole
// degrees modulo 360: a half turn reverses the sign of the across offset, so
// an offset coupler turned 180° sees the opposite misregistration and is a
// different kind (Dominant).
package drift
