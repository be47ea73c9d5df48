package drift

import (
	"math"

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
// shape groups (mcTab), the first mcChunk in phi and the others, if any,
// in more, in chunks of mcChunk padded with zeros; second is the site's
// own part of the second-order term (MeanTerm).
type pcSite struct {
	tab    *mcTab // nil when the site's section has no process terms
	phi    [mcChunk]float64
	more   [][mcChunk]float64
	second siteSecond
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
			n += mt.nx
			any = true
		}
	}
	if !any {
		return nil
	}
	more := make([][mcChunk]float64, n)
	size := a.In.Process.Size
	var row procRow
	for k := range a.Sites {
		r := &a.Sites[k]
		mt := pc.tabs[r.Section]
		if mt == nil {
			continue
		}
		ps := pcSite{tab: mt}
		if pc.ev[r.Section].Proc.second != nil {
			pc.ev[r.Section].Proc.row(&row, r.Site.Pos)
			ps.second = row.second
		}
		if mt.nx > 0 {
			ps.more, more = more[:mt.nx:mt.nx], more[mt.nx:]
		}
		for g := range mt.groups {
			v := mt.groups[g].At(r.Site.Pos, size)
			if g < mcChunk {
				ps.phi[g] = v
			} else {
				ps.more[g/mcChunk-1][g%mcChunk] = v
			}
		}
		pc.sites[k] = ps
	}
	return pc
}

func (pc *procCheck) Claims(i int) bool { return pc.sites[i].tab != nil }

func (pc *procCheck) NewWorker() registration.SiteCheckWorker {
	w := &procCheckWorker{pc: pc, dev: make([]float64, len(pc.a.In.Process.Terms)), sec: make([]pcSection, len(pc.terms))}
	for i, mt := range pc.tabs {
		if mt != nil {
			sec := &w.sec[i]
			wb := make([]float64, registration.MCGroup*mt.nb)
			tb := make([]int32, registration.MCGroup*len(mt.rows))
			for p := range registration.MCGroup {
				sec.w[p], wb = wb[:mt.nb:mt.nb], wb[mt.nb:]
				sec.touched[p], tb = tb[:0:len(mt.rows)], tb[len(mt.rows):]
			}
			sec.flat = make([][registration.MCGroup]pcFlat, len(mt.rows))
			nan := math.NaN()
			for j := range sec.flat {
				for p := range sec.flat[j] {
					sec.flat[j][p].a = nan
				}
			}
		}
	}
	return w
}

// procCheckWorker holds one goroutine's panel draws, one slot per panel
// of a group (registration.MCGroup).
type procCheckWorker struct {
	pc  *procCheck
	dev []float64   // per process term, the deviation from its mean being drawn
	sec []pcSection // per section
}

// pcSection is one section's panel parts: per slot of the group and
// binding the panel's deviation dᵦ from the binding's mean, and per table
// row and slot (flat[j][p]) the flat part of the coupling it adds
// (pcFlat), filled when a site first needs the row on the panel, so that
// a panel costs what its sites read and not the whole table (half of the
// rows, in BenchmarkMonteCarloProcess); touched[p] lists the rows filled
// for slot p's panel, for newPanel to mark not filled again.
type pcSection struct {
	w       [registration.MCGroup][]float64
	flat    [][registration.MCGroup]pcFlat
	touched [registration.MCGroup][]int32
}

// pcFlat is the flat part of one table interval on one panel: Σ sᵦ·dᵦ and
// Σ dsᵦ·dᵦ over the bindings (the means' part is in the row's cubic,
// mcRow). An a of NaN marks it not filled for the slot's panel yet
// (newPanel): the test is on the value the loop reads anyway, and
// needs no panel number beside it.
type pcFlat struct{ a, g float64 }

// filled reports whether kf holds its panel's values: a ≤ MaxFloat64, one
// comparison that is false for NaN (and for +Inf, which only deviations
// out of all range could give, and which InSpec then hands to inSpecAt
// rather than fill the row again).
func (kf *pcFlat) filled() bool { return kf.a <= math.MaxFloat64 }

