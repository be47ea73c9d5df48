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
	tab     *mcTab
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
	tabs := make([]*mcTab, len(a.Curves))
	for i := range pc.ev {
		if pc.ev[i].hasProc() {
			tabs[i] = newMCTab(&pc.ev[i])
		}
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
		ps := pcSite{ev: ev, tab: tabs[r.Section], section: r.Section, mu: flat[:nb:nb], sv: flat[nb : 2*nb : 2*nb]}
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
// parts are independent normals that enter linearly, so their sum
// Σ sᵢ·σᵢ·Nᵢ is drawn as one normal of variance Σ sᵢ²·σᵢ²: the same
// distribution with one draw. Inside the curve's range everything is read
// from the section's mcTab with one interval index; outside it (far
// tails) the site takes inSpecSlow, the curve itself.
func (w *procCheckWorker) InSpec(i int, off float64, rng *rand.Rand) bool {
	ps := &w.pc.sites[i]
	mt := ps.tab
	x := (off - mt.lo) / mt.step
	if !(x >= 0 && x <= mt.last) {
		return w.inSpecSlow(ps, off, rng)
	}
	m, v := mt.at(x, ps.mu, w.devB[ps.section])
	if mt.site {
		n := rng.NormFloat64()
		if v > 0 {
			m += math.Sqrt(v) * n
		}
	}
	return mt.domain.Contains(off) && math.Abs(m-mt.spec) <= mt.tol
}

// at returns the mean and the per-site variance of the coupling at table
// position x (0 ≤ x ≤ mt.last) for a site of per-binding means mu and a
// panel of deviations db: c(δ) + Σ sᵦ(δ)·(muᵦ + dbᵦ) and Σ σᵦ²·sᵦ(δ)².
func (mt *mcTab) at(x float64, mu, db []float64) (m, v float64) {
	j := int(x)
	if j >= mt.n {
		j = mt.n - 1
	}
	f := x - float64(j)
	nb := mt.nb
	row := mt.t[j*mt.stride : (j+1)*mt.stride]
	s, ds, k := row[:nb], row[nb:2*nb], row[2*nb:2*nb+mcTabExtra]
	mu, db = mu[:nb], db[:nb]
	// Two running sums per quantity break the chain of dependent
	// additions, which is what bounds the loop otherwise.
	var a0, a1, g0, g1 float64
	b := 0
	for ; b+1 < nb; b += 2 {
		w0, w1 := mu[b]+db[b], mu[b+1]+db[b+1]
		a0 += s[b] * w0
		a1 += s[b+1] * w1
		g0 += ds[b] * w0
		g1 += ds[b+1] * w1
	}
	if b < nb {
		wb := mu[b] + db[b]
		a0 += s[b] * wb
		g0 += ds[b] * wb
	}
	m = k[0] + f*(k[1]+f*(k[2]+f*k[3])) + (a0 + a1) + f*(g0+g1)
	v = k[4] + f*(2*k[5]+f*k[6])
	return m, v
}

// inSpecSlow is InSpec from the curve and Proc.rows directly, for offsets
// outside the table (the coupling extends along its end slopes there);
// it draws as InSpec does.
func (w *procCheckWorker) inSpecSlow(ps *pcSite, off float64, rng *rand.Rand) bool {
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
	if ps.tab.site {
		n := rng.NormFloat64()
		if v > 0 {
			m += math.Sqrt(v) * n
		}
	}
	sp := ev.Curve.Section.Spec
	return ev.Proc.Domain.Contains(off) && math.Abs(m-sp.Coupling) <= sp.Tolerance
}

// mcTabExtra is the number of values after the sensitivities in an mcTab
// row: the coupling cubic's four coefficients and the three of the
// per-site variance's quadratic.
const mcTabExtra = 7

// mcTab is one section's Monte Carlo table over the intervals of its Proc
// table (same offsets, same index): per interval j, starting at offset
// lo + j·step, with f the position in the interval (0 to 1),
//
//   - sᵦ and dsᵦ, so that sᵦ(f) = sᵦ + f·dsᵦ is Proc.rows' linear
//     interpolation of binding b's sensitivity, term by term;
//   - c₀…c₃, the coupling c₀ + c₁f + c₂f² + c₃f³: the curve's monotone
//     cubic (section.Curve.Coupling) is one cubic between its solved
//     offsets, and an interval of the table lies inside one of them when
//     the solved offsets are evenly spaced (every interval of the table is
//     a 1/procTabPerSpan part of one), so the four-point fit reproduces it
//     up to rounding (TestMCTabCoupling measures it);
//   - A, B, C, the per-site variance Σ σᵦ²·sᵦ(f)² = A + 2Bf + Cf²
//     expanded exactly (σᵦ is the term's, the same at every site).
type mcTab struct {
	nb, n, stride int
	lo, step      float64
	last          float64 // the largest x = (off − lo)/step in the table
	t             []float64
	site          bool // some bound term has a per-site part
	domain        registration.Interval
	spec, tol     float64
}

// newMCTab builds the table of section ev (which has process terms).
func newMCTab(ev *Evaluator) *mcTab {
	pr := ev.Proc
	nb := len(pr.Bind)
	mt := &mcTab{nb: nb, n: pr.tabRows - 1, stride: 2*nb + mcTabExtra, lo: pr.tabLo, step: pr.tabStep,
		domain: pr.Domain, spec: ev.Curve.Section.Spec.Coupling, tol: ev.Curve.Section.Spec.Tolerance}
	sv := make([]float64, nb)
	for b, bd := range pr.Bind {
		sg := pr.Model.Terms[bd.Term].SiteSigma
		sv[b] = sg * sg
		mt.site = mt.site || sv[b] > 0
	}
	if mt.n < 1 {
		// One solved offset: no interval, every site takes inSpecSlow.
		mt.n, mt.last = 1, -1
		return mt
	}
	lo, hi := ev.Curve.Curve.Range()
	mt.last = float64(mt.n)
	if x := (hi - lo) / mt.step; x < mt.last {
		mt.last = x
	}
	mt.t = make([]float64, mt.n*mt.stride)
	at := func(x float64) float64 { return ev.Curve.Curve.Coupling(math.Min(hi, lo+x*mt.step)) }
	for j := range mt.n {
		row := mt.t[j*mt.stride : (j+1)*mt.stride]
		r0, r1 := pr.tab[j*nb:(j+1)*nb], pr.tab[(j+1)*nb:(j+2)*nb]
		k := row[2*nb:]
		for b := range nb {
			row[b], row[nb+b] = r0[b], r1[b]-r0[b]
			k[4] += sv[b] * r0[b] * r0[b]
			k[5] += sv[b] * r0[b] * (r1[b] - r0[b])
			k[6] += sv[b] * (r1[b] - r0[b]) * (r1[b] - r0[b])
		}
		// The cubic through the curve at f = 0, 1/3, 2/3, 1 by Newton's
		// forward differences in u = 3f (Abramowitz & Stegun, Handbook of
		// Mathematical Functions, 25.2.4), expanded into powers of f.
		x := float64(j)
		y0, y1, y2, y3 := at(x), at(x+1.0/3), at(x+2.0/3), at(x+1)
		d1, d2, d3 := y1-y0, y2-2*y1+y0, y3-3*y2+3*y1-y0
		k[0] = y0
		k[1] = 3 * (d1 - d2/2 + d3/3)
		k[2] = 9 * (d2/2 - d3/2)
		k[3] = 27 * (d3 / 6)
	}
	return mt
}
