package drift

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// ReachSigmas and ReachMargin say how far the solved curve reaches beyond
// a site's mean offset: ReachMargin × (|mean| + ReachSigmas·σ), σ the full
// standard deviation of the across offset. The map reads the coupling at
// mean ± 3σ and the worst drift within it; the yield needs only the allowed
// interval, whose ends the span doubling brings inside the range wherever the
// sites reach (offsets beyond an end are out of spec whatever the coupling
// does there). The tenth to spare keeps ±3σ off the end points of the
// monotone cubic.
const (
	ReachSigmas = 3
	ReachMargin = 1.1
)

// YieldSigmas is how far beyond a site's mean, in standard deviations of its
// normal part (plus its uniform parts' half-widths), an allowed interval cut
// at the end of the solved offsets draws a warning: a normal tail beyond 8σ
// holds Φ(−8) = ½·erfc(8/√2) = 6.2e-16 (Abramowitz & Stegun 26.2.29), below
// anything a yield can show.
const YieldSigmas = 8

// SpanStep is the step the half-span of a curve is rounded up to: the point
// spacing of section.DefaultOffsets, so that every span up to 15 mil solves a
// subset of one grid of offsets and near-equal models share a cached curve.
const SpanStep = 0.5 * unit.Mil

// MaxDoublings bounds how often the span is doubled while the coupling is
// still inside a spec window at an end of the range.
const MaxDoublings = 4

// SiteReach returns how far from the design offset the across offset of a
// site with statistics st (design offset excluded) reaches:
// ReachMargin × (|mean| + ReachSigmas·σ).
func SiteReach(st registration.Stats) float64 {
	return ReachMargin * (math.Abs(st.MeanAcross) + ReachSigmas*st.SDAcross)
}

// Curve is the solved coupling curve of one section and what its spec makes
// of it. It is the only source of coupling, allowed interval and design
// coupling for every study of the section.
type Curve struct {
	Section   *section.Section
	Curve     *section.Curve
	FromCache bool
	// Nominal is the coupling at the design offset, dB.
	Nominal float64
	// DesignInSpec reports whether Nominal is inside the spec window.
	DesignInSpec bool
	// Allowed is the connected interval of across offsets (design offset
	// included) about the design offset over which the coupling stays in
	// spec; empty when the design is out of spec.
	Allowed registration.Interval
	// Limits says which spec limit each end of Allowed meets, and whether the
	// end is cut by the range of the solved offsets.
	Limits registration.SpecLimits
	// Retuned is the allowed interval against the spec window re-centred on
	// Nominal (the window a design tuned to its own coupling would have).
	Retuned registration.Interval
	// Second is the second-order term of the process model fitted for the
	// sites that use the curve (FitSecondOrder, variation_quad.go); nil
	// without process terms.
	Second *SecondOrder
}

// Coupling returns the coupling in dB at the across offset off (design
// offset included).
func (c *Curve) Coupling(off float64) float64 { return c.Curve.Coupling(off) }

// InSpec reports whether a site whose mean across offset is off is in spec:
// off lies in the allowed interval.
func (c *Curve) InSpec(off float64) bool { return c.Allowed.Contains(off) }

// Margin returns the margin in dB of a site whose mean across offset is off
// and whose coupling there is cp: the distance to the nearer spec limit,
// positive in spec (InSpec) and negative out of it, also where the coupling
// has re-entered the spec window away from the design offset.
func (c *Curve) Margin(off, cp float64) float64 {
	sp := c.Section.Spec
	m := sp.Tolerance - math.Abs(cp-sp.Coupling)
	if !c.InSpec(off) {
		return -math.Abs(m)
	}
	return m
}

// roundSpan rounds a half-span up to a multiple of SpanStep.
func roundSpan(span float64) float64 {
	if !(span > 0) {
		return 0
	}
	return SpanStep * math.Ceil(span/SpanStep*(1-1e-12))
}

// SolveSection solves (or reads from the cache) the curve of s over at least
// ±reach about its design offset (rounded up to SpanStep, at least the ±5 mil
// of section.DefaultOffsets), doubling the span while the coupling is still
// inside the spec window, or inside the window re-centred on the design's
// coupling, at an end of the range (at most MaxDoublings times, and not once
// the range stops growing). A solver error is returned wrapped, naming the
// section; a *section.FieldError in it means the section itself is bad input.
func SolveSection(ctx context.Context, s *section.Section, reach float64, set *Settings) (*Curve, error) {
	return solveSection(ctx, s, reach, set, nil)
}

// solveSection is SolveSection, doubling the span also while wider reports
// that the range cuts a wider window than the spec's (the offset domain of
// the process terms, SolveCurves): one doubling rule, asked of wider only
// once the spec windows are inside the range. wider may fill in the curve
// it is given (its second-order term); nil asks nothing more.
func solveSection(ctx context.Context, s *section.Section, reach float64, set *Settings, wider func(*Curve) (bool, error)) (*Curve, error) {
	nom := s.NominalOffset()
	dir, noCache := set.cache()
	span := roundSpan(reach)
	var lastLo, lastHi float64
	for k := 0; ; k++ {
		sc, hit, err := section.CachedSweep(ctx, s, section.DefaultOffsets(s, span), set.Solver(), dir, noCache)
		if err != nil {
			return nil, fmt.Errorf("section %q: %w", s.Name, err)
		}
		set.warnCache(sc)
		lo, hi := sc.Range()
		c := &Curve{Section: s, Curve: sc, FromCache: hit, Nominal: sc.Coupling(nom)}
		iv, lim, err := registration.SpecInterval(sc.Coupling, lo, hi, nom, s.Spec.Coupling, s.Spec.Tolerance)
		switch {
		case errors.Is(err, registration.ErrNominalOutOfSpec):
			c.Allowed = registration.EmptyInterval()
		case err != nil:
			return nil, fmt.Errorf("section %q: %w", s.Name, err)
		default:
			c.Allowed, c.Limits, c.DesignInSpec = iv, lim, true
		}
		riv, rlim, err := registration.SpecInterval(sc.Coupling, lo, hi, nom, c.Nominal, s.Spec.Tolerance)
		if err != nil {
			return nil, fmt.Errorf("section %q: %w", s.Name, err)
		}
		c.Retuned = riv
		clipped := lim.Clipped[0] || lim.Clipped[1] || rlim.Clipped[0] || rlim.Clipped[1]
		grew := k == 0 || lo < lastLo || hi > lastHi
		if k == MaxDoublings || !grew {
			return c, nil
		}
		if !clipped && wider != nil {
			if clipped, err = wider(c); err != nil {
				return nil, err
			}
		}
		if !clipped {
			return c, nil
		}
		lastLo, lastHi = lo, hi
		span = 2 * math.Max(hi-nom, nom-lo)
	}
}

// SolveAt solves (or reads from the cache) the curve of s at the given
// offsets (design offset included), for a sweep over offsets of the caller's
// choosing; hit reports a cache hit.
func SolveAt(ctx context.Context, s *section.Section, offsets []float64, set *Settings) (c *section.Curve, hit bool, err error) {
	dir, noCache := set.cache()
	c, hit, err = section.CachedSweep(ctx, s, offsets, set.Solver(), dir, noCache)
	set.warnCache(c)
	return c, hit, err
}