// Panel draws every term's panel part, its deviation from the mean, into
// slot p.
func (w *procCheckWorker) Panel(p int, r *registration.Stream) {
	for t := range w.dev {
		pt := w.pc.a.In.Process.Terms[t].Panel
		switch pt.Dist {
		case registration.Normal:
			w.dev[t] = pt.Spread * r.Norm()
		case registration.Uniform:
			w.dev[t] = pt.Spread * (2*r.Float64() - 1)
		default:
			w.dev[t] = 0
		}
	}
	w.newPanel(p)
}

// newPanel takes the deviations in w.dev as slot p's next panel and
// marks the slot's filled flat parts not filled (pcFlat).
func (w *procCheckWorker) newPanel(p int) {
	nan := math.NaN()
	for i, ts := range w.pc.terms {
		if mt := w.pc.tabs[i]; mt != nil {
			sec := &w.sec[i]
			wp := sec.w[p]
			for b, t := range ts {
				wp[b] = w.dev[t]
			}
			for _, j := range sec.touched[p] {
				sec.flat[j][p].a = nan
			}
			sec.touched[p] = sec.touched[p][:0]
		}
	}
}

// InSpec decides site i on the group's panels: bit p of the mask for
// slot p, at offset off[p], with nrm[p] the standard normal of its
// per-site parts (their sum, firstOrder). An offset outside the section's
// domain is out of spec whatever the process terms do (its normal draw is
// left unused: the draws are independent of everything else). Inside,
// everything is read from the section's mcTab with one interval index
// (mcRow, the section's values hoisted out of the loop over the panels)
// when the table covers the domain (mcTab.covers) and the site has at
// most mcChunk shape groups; otherwise the site takes inSpecAt.
func (w *procCheckWorker) InSpec(i int, off, nrm []float64) uint32 {
	ps := &w.pc.sites[i]
	mt := ps.tab
	if len(off) > registration.MCGroup {
		panic("drift: more panels than a group holds")
	}
	if len(ps.more) > 0 || !mt.covers {
		return w.inSpecAt(i, off, nrm)
	}
	// The panels in reverse, so that each one's bit enters the mask by a
	// shift of it (no shift by a variable count). inSpecRun stops at a
	// row whose flat part the panel has not filled yet (about once per
	// row and panel); it is filled here and the run goes on. It stops
	// too at a row that is not inner (mcTab.inner: it may hold offsets
	// outside the domain, and is never filled) and at an offset outside
	// the table, which are decided here one panel at a time.
	p, in := len(off)-1, uint32(0)
	sec := &w.sec[mt.section]
	for {
		if p, in = w.inSpecRun(ps, off, nrm, p, in); p < 0 {
			return in
		}
		if j := uint(int((off[p] - mt.lo) * mt.inv)); mt.inner(j) {
			if mt.fill(sec, int(j), p); !sec.flat[j][p].filled() {
				return w.inSpecAt(i, off, nrm) // deviations out of all range
			}
			continue
		}
		in <<= 1
		if w.inSpecOne(i, p, off[p], nrm[p]) {
			in |= 1
		}
		if p--; p < 0 {
			return in
		}
	}
}

// inSpecRun is InSpec's loop over the panels p, p − 1, … 0 with the mask
// in of those after p: it returns the mask and −1, or the panel whose
// row is not filled (or outside the table) and the mask so far. A filled
// row is an inner one, whose offsets all lie in the domain, so that the
// loop needs no test of the domain. Everything the loop reads of mt and
// w is held in locals, and it calls nothing, so that they stay in
// registers.
func (w *procCheckWorker) inSpecRun(ps *pcSite, off, nrm []float64, p int, in uint32) (int, uint32) {
	mt := ps.tab
	lo, inv, win := mt.lo, mt.inv, mt.window
	rows, ph := mt.rows, &ps.phi
	// The site's own part of the second-order term (MeanTerm): its e₀
	// adds to the coupling, its κ and ρ to the row's.
	ss := ps.second
	flat := w.sec[mt.section].flat[:len(rows)]
	off = off[:min(len(off), registration.MCGroup)] // slot p indexes a group's arrays unchecked
	nrm = nrm[:len(off)]
	for ; uint(p) < uint(len(off)); p-- { // p = −1 ends it too
		x := (off[p] - lo) * inv
		j := uint(int(x)) // unsigned: below the table, or NaN, is out of range too
		if j >= uint(len(rows)) {
			return p, in
		}
		kf := &flat[j][p]
		if !kf.filled() {
			return p, in
		}
		rw, f := &rows[j], x-float64(int(j))
		c, v := rw.curve(f)
		// L, the draw's first-order deviation from the site's mean: the
		// panel deviations' flat part plus the per-site parts', then
		// with the second-order term (the identity without one).
		l := rw.q.deviation(f, kf.at(f)+math.Sqrt(v)*nrm[p], ss) // variation_quad_mc.go
		in = in<<1 | win.centered(c+rw.sh.at(ph, f)+l+ss.e0)     // c less spec
	}
	return -1, in
}

