package drift

import (
	"encoding/csv"
	"github.com/regdrift/regdrift/panel/unit"
	"io"
	"sort"
	"strconv"

	"github.com/regdrift/regdrift/panel/section"
)

// SweepSummary is the result of a sweep (its JSON form): the solver's report
// of the curve, with a convergence report per point, and the spec.
type SweepSummary struct {
	section.Report
	DesignOffsetM  float64   `json:"design_offset_m"`
	SpecCouplingDB float64   `json:"spec_coupling_db"`
	SpecTolDB      float64   `json:"spec_tolerance_db"`
	LeavesSpecAtM  []float64 `json:"leaves_spec_at_m"`
	FromCache      bool      `json:"from_cache"`
	// With sensitivities: every point's derivatives (sensitivity.csv) and,
	// at the design offset, each parameter's coupling change over its
	// excursion, largest first (sensitivity.png).
	Sensitivities []SensitivityRow `json:"sensitivities,omitempty"`
	Impacts       []Impact         `json:"excursion_impacts,omitempty"`
}

// Sweep summarises the curve c of section s (hit: it came from the cache).
func Sweep(s *section.Section, c *section.Curve, hit bool) *SweepSummary {
	return &SweepSummary{Report: c.Report(), DesignOffsetM: s.NominalOffset(),
		SpecCouplingDB: s.Spec.Coupling, SpecTolDB: s.Spec.Tolerance,
		LeavesSpecAtM: SpecCrossings(c, s.Spec), FromCache: hit}
}

// crossingScanSteps is the number of steps the range is scanned in for sign
// changes of coupling minus a limit; a pair of crossings closer than
// range/2000 can be missed, far below any sweep's point spacing.
const crossingScanSteps = 2000

// SpecCrossings returns the offsets within the curve's range at which its
// coupling crosses a spec limit, found by scanning the interpolant and
// bisecting each sign change to 1e-12 m, in increasing order.
func SpecCrossings(c *section.Curve, sp section.Spec) []float64 {
	lo, hi := c.Range()
	var out []float64
	for _, lim := range []float64{sp.Coupling - sp.Tolerance, sp.Coupling + sp.Tolerance} {
		g := func(x float64) float64 { return c.Coupling(x) - lim }
		x0, g0 := lo, g(lo)
		for k := 1; k <= crossingScanSteps; k++ {
			x1 := lo + (hi-lo)*float64(k)/crossingScanSteps
			g1 := g(x1)
			if g0 == 0 {
				out = append(out, x0)
			} else if g0*g1 < 0 {
				a, b, ga := x0, x1, g0
				for b-a > 1e-12 {
					m := (a + b) / 2
					gm := g(m)
					if gm*ga <= 0 {
						b = m
					} else {
						a, ga = m, gm
					}
				}
				out = append(out, (a+b)/2)
			}
			x0, g0 = x1, g1
		}
	}
	sort.Float64s(out)
	return out
}

// WriteSweepCSV writes one row per solved offset of c (sweep.csv): the
// capacitance and inductance matrices, kC and kL, coupling and directivity,
// impedances, the modes' effective permittivities and the estimated error.
func WriteSweepCSV(w io.Writer, c *section.Curve, u unit.Output) error {
	cw := csv.NewWriter(w)
	header := []string{"offset [" + u.Length() + "]",
		"c11 [pF/m]", "c12 [pF/m]", "c22 [pF/m]", "c0_11 [pF/m]", "c0_12 [pF/m]", "c0_22 [pF/m]",
		"l11 [nH/m]", "l12 [nH/m]", "l22 [nH/m]", "k_c", "k_l",
		"coupling [dB]", "directivity [dB]", "z_line1 [ohm]", "z_line2 [ohm]", "z_even [ohm]", "z_odd [ohm]",
		"eps_eff_mode1", "eps_eff_mode2", "estimated_error"}
	if err := cw.Write(header); err != nil {
		return err
	}
	for _, p := range c.Points {
		ze, zo := "", ""
		if p.Symmetric {
			ze, zo = fixed(p.ZEven, 4), fixed(p.ZOdd, 4)
		}
		rec := []string{fixed(p.Offset/u.LengthSI(), 4),
			fixed(p.C[0][0]*1e12, 4), fixed(p.C[0][1]*1e12, 4), fixed(p.C[1][1]*1e12, 4),
			fixed(p.C0[0][0]*1e12, 4), fixed(p.C0[0][1]*1e12, 4), fixed(p.C0[1][1]*1e12, 4),
			fixed(p.L[0][0]*1e9, 4), fixed(p.L[0][1]*1e9, 4), fixed(p.L[1][1]*1e9, 4), fixed(p.KC, 6), fixed(p.KL, 6),
			fixed(p.CouplingDB, 4), fixed(p.DirectivityDB, 2), fixed(p.ZLine[0], 4), fixed(p.ZLine[1], 4), ze, zo,
			fixed(p.EpsEff[0], 5), fixed(p.EpsEff[1], 5), strconv.FormatFloat(p.Convergence.EstimatedError, 'e', 2, 64)}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
