package drift

import (
	"math"
	"math/rand/v2"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
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
	tabs  []*mcTab    // per section; nil without process terms
	sites []pcSite    // per site
	// terms holds per section the process term of each binding.
	terms [][]int
}

// pcSite is the hot-loop form of a site with process terms: its
// section's table and the value at the site of each of the section's
// shape groups (mcTab). The values of all sites are one array, so that
// the loop over the sites reads them in order.
type pcSite struct {
	tab *mcTab // nil when the site's section has no process terms
	phi []float64
}

var _ registration.SiteChecker = (*procCheck)(nil)

// newProcCheck returns the checker of a's sites with process terms, or nil
// when none has any.
func newProcCheck(a *Analysis) *procCheck {
	pc := &procCheck{a: a, ev: make([]Evaluator, len(a.Curves)), tabs: make([]*mcTab, len(a.Curves)),
		sites: make([]pcSite, len(a.Sites)), terms: make([][]int, len(a.Curves))}
	for i := range a.Curves {
		if a.used[i] {
			pc.ev[i] = a.Evaluator(i)
			if pc.ev[i].hasProc() {
				for _, bd := range pc.ev[i].Proc.Bind {
					pc.terms[i] = append(pc.terms[i], bd.Term)
				}
				pc.tabs[i] = newMCTab(&pc.ev[i], i)
			}
		}
	}
	n, any := 0, false
	for k := range a.Sites {
		if mt := pc.tabs[a.Sites[k].Section]; mt != nil {
			n += len(mt.groups)
			any = true
		}
	}
	if !any {
		return nil
	}
	flat := make([]float64, n)
	size := a.In.Process.Size
	for k := range a.Sites {
		r := &a.Sites[k]
		mt := pc.tabs[r.Section]
		if mt == nil {
			continue
		}
		ng := len(mt.groups)
		ps := pcSite{tab: mt, phi: flat[:ng:ng]}
		flat = flat[ng:]
		for g := range mt.groups {
			ps.phi[g] = mt.groups[g].At(r.Site.Pos, size)
		}
		pc.sites[k] = ps
	}
	return pc
}

func (pc *procCheck) Claims(i int) bool { return pc.sites[i].tab != nil }

func (pc *procCheck) NewWorker() registration.SiteCheckWorker {
	w := &procCheckWorker{pc: pc, dev: make([]float64, len(pc.a.In.Process.Terms)), sec: make([]pcPanel, len(pc.terms))}
	for i, mt := range pc.tabs {
		if mt != nil {
			w.sec[i] = pcPanel{w: make([]float64, mt.nb), k: make([]float64, 2*mt.n), stamp: make([]int64, mt.n)}
		}
	}
	return w
}

// procCheckWorker holds one goroutine's panel draws.
type procCheckWorker struct {
	pc     *procCheck
	dev    []float64 // per process term, this panel's deviation from its mean
	sec    []pcPanel // per section
	serial int64     // panels drawn so far
}

// pcPanel is one section's panel part in a worker: per binding the panel
// mean plus this panel's deviation, and per table interval the flat part
// of the coupling it adds, Σ sᵦ·wᵦ and Σ dsᵦ·wᵦ, filled when a site first
// needs the interval in a panel (stamp holds the panel, +1), so that a
// panel costs what its sites read and not the whole table.
type pcPanel struct {
	w     []float64
	k     []float64
	stamp []int64
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
	w.newPanel()
}