// inSpecAt is InSpec through at, for any number of shape groups.
func (w *procCheckWorker) inSpecAt(i int, off, nrm []float64) uint32 {
	nrm = nrm[:len(off)]
	var in uint32
	for p, o := range off {
		if w.inSpecOne(i, p, o, nrm[p]) {
			in |= 1 << p
		}
	}
	return in
}

// inSpecOne decides site i on the panel of slot p at offset o with normal
// n, through at (or inSpecSlow outside the table).
func (w *procCheckWorker) inSpecOne(i, p int, o, n float64) bool {
	ps := &w.pc.sites[i]
	mt := ps.tab
	if !mt.domain.Contains(o) {
		return false
	}
	x := (o - mt.lo) * mt.inv
	if !(x >= 0 && x <= mt.last) {
		return w.inSpecSlow(p, i, o, n)
	}
	c, shape, flat, v := w.at(p, ps, x)
	j := min(int(x), mt.n-1)
	l := mt.rows[j].q.deviation(x-float64(j), flat+math.Sqrt(v)*n, ps.second)
	return mt.window.centered(c+shape+l+ps.second.e0) == 1
}

// inSpec is the rule for an offset in the domain whose coupling is
// c + lin + √v·n: c the coupling at the panel means (the curve and the
// means' part), lin the rest of the linear process part without the
// per-site parts, v the variance of the per-site parts and n a standard
// normal draw (firstOrder), inside the spec window.
func (mt *mcTab) inSpec(c, lin, v, n float64) bool {
	return mt.window.bit(firstOrder(c, lin, v, n)) == 1
}

// firstOrder returns the coupling c + lin + √v·n of inSpec. The per-site
// parts are independent normals that enter linearly, so their sum
// Σ sᵢ·σᵢ·Nᵢ is drawn as one normal √v·n: the same distribution with one
// draw.
func firstOrder(c, lin, v, n float64) float64 {
	if v > 0 {
		lin += math.Sqrt(v) * n
	}
	return c + lin
}

// siteDev returns the per-site parts' deviation √v·n (0 when v is 0).
func siteDev(v, n float64) float64 {
	if v > 0 {
		return math.Sqrt(v) * n
	}
	return 0
}

// specWindow is a section's spec window, |m − spec| ≤ tol, the one test
// of "in spec" in Monte Carlo; tol2 is tol².
type specWindow struct{ spec, tol, tol2 float64 }

func newSpecWindow(spec, tol float64) specWindow { return specWindow{spec, tol, tol * tol} }

// bit returns 1 when coupling m is inside the window, 0 otherwise: a
// value, not a branch, for the mask of InSpec, since a site's draws fall
// out of spec at random.
func (sw specWindow) bit(m float64) uint32 { return sw.centered(m - sw.spec) }

// centered is bit for the coupling less spec, d = m − spec: d² ≤ tol²,
// which is |d| ≤ tol but for the rounding of the squares (they are
// monotone in |d|, so the two differ only within an ulp of the edge), in
// one product where |d| takes three moves through an integer register.
func (sw specWindow) centered(d float64) uint32 {
	if d*d <= sw.tol2 {
		return 1
	}
	return 0
}

