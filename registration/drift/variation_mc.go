package drift

import (
	"math"
	"math/rand/v2"

	"github.com/regdrift/regdrift/registration"
)

// procCheck decides in Monte Carlo whether a site with process terms meets
// its spec (registration.SiteChecker): its offset in the section's domain
// and c(δ) + Σ sᵢ(δ)·Δpᵢ inside the spec window, the same rule as the
// closed form (variation.go), with every term drawn as it is distributed:
// the panel part once per panel and term (uniform parts uniform), the
// per-site part once per site and term.
type procCheck struct {
	a     *Analysis
	ev    []Evaluator // per section
	sites []pcSite    // per site; ev nil when its section has no process terms
	// terms holds per section the process term of each binding.
	terms [][]int
}

// pcSite is the hot-loop form of a site with process terms: per binding
// of its section, the mean (panel mean and shape at the site) and the
// variance of the per-site part.
type pcSite struct {
	ev      *Evaluator
	section int
	mu, sv  []float64
}

var _ registration.SiteChecker = (*procCheck)(nil)

// newProcCheck returns the checker of a's sites with process terms, or nil
// when none has any.
func newProcCheck(a *Analysis) *procCheck {
	pc := &procCheck{a: a, ev: make([]Evaluator, len(a.Curves)), sites: make([]pcSite, len(a.Sites)), terms: make([][]int, len(a.Curves))}
	for i := range a.Curves {
		if a.used[i] {
			pc.ev[i] = a.Evaluator(i)
			if pc.ev[i].hasProc() {
				for _, bd := range pc.ev[i].Proc.Bind {
					pc.terms[i] = append(pc.terms[i], bd.Term)
				}
			}
		}
	}
	n := 0
	for k := range a.Sites {
		if pc.ev[a.Sites[k].Section].hasProc() {
			n += len(pc.ev[a.Sites[k].Section].Proc.Bind)
		}
	}
	if n == 0 {
		return nil
	}
	flat := make([]float64, 2*n)
	var row procRow
	for k := range a.Sites {
		r := &a.Sites[k]
		ev := &pc.ev[r.Section]
		if !ev.hasProc() {
			continue
		}
		nb := len(ev.Proc.Bind)
		ev.Proc.row(&row, r.Site.Pos)
		ps := pcSite{ev: ev, section: r.Section, mu: flat[:nb:nb], sv: flat[nb : 2*nb : 2*nb]}
		flat = flat[2*nb:]
		copy(ps.mu, row.means())
		for b, bd := range ev.Proc.Bind {
			sg := ev.Proc.Model.Terms[bd.Term].SiteSigma
			ps.sv[b] = sg * sg
		}
		pc.sites[k] = ps
	}
	return pc
}

func (pc *procCheck) Claims(i int) bool { return pc.sites[i].ev != nil }

func (pc *procCheck) NewWorker() registration.SiteCheckWorker {
	w := &procCheckWorker{pc: pc, dev: make([]float64, len(pc.a.In.Process.Terms)), devB: make([][]float64, len(pc.terms))}
	for i, ts := range pc.terms {
		w.devB[i] = make([]float64, len(ts))
	}
	return w
}

// procCheckWorker holds one goroutine's panel draws.
type procCheckWorker struct {
	pc   *procCheck
	dev  []float64   // per process term, this panel's deviation from its mean
	devB [][]float64 // the same per section and binding
}

// Panel draws every term's panel part: its deviation from the mean.
func (w *procCheckWorker) Panel(rng *rand.Rand) {
	for t := range w.dev {
		p := w.pc.a.In.Process.Terms[t].Panel
		switch p.Dist {
		case registration.Normal:
			w.dev[t] = p.Spread * rng.NormFloat64()
		case registration.Uniform:
			w.dev[t] = p.Spread * (2*rng.Float64() - 1)
		default:
			w.dev[t] = 0
		}
	}
	for i, ts := range w.pc.terms {
		for b, t := range ts {
			w.devB[i][b] = w.dev[t]
		}
	}
}

// InSpec draws site i's per-site parts and applies the rule. The per-site
// parts are independent normals, so their sum Σ sᵢ·σᵢ·Nᵢ is drawn as one
// normal of variance Σ sᵢ²·σᵢ²: the same distribution with one draw.
func (w *procCheckWorker) InSpec(i int, off float64, rng *rand.Rand) bool {
	ps := &w.pc.sites[i]
	ev := ps.ev
	m := ev.Curve.Coupling(off)
	r0, r1, f := ev.Proc.rows(off)
	mu, sv := ps.mu, ps.sv
	db := w.devB[ps.section][:len(mu)]
	r0, r1, sv = r0[:len(mu)], r1[:len(mu)], sv[:len(mu)]
	var v float64
	for b := range mu {
		s := r0[b] + f*(r1[b]-r0[b])
		m += s * (mu[b] + db[b])
		v += s * s * sv[b]
	}
	if v > 0 {
		m += math.Sqrt(v) * rng.NormFloat64()
	}
	sp := ev.Curve.Section.Spec
	return ev.Proc.Domain.Contains(off) && math.Abs(m-sp.Coupling) <= sp.Tolerance
}
