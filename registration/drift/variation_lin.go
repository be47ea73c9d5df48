package drift

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"
)

// LinearCheck is one direct solve against the first-order prediction: a
// site's section with every process term at its combined extreme, mean ±
// 3σ in the direction that moves the coupling that way (a uniform panel
// part at its box edge, procRow.extreme), solved at the site's mean
// offset.
type LinearCheck struct {
	Site    string `json:"site"`
	Section string `json:"section"`
	// LimitDB is the section's limit: 0.05 dB or a tenth of its spec
	// tolerance, whichever is smaller.
	LimitDB  float64 `json:"limit_db"`
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
	// AlongDB is a direct solve on the direction of steepest change
	// through the site's means at the same first-order deviation L as
	// the extreme (every term at μᵢ + (L/|a|)·σᵢ·uᵢ, variation_quad.go),
	// where the model takes the same value: ModelDB − AlongDB is the
	// model's error along the direction it fits, DirectDB − AlongDB the
	// part of the coupling across it (the curvature across u, which the
	// model takes by its mean only, SecondOrder.Across).
	AlongDB float64 `json:"along_db"`
}

// Linearity is how good the first-order process model is at the worst
// sites of a map.
type Linearity struct {
	Checks []LinearCheck `json:"checks"`
	// MaxErrorDB is the first-order model's largest error, MaxModelErrorDB
	// that of the model used, MaxAlongErrorDB the latter's along the
	// direction of steepest change (LinearCheck.AlongDB).
	MaxErrorDB      float64 `json:"max_error_db"`
	MaxModelErrorDB float64 `json:"max_model_error_db"`
	MaxAlongErrorDB float64 `json:"max_along_error_db"`
	// LimitDB is the smallest of the checks' limits: the model used errs
	// beyond a check's own limit (its section's) is what the report warns
	// about.
	LimitDB float64 `json:"limit_db"`
	Warning string  `json:"warning,omitempty"`
}

// LinearSigmas is the excursion of every term in a linearity check.
const LinearSigmas = 3

// linearLimit is the largest first-order error not warned about, dB.
const linearLimit = 0.05