// at returns, at table position x (0 ≤ x ≤ mt.last) for site ps on the
// panel of slot p, the row's cubic c (mcRow: the curve c(δ), the means'
// part Σ sᵦ(δ)·Mᵦ and, with a second-order term, e₀(δ), less the spec's
// coupling, for specWindow.centered), the shape part
// Σ sᵦ(δ)·Aᵦ·φᵦ(site) (summed by group), the flat part of the panel's
// deviations Σ sᵦ(δ)·dᵦ and the per-site variance Σ σᵦ²·sᵦ(δ)².
func (w *procCheckWorker) at(p int, ps *pcSite, x float64) (c, shape, flat, v float64) {
	mt := ps.tab
	j := min(int(x), mt.n-1)
	sec := &w.sec[mt.section]
	kf := sec.flat[j][p]
	if !kf.filled() {
		kf = mt.fill(sec, j, p)
	}
	f := x - float64(j)
	rw := &mt.rows[j]
	c, v = rw.curve(f)
	shape = rw.sh.at(&ps.phi, f)
	if len(ps.more) > 0 {
		shape += mt.moreAt(j, ps.more, f)
	}
	return c, shape, kf.at(f), v
}

// The sums at position f (0 to 1) in the interval of row r (mcTab), in
// parts small enough to be inlined into the loop over the panels: curve
// returns the cubic c₀ + c₁f + c₂f² + c₃f³ and the per-site variance
// C·(f + h)² + r (mcRow); the rest of the linear process part is the flat part of
// the panel's deviations, kf.at(f) = kf.a + f·kf.g, plus the shape part,
// Σ (Gq + f·dGq)·φq over the groups in chunks of mcChunk (mcShapes.at).
func (r *mcRow) curve(f float64) (c, v float64) {
	k := &r.k
	t := f + k[5]
	return k[0] + f*(k[1]+f*(k[2]+f*k[3])), k[4]*t*t + k[6]
}

func (kf *pcFlat) at(f float64) float64 { return kf.a + f*kf.g }

// at returns Σ (Gq + f·dGq)·φq over the chunk's groups, ph the site's
// values of them.
func (s *mcShapes) at(ph *[mcChunk]float64, f float64) float64 {
	return (s[0]+f*s[4])*ph[0] + (s[1]+f*s[5])*ph[1] + (s[2]+f*s[6])*ph[2] + (s[3]+f*s[7])*ph[3]
}

// moreAt returns the shape part of the groups beyond the first mcChunk
// at position f in interval j for a site whose values of them are more.
func (mt *mcTab) moreAt(j int, more [][mcChunk]float64, f float64) float64 {
	ext := mt.more[j*mt.nx : (j+1)*mt.nx]
	var a float64
	for q := range more {
		a += ext[q].at(&more[q], f)
	}
	return a
}

// fill returns row j's flat part on slot p's panel, whose bindings
// deviate by wᵦ from their means: Σ sᵦ·wᵦ and Σ dsᵦ·wᵦ; for an inner row
// it sets it in sec and lists the row as filled.
func (mt *mcTab) fill(sec *pcSection, j, p int) pcFlat {
	sd := mt.sd[mt.nb*j : mt.nb*(j+1)]
	var a, g float64
	for b, x := range sec.w[p][:len(sd)] {
		a += sd[b][0] * x
		g += sd[b][1] * x
	}
	if mt.inner(uint(j)) {
		sec.flat[j][p] = pcFlat{a, g}
		sec.touched[p] = append(sec.touched[p], int32(j))
	}
	return pcFlat{a, g}
}

// inner reports whether every offset whose table position x has ⌊x⌋ = j
// lies in the domain (mcTab.in0).
func (mt *mcTab) inner(j uint) bool { return j >= mt.in0 && j <= mt.in1 }

// inSpecSlow is InSpec from the curve and Proc.rows directly, for site i
// on the panel of slot p at an offset in the domain but outside the
// table, with n its normal draw as in InSpec.
func (w *procCheckWorker) inSpecSlow(p, i int, off, n float64) bool {
	mt := w.pc.sites[i].tab
	c, lin, v := w.slowAt(p, i, off)
	if mt.ev.Proc.second == nil {
		return mt.inSpec(c, lin, v, n)
	}
	return w.inSpecSlowSecond(p, i, off, c, lin, v, n) // variation_quad_mc.go
}