// newPanel takes the deviations in w.dev as the next panel's.
func (w *procCheckWorker) newPanel() {
	w.serial++
	for i, ts := range w.pc.terms {
		if mt := w.pc.tabs[i]; mt != nil {
			for b, t := range ts {
				w.sec[i].w[b] = mt.mean[b] + w.dev[t]
			}
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
	x := (off - mt.lo) * mt.inv
	if !(x >= 0 && x <= mt.last) {
		return w.inSpecSlow(i, off, rng)
	}
	m, v := w.at(ps, x)
	var dev float64
	if mt.site {
		n := rng.NormFloat64()
		if v > 0 {
			dev = math.Sqrt(v) * n
			m += dev
		}
	}
	if mt.second != nil {
		m = w.second(mt, x, m, dev) // variation_quad_mc.go
	}
	return mt.domain.Contains(off) && math.Abs(m-mt.spec) <= mt.tol
}

// at returns the mean and the per-site variance of the coupling at table
// position x (0 ≤ x ≤ mt.last) for site ps on this panel:
// c(δ) + Σ sᵦ(δ)·(Mᵦ + dᵦ + Aᵦ·φᵦ(site)) and Σ σᵦ²·sᵦ(δ)², with the
// shape part summed by group.
func (w *procCheckWorker) at(ps *pcSite, x float64) (m, v float64) {
	mt := ps.tab
	j := int(x)
	if j >= mt.n {
		j = mt.n - 1
	}
	f := x - float64(j)
	sp := &w.sec[mt.section]
	if sp.stamp[j] != w.serial {
		mt.flat(sp, j)
		sp.stamp[j] = w.serial
	}
	ng := len(ps.phi)
	row := mt.t[j*mt.stride : (j+1)*mt.stride]
	k, gd := row[:mcTabExtra], row[mcTabExtra:mcTabExtra+2*ng]
	var a, g float64
	for q, p := range ps.phi {
		a += gd[2*q] * p
		g += gd[2*q+1] * p
	}
	kf := sp.k[2*j : 2*j+2]
	m = k[0] + f*(k[1]+f*(k[2]+f*k[3])) + (kf[0] + a) + f*(kf[1]+g)
	v = k[4] + f*(2*k[5]+f*k[6])
	return m, v
}

// flat fills interval j of sp: Σ sᵦ·wᵦ and Σ dsᵦ·wᵦ over the bindings.
func (mt *mcTab) flat(sp *pcPanel, j int) {
	nb := mt.nb
	sd := mt.sd[2*nb*j : 2*nb*(j+1)]
	var a, g float64
	for b, wb := range sp.w[:nb] {
		a += sd[2*b] * wb
		g += sd[2*b+1] * wb
	}
	sp.k[2*j], sp.k[2*j+1] = a, g
}

// inSpecSlow is InSpec from the curve and Proc.rows directly, for offsets
// outside the table (the coupling extends along its end slopes there);
// it draws as InSpec does.
func (w *procCheckWorker) inSpecSlow(i int, off float64, rng *rand.Rand) bool {
	mt := w.pc.sites[i].tab
	m, v := w.slowAt(i, off)
	var dev float64
	if mt.site {
		n := rng.NormFloat64()
		if v > 0 {
			dev = math.Sqrt(v) * n
			m += dev
		}
	}
	if mt.ev.Proc.second != nil {
		m = w.slowSecond(i, off, m, dev) // variation_quad_mc.go
	}
	sp := mt.ev.Curve.Section.Spec
	return mt.ev.Proc.Domain.Contains(off) && math.Abs(m-sp.Coupling) <= sp.Tolerance
}

// slowAt is at for site i at offset off from the curve and Proc.rows.
func (w *procCheckWorker) slowAt(i int, off float64) (m, v float64) {
	mt := w.pc.sites[i].tab
	ev := mt.ev
	m = ev.Curve.Coupling(off)
	r0, r1, f := ev.Proc.rows(off)
	pos, size := w.pc.a.Sites[i].Site.Pos, ev.Proc.Model.Size
	wb := w.sec[mt.section].w[:mt.nb]
	for b := range wb {
		s := r0[b] + f*(r1[b]-r0[b])
		mb := wb[b]
		if q := mt.group[b]; q >= 0 {
			mb += mt.amp[b] * mt.groups[q].At(pos, size)
		}
		m += s * mb
		v += s * s * mt.sv[b]
	}
	return m, v
}

// mcTabExtra is the number of values before the shape groups in an mcTab
// row: the coupling cubic's four coefficients and the three of the
// per-site variance's quadratic.
const mcTabExtra = 7

// mcTab is one section's Monte Carlo table over the intervals of its Proc
// table (same offsets, same index). A binding's mean at a site is
// Mᵦ + Aᵦ·φ(site) (process.Term.Mean: the panel mean and the shape, which
// is its amplitude times a unit shape, or a grid times 1); bindings whose
// unit shapes are the same function of position (the three domes of a
// stackup's dielectrics, say) form one group, so a site holds one φ per
// group and the loop over a site runs over the groups, not the terms. Per
// interval j, starting at offset lo + j·step, with f the position in the
// interval (0 to 1), a row holds
//
//   - c₀…c₃, the coupling c₀ + c₁f + c₂f² + c₃f³: the curve's monotone
//     cubic (section.Curve.Coupling) is one cubic between its solved
//     offsets, and an interval of the table lies inside one of them when
//     the solved offsets are evenly spaced (every interval of the table is
//     a 1/procTabPerSpan part of one), so the four-point fit reproduces it
//     up to rounding (TestMCTab measures it);
//   - A, B, C, the per-site variance Σ σᵦ²·sᵦ(f)² = A + 2Bf + Cf²
//     expanded exactly (σᵦ is the term's, the same at every site);
//   - per group q, Gq and dGq side by side: Σ over its bindings of Aᵦ·sᵦ
//     and Aᵦ·dsᵦ, with sᵦ(f) = sᵦ + f·dsᵦ Proc.rows' linear interpolation
//     of the binding's sensitivity.
//
// sd holds per interval sᵦ and dsᵦ of every binding, from which a worker
// fills the flat part Σ sᵦ(f)·(Mᵦ + dᵦ) of each panel (pcPanel).
type mcTab struct {
	ev            *Evaluator
	section       int
	sv            []float64 // per binding, the variance of the per-site part
	mean, amp     []float64 // per binding, Mᵦ and Aᵦ
	group         []int     // per binding, its group (−1 for a flat term)
	groups        []process.Shape
	nb, n, stride int
	lo, step, inv float64 // inv is 1/step: a product in the loop, not a quotient
	last          float64 // the largest x = (off − lo)/step in the table
	t, sd         []float64
	site          bool // some bound term has a per-site part
	domain        registration.Interval
	spec, tol     float64
	// second holds per interval the second-order term (fillSecond,
	// variation_quad_mc.go); nil without one.
	second []float64
}

// unitShape returns the shape of amplitude 1 whose multiple s is, and the
// multiple (a grid is its own unit).
func unitShape(s process.Shape) (process.Shape, float64) {
	switch s.Kind {
	case process.Grid:
		return s, 1
	case process.Flat:
		return s, 0
	}
	a := s.Amplitude
	s.Amplitude = 1
	return s, a
}

// newMCTab builds the table of section i with evaluator ev (which has
// process terms).
func newMCTab(ev *Evaluator, i int) *mcTab {
	pr := ev.Proc
	nb := len(pr.Bind)
	mt := &mcTab{ev: ev, section: i, sv: make([]float64, nb), mean: make([]float64, nb), amp: make([]float64, nb), group: make([]int, nb),
		nb: nb, n: pr.tabRows - 1, lo: pr.tabLo, step: pr.tabStep, inv: 1 / pr.tabStep,
		domain: pr.Domain, spec: ev.Curve.Section.Spec.Coupling, tol: ev.Curve.Section.Spec.Tolerance}
	for b, bd := range pr.Bind {
		t := &pr.Model.Terms[bd.Term]
		mt.sv[b] = t.SiteSigma * t.SiteSigma
		mt.site = mt.site || mt.sv[b] > 0
		mt.mean[b] = t.Panel.Mean
		u, a := unitShape(t.Shape)
		mt.amp[b], mt.group[b] = a, -1
		if t.Shape.Kind == process.Flat {
			continue // no shape part: in no group
		}
		q := len(mt.groups)
		for k, g := range mt.groups {
			if g == u {
				q = k
				break
			}
		}
		if q == len(mt.groups) {
			mt.groups = append(mt.groups, u)
		}
		mt.group[b] = q
	}
	ng := len(mt.groups)
	mt.stride = mcTabExtra + 2*ng
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
	mt.sd = make([]float64, mt.n*2*nb)
	at := func(x float64) float64 { return ev.Curve.Curve.Coupling(math.Min(hi, lo+x*mt.step)) }
	for j := range mt.n {
		row := mt.t[j*mt.stride : (j+1)*mt.stride]
		sd := mt.sd[j*2*nb : (j+1)*2*nb]
		r0, r1 := pr.tab[j*nb:(j+1)*nb], pr.tab[(j+1)*nb:(j+2)*nb]
		k := row[:mcTabExtra]
		for b := range nb {
			s, ds := r0[b], r1[b]-r0[b]
			sd[2*b], sd[2*b+1] = s, ds
			if q := mt.group[b]; q >= 0 {
				row[mcTabExtra+2*q] += mt.amp[b] * s
				row[mcTabExtra+2*q+1] += mt.amp[b] * ds
			}
			k[4] += mt.sv[b] * s * s
			k[5] += mt.sv[b] * s * ds
			k[6] += mt.sv[b] * ds * ds
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
	mt.fillSecond() // variation_quad_mc.go
	return mt
}