// CheckLinearity solves, at the n sites of least margin of each section
// that has process terms (each section: a job's sections differ in how
// far their terms reach, and the worst sites of one would hide another),
// each section with all its terms at mean ± LinearSigmas·σ (each in the
// direction that moves the coupling the same way, so the two extremes of
// the coupling) at the site's mean offset, and compares the coupling with
// the first-order prediction c(δ) + Σ sᵢ(δ)·Δpᵢ and with the model the
// evaluator uses, which adds e₀ + (κ − 1)·L + ρ·L² with L = Σ sᵢ·(Δpᵢ − μᵢ)
// (variation_quad.go); the warning is on the latter, against each
// section's own limit. It keeps the report for Summary
// (MapSummary.Linearity). Without process terms it does nothing. The
// direct solves go through the cache like every curve.
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
	count := make([]int, len(a.In.Sections))
	worst, worstRatio := -1, 0.0 // the check furthest beyond its limit, relative to it
	for _, k := range a.Worst(len(a.Sites)) {
		r := &a.Sites[k]
		if count[r.Section] == n {
			continue
		}
		ev := a.Evaluator(r.Section)
		if !ev.hasProc() {
			continue
		}
		count[r.Section]++
		c := ev.Curve
		limit := math.Min(linearLimit, c.Section.Spec.Tolerance/10)
		lin.LimitDB = math.Min(lin.LimitDB, limit)
		var row procRow
		ev.Proc.row(&row, r.Site.Pos)
		e0, kappa, rho := ev.Proc.secondAt(r.Offset, row.second)
		// a, the first-order deviation's standard deviations per binding
		// (|a| its norm): the direction of steepest change at the site.
		nb := len(ev.Proc.Bind)
		a, sd := make([]float64, nb), make([]float64, nb)
		var na float64
		for b := range a {
			sd[b] = math.Sqrt(row.vars()[b])
			a[b] = ev.termSens(b, r.Offset) * sd[b]
			na += a[b] * a[b]
		}
		na = math.Sqrt(na)
		solve := func(dp []float64, what string) (float64, error) {
			v, err := directAt(ctx, c, ev.Proc.Bind, dp, r.Offset, &plain)
			if err != nil {
				return 0, fmt.Errorf("linearity check at site %q, %s: %w", r.Site.Name, what, err)
			}
			return v, nil
		}
		for _, z := range [2]float64{-LinearSigmas, LinearSigmas} {
			pred := c.Coupling(r.Offset)
			var l float64 // the first-order deviation from the site's means
			dp := make([]float64, nb)
			for b := range dp {
				sens := ev.termSens(b, r.Offset)
				dev := math.Copysign(row.extreme(b, LinearSigmas), z*sens)
				dp[b] = row.means()[b] + dev
				pred += sens * dp[b]
				l += sens * dev
			}
			d, err := solve(dp, fmt.Sprintf("process terms at %+g sigma", z))
			if err != nil {
				return err
			}
			along := d
			if na > 0 {
				for b := range dp {
					dp[b] = row.means()[b] + l/na*sd[b]*a[b]/na
				}
				if along, err = solve(dp, fmt.Sprintf("the steepest direction at %+g sigma", z)); err != nil {
					return err
				}
			}
			model := pred + e0 + (kappa-1)*l + rho*l*l
			lin.Checks = append(lin.Checks, LinearCheck{Site: r.Site.Name, Section: c.Section.Name, LimitDB: limit, OffsetM: r.Offset, Sigmas: z,
				LinearDB: pred, DirectDB: d, ErrorDB: pred - d, ModelDB: model, ModelErrorDB: model - d, AlongDB: along})
			lin.MaxErrorDB = math.Max(lin.MaxErrorDB, math.Abs(pred-d))
			lin.MaxModelErrorDB = math.Max(lin.MaxModelErrorDB, math.Abs(model-d))
			lin.MaxAlongErrorDB = math.Max(lin.MaxAlongErrorDB, math.Abs(model-along))
			// The check furthest beyond its own limit names the warning.
			if r := math.Abs(model-d) / limit; r > 1 && r > worstRatio {
				worst, worstRatio = len(lin.Checks)-1, r
			}
		}
	}
	if worst >= 0 {
		w := lin.Checks[worst]
		lin.Warning = fmt.Sprintf("the process model (first order with the second-order term along the steepest direction) of section %q errs by up to %.3f dB at the combined ±%g sigma extremes of its worst sites (above its %.3f dB), %.3f dB of it along the steepest direction and %.3f dB across it (the curvature across that direction, which the model takes by its mean only): the process terms are large enough that coupling, drift and yield near those extremes are approximate",
			w.Section, math.Abs(w.ModelErrorDB), float64(LinearSigmas), w.LimitDB, math.Abs(w.ModelDB-w.AlongDB), math.Abs(w.DirectDB-w.AlongDB))
	}
	a.linearity = lin
	return nil
}

// String is the one-line form of l for tables: per section checked, the
// largest error of the model used against its limit and of the first order.
func (l *Linearity) String() string {
	if l == nil || len(l.Checks) == 0 {
		return ""
	}
	type sec struct {
		name                         string
		sites                        int
		model, along, first, limitDB float64
	}
	var secs []*sec
	for _, c := range l.Checks {
		i := slices.IndexFunc(secs, func(s *sec) bool { return s.name == c.Section })
		if i < 0 {
			i = len(secs)
			secs = append(secs, &sec{name: c.Section, limitDB: c.LimitDB})
		}
		s := secs[i]
		s.sites++
		s.model = math.Max(s.model, math.Abs(c.ModelErrorDB))
		s.along = math.Max(s.along, math.Abs(c.ModelDB-c.AlongDB))
		s.first = math.Max(s.first, math.Abs(c.ErrorDB))
	}
	var b strings.Builder
	fmt.Fprintf(&b, "process model against direct solves at ±%g sigma of every term, at the worst sites:", float64(LinearSigmas))
	for i, s := range secs {
		if i > 0 {
			b.WriteString(";")
		}
		fmt.Fprintf(&b, " %q (%d sites) largest error %.4f dB with the second-order term (limit %.3f dB; %.4f dB along the steepest direction), %.4f dB first order", s.name, s.sites/2, s.model, s.limitDB, s.along, s.first)
	}
	return b.String()
}