// slowAt is at for site i on the panel of slot p at offset off from the
// curve and Proc.rows.
func (w *procCheckWorker) slowAt(p, i int, off float64) (c, lin, v float64) {
	mt := w.pc.sites[i].tab
	ev := mt.ev
	c = ev.Curve.Coupling(off)
	r0, r1, f := ev.Proc.rows(off)
	pos, size := w.pc.a.Sites[i].Site.Pos, ev.Proc.Model.Size
	wb := w.sec[mt.section].w[p][:mt.nb]
	for b := range wb {
		s := r0[b] + f*(r1[b]-r0[b])
		mb := mt.mean[b] + wb[b]
		if q := mt.group[b]; q >= 0 {
			mb += mt.amp[b] * mt.groups[q].At(pos, size)
		}
		lin += s * mb
		v += s * s * mt.sv[b]
	}
	return c, lin, v
}

// mcChunk is the number of shape groups an mcTab row holds, and the
// number the loop over a site's groups takes at a time, unrolled; a
// section with more groups holds the others in mcTab.more, in chunks of
// mcChunk padded with zeros.
const mcChunk = 4

// mcRow is one interval of an mcTab (see there): k holds c₀…c₃, C, h, r
// and one unused value, sh the first mcChunk groups' Gq and dGq, and q
// the second-order term's values (mcSecond; the identity without one), padded so
// that one interval's values lie together in three cache lines.
type mcRow struct {
	k  [8]float64
	sh mcShapes
	q  mcSecond
	_  [8 - secondStride]float64
}

