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
	// ModelDB is the prediction of the model the evaluator uses (first
	// order plus the second-order term, variation_quad.go), ModelErrorDB
	// it minus DirectDB.
	ModelDB      float64 `json:"model_db"`
	ModelErrorDB float64 `json:"model_error_db"`
}

// Linearity is how good the first-order process model is at the worst
// sites of a map.
type Linearity struct {
	Checks []LinearCheck `json:"checks"`
	// MaxErrorDB is the first-order model's largest error, MaxModelErrorDB
	// that of the model used.
	MaxErrorDB      float64 `json:"max_error_db"`
	MaxModelErrorDB float64 `json:"max_model_error_db"`
	// LimitDB is the error of the model used above which the report warns:
	// 0.05 dB or a tenth of the tightest spec tolerance checked, whichever
	// is smaller.
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
// coupling with the first-order prediction c(δ) + Σ sᵢ(δ)·Δpᵢ and with the
// model the evaluator uses, which adds e₀ + (κ − 1)·L + ρ·L² with
// L = Σ sᵢ·(Δpᵢ − μᵢ) (variation_quad.go); the warning is on the latter.
// It keeps the report for Summary (MapSummary.Linearity). Without process
// terms it does nothing. The direct solves go through the cache like every
// curve.
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
		dps := make([]float64, len(ev.Proc.Bind))
		e0, kappa, rho := ev.Proc.secondAt(r.Offset)
		for _, z := range [2]float64{-LinearSigmas, LinearSigmas} {
			s := c.Section.Perturbed(params[0], 0) // a copy
			pred := c.Coupling(r.Offset)
			var l float64 // the first-order deviation from the site's means
			for b, bd := range ev.Proc.Bind {
				sens := ev.termSens(b, r.Offset)
				dev := z * math.Copysign(math.Sqrt(row.vars()[b]), sens)
				dp := row.means()[b] + dev
				dps[b] = dp
				pred += sens * dp
				l += sens * dev
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
			model := pred + e0 + (kappa-1)*l + rho*l*l
			lin.Checks = append(lin.Checks, LinearCheck{Site: r.Site.Name, OffsetM: r.Offset, Sigmas: z, LinearDB: pred, DirectDB: d, ErrorDB: pred - d,
				ModelDB: model, ModelErrorDB: model - d})
			lin.MaxErrorDB = math.Max(lin.MaxErrorDB, math.Abs(pred-d))
			lin.MaxModelErrorDB = math.Max(lin.MaxModelErrorDB, math.Abs(model-d))
		}
	}
	if lin.MaxModelErrorDB > lin.LimitDB {
		lin.Warning = fmt.Sprintf("the process model (first order with the second-order term along the steepest direction) errs by up to %.3f dB at the combined ±%g sigma extremes of the worst sites (above %.3f dB): the process terms are large enough that coupling, drift and yield near those extremes are approximate",
			lin.MaxModelErrorDB, float64(LinearSigmas), lin.LimitDB)
	}
	a.linearity = lin
	return nil
}

// String is the one-line form of l for tables.
func (l *Linearity) String() string {
	if l == nil || len(l.Checks) == 0 {
		return ""
	}
	return fmt.Sprintf("process model against direct solves at ±%g sigma of every term, at the %d worst site(s): largest error %.4f dB with the second-order term (limit %.3f dB), %.4f dB first order",
		float64(LinearSigmas), len(l.Checks)/2, l.MaxModelErrorDB, l.LimitDB, l.MaxErrorDB)
}
