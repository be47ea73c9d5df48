package drift

import (
	"context"
	"fmt"
	"math"
)

// LinearCheck is one direct solve against the first-order prediction: a
// site's section with every process term at its combined extreme, mean ±
// 3σ in the direction that moves the coupling that way, solved at the
// site's mean offset.
type LinearCheck struct {
	Site     string  `json:"site"`
	OffsetM  float64 `json:"offset_m"`
	Sigmas   float64 `json:"sigmas"` // −3 or +3
	LinearDB float64 `json:"linear_db"`
	DirectDB float64 `json:"direct_db"`
	ErrorDB  float64 `json:"error_db"` // linear minus direct
}

// Linearity is how good the first-order process model is at the worst
// sites of a map.
type Linearity struct {
	Checks     []LinearCheck `json:"checks"`
	MaxErrorDB float64       `json:"max_error_db"`
	// LimitDB is the error above which the report warns: 0.05 dB or a
	// tenth of the tightest spec tolerance checked, whichever is smaller.
	LimitDB float64 `json:"limit_db"`
	Warning string  `json:"warning,omitempty"`
}

// LinearSigmas is the excursion of every term in a linearity check.
const LinearSigmas = 3

// linearLimit is the largest first-order error not warned about, dB.
const linearLimit = 0.05

// CheckLinearity solves, at the n sites of least margin that have process
// terms, each section with all its terms at mean ± LinearSigmas·σ (each in
// the direction that moves the coupling the same way, so the two
// extremes of the coupling) at the site's mean offset, and compares the
// coupling with the first-order prediction c(δ) + Σ sᵢ(δ)·Δpᵢ. It keeps the
// report for Summary (MapSummary.Linearity). Without process terms it does
// nothing. The direct solves go through the cache like every curve.
func (a *Analysis) CheckLinearity(ctx context.Context, set *Settings, n int) error {
	a.linearity = nil
	if a.In.Process.Empty() {
		return nil
	}
	plain := Settings{}
	if set != nil {
		plain = *set
	}
	plain.Sensitivities = false
	lin := &Linearity{LimitDB: linearLimit}
	count := 0
	for _, k := range a.Worst(len(a.Sites)) {
		if count == n {
			break
		}
		r := &a.Sites[k]
		ev := a.Evaluator(r.Section)
		if !ev.hasProc() {
			continue
		}
		count++
		c := ev.Curve
		lin.LimitDB = math.Min(lin.LimitDB, c.Section.Spec.Tolerance/10)
		var row procRow
		ev.Proc.row(&row, r.Site.Pos)
		params := c.Curve.Params()
		for _, z := range [2]float64{-LinearSigmas, LinearSigmas} {
			s := c.Section.Perturbed(params[0], 0) // a copy
			pred := c.Coupling(r.Offset)
			for b, bd := range ev.Proc.Bind {
				sens := ev.termSens(b, r.Offset)
				dp := row.means()[b] + z*math.Copysign(math.Sqrt(row.vars()[b]), sens)
				pred += sens * dp
				for _, pk := range bd.Params {
					s = s.Perturbed(params[pk], dp)
				}
			}
			s.Length = c.Curve.Length // the sensitivities hold the coupled length fixed
			sc, _, err := SolveAt(ctx, s, []float64{r.Offset, r.Offset + SpanStep}, &plain)
			if err != nil {
				return fmt.Errorf("linearity check at site %q, process terms at %+g sigma: %w", r.Site.Name, z, err)
			}
			d := sc.Coupling(r.Offset)
			lin.Checks = append(lin.Checks, LinearCheck{Site: r.Site.Name, OffsetM: r.Offset, Sigmas: z, LinearDB: pred, DirectDB: d, ErrorDB: pred - d})
			lin.MaxErrorDB = math.Max(lin.MaxErrorDB, math.Abs(pred-d))
		}
	}
	if lin.MaxErrorDB > lin.LimitDB {
		lin.Warning = fmt.Sprintf("the first-order process model errs by up to %.3f dB at the combined ±%g sigma extremes of the worst sites (above %.3f dB): the process terms are large enough that coupling, drift and yield near those extremes are approximate",
			lin.MaxErrorDB, float64(LinearSigmas), lin.LimitDB)
	}
	a.linearity = lin
	return nil
}

// String is the one-line form of l for tables.
func (l *Linearity) String() string {
	if l == nil || len(l.Checks) == 0 {
		return ""
	}
	return fmt.Sprintf("first-order process model against direct solves at ±%g sigma of every term, at the %d worst site(s): largest error %.4f dB (limit %.3f dB)",
		float64(LinearSigmas), len(l.Checks)/2, l.MaxErrorDB, l.LimitDB)
}