// mcShapes is one chunk of shape groups in one interval: their Gq
// (q < mcChunk), then their dGq.
type mcShapes [2 * mcChunk]float64

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
//   - c₀…c₃, the coupling at the panel means less the spec's coupling
//     (specWindow.centered), c₀ + c₁f + c₂f² + c₃f³: the
//     curve's monotone cubic (section.Curve.Coupling) is one cubic between
//     its solved offsets, and an interval of the table lies inside one of
//     them when the solved offsets are evenly spaced (every interval of
//     the table is a 1/procTabPerSpan part of one), so the four-point fit
//     reproduces it up to rounding (TestMCTab measures it); to it are
//     added the means' part Σ sᵦ(f)·Mᵦ and, with a second-order term, e₀
//     (linear in f, fillSecond), so that the loop adds only deviations;
//   - the per-site variance Σ σᵦ²·sᵦ(f)² = A + 2Bf + Cf² (σᵦ is the
//     term's, the same at every site) as C·(f + h)² + r, h = B/C and
//     r = A − B²/C (h = 0 and r = A when C = 0): r ≥ 0 by the
//     Cauchy–Schwarz inequality, and held at 0 or above against
//     rounding, so that the loop takes the square root of a sum of
//     non-negative terms with no test (A + 2Bf + Cf² may round below 0
//     where a lone sensitivity crosses 0);
//   - per group q, Gq: Σ over its bindings of Aᵦ·sᵦ, and dGq: Σ Aᵦ·dsᵦ,
//     with sᵦ(f) = sᵦ + f·dsᵦ Proc.rows' linear interpolation of the
//     binding's sensitivity (mcRow; the groups beyond the first mcChunk
//     in nx chunks per interval in more, mcShapes).
//
// sd holds per interval sᵦ and dsᵦ of every binding, from which a worker
// fills the flat part Σ sᵦ(f)·dᵦ of each panel's deviations (pcSection,
// pcFlat).
//
// rows and sd hold one row more than the table's n intervals, row n at
// the table's end with every slope 0, so that x = n, the end, reads row n
// at f = 0 and the loop's index needs no clamp.
type mcTab struct {
	ev            *Evaluator
	section       int
	sv            []float64 // per binding, the variance of the per-site part
	mean, amp     []float64 // per binding, Mᵦ and Aᵦ
	group         []int     // per binding, its group (−1 for a flat term)
	groups        []process.Shape
	nb, n         int
	nx            int     // chunks of groups beyond the first mcChunk
	lo, step, inv float64 // inv is 1/step: a product in the loop, not a quotient
	last          float64 // the largest x = (off − lo)/step in the table
	rows          []mcRow
	more          []mcShapes   // nx per interval
	sd            [][2]float64 // per row and binding, sᵦ and dsᵦ
	site          bool         // some bound term has a per-site part
	// covers says that every offset of the domain has its x in [0, last]:
	// x = (off − lo)·inv rounds monotonically in off, so the ends decide.
	covers bool
	// Rows in0 to in1 are the inner ones: with xLo and xHi the domain's
	// ends' positions, a row j with xLo < j and j + 1 ≤ xHi holds only
	// offsets of the domain (by the same monotone rounding), and j ≥ 1
	// (int(x) is 0 for x in (−1, 0) too). None without covers.
	in0, in1 uint
	domain   registration.Interval
	window   specWindow
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
		domain: pr.Domain, window: newSpecWindow(ev.Curve.Section.Spec.Coupling, ev.Curve.Section.Spec.Tolerance)}
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
	mt.nx = max(0, (len(mt.groups)+mcChunk-1)/mcChunk-1)
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
	mt.in0, mt.in1 = 1, 0
	if d := mt.domain; !d.Empty() {
		xlo, xhi := (d.Lo-mt.lo)*mt.inv, (d.Hi-mt.lo)*mt.inv
		mt.covers = xlo >= 0 && xhi <= mt.last
		if mt.covers {
			mt.in0, mt.in1 = uint(math.Floor(xlo))+1, uint(math.Floor(xhi))
			if mt.in1 < mt.in0 {
				mt.in0, mt.in1 = 1, 0
			} else {
				mt.in1--
			}
		}
	}
	mt.rows = make([]mcRow, mt.n+1)
	mt.more = make([]mcShapes, mt.n*mt.nx)
	mt.sd = make([][2]float64, (mt.n+1)*nb)
	at := func(x float64) float64 { return ev.Curve.Curve.Coupling(math.Min(hi, lo+x*mt.step)) }
	for j := range mt.n + 1 {
		row := &mt.rows[j]
		sd := mt.sd[j*nb : (j+1)*nb]
		r0, r1 := pr.tab[j*nb:(j+1)*nb], pr.tab[min(j+1, mt.n)*nb:(min(j+1, mt.n)+1)*nb]
		k := &row.k
		var va, vb, vc float64 // A, B, C
		for b := range nb {
			s, ds := r0[b], r1[b]-r0[b]
			sd[b] = [2]float64{s, ds}
			switch q := mt.group[b]; {
			case q >= mcChunk && j == mt.n:
				// The padding row is the hot loop's alone, and more is not.
			case q >= mcChunk:
				m := &mt.more[j*mt.nx+q/mcChunk-1]
				m[q%mcChunk] += mt.amp[b] * s
				m[mcChunk+q%mcChunk] += mt.amp[b] * ds
			case q >= 0:
				row.sh[q] += mt.amp[b] * s
				row.sh[mcChunk+q] += mt.amp[b] * ds
			}
			k[0] += mt.mean[b] * s // the means' part; the cubic's below
			k[1] += mt.mean[b] * ds
			va += mt.sv[b] * s * s
			vb += mt.sv[b] * s * ds
			vc += mt.sv[b] * ds * ds
		}
		k[4], k[6] = vc, va
		if vc > 0 {
			k[5] = vb / vc
			k[6] = max(0, va-vb*k[5])
		}
		// The cubic through the curve at f = 0, 1/3, 2/3, 1 by Newton's
		// forward differences in u = 3f (Abramowitz & Stegun, Handbook of
		// Mathematical Functions, 25.2.4), expanded into powers of f; the
		// padding row is the constant at the end.
		x := float64(j)
		y0, y1, y2, y3 := at(x), at(x+1.0/3), at(x+2.0/3), at(x+1)
		if j == mt.n {
			y1, y2, y3 = y0, y0, y0
		}
		d1, d2, d3 := y1-y0, y2-2*y1+y0, y3-3*y2+3*y1-y0
		k[0] += y0
		k[1] += 3 * (d1 - d2/2 + d3/3)
		k[2] = 9 * (d2/2 - d3/2)
		k[3] = 27 * (d3 / 6)
	}
	mt.fillSecond() // variation_quad_mc.go
	for j := range mt.rows {
		mt.rows[j].k[0] -= mt.window.spec // for specWindow.centered
	}
	return mt
}
