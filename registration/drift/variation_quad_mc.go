package drift

// The second-order term in Monte Carlo (variation_quad.go): a draw's
// first-order process deviation L = Σ sᵦ(δ)·(Δpᵦ − μᵦ(site)) is its panel
// deviations' part Σ sᵦ·dᵦ plus the per-site normal, and the coupling is
// the first-order draw plus e₀ + (κ − 1)·L + ρ·L², the closed form's model.

// secondStride is the number of values per interval of mcRow.q: κ
// and ρ at the interval's start and their steps over it (e₀ and the
// panel means' part are in the row's cubic, mcRow).
const secondStride = 4

// mcSecond is one interval's second-order values (secondStride of them),
// held in the interval's mcRow so that the hot loop reads them from the
// cache lines it reads the rest from.
type mcSecond [secondStride]float64

// fillSecond fills the rows' second-order values from the evaluator's
// table (same intervals; the padding row n with slopes 0) and adds e₀
// to their cubics; without a second-order term it sets κ = 1 and ρ = 0,
// for which deviation returns l exactly, so that the loop needs no test.
func (mt *mcTab) fillSecond() {
	pr := mt.ev.Proc
	if pr.second == nil {
		for j := range mt.rows {
			mt.rows[j].q = mcSecond{1, 0, 0, 0}
		}
		return
	}
	for j := range mt.rows {
		row := &mt.rows[j]
		j1 := min(j+1, mt.n)
		r0, r1 := pr.second[3*j:3*j+3], pr.second[3*j1:3*j1+3]
		row.k[0] += r0[0]
		row.k[1] += r1[0] - r0[0]
		row.q = mcSecond{r0[1], r1[1] - r0[1], r0[2], r1[2] - r0[2]}
	}
}

// deviation returns, at position f in the interval, the coupling's
// deviation κ·L + ρ·L² from the row's cubic and shape part for a draw
// whose first-order deviation is l, at a site whose own part is ss (its
// κ and ρ added; its e₀ is the caller's): with the first-order draw and
// e₀ the closed form's e₀ + L + (κ − 1)·L + ρ·L², written so that
// InSpec's loop reads three products (small enough to be inlined into it).
func (q *mcSecond) deviation(f, l float64, ss siteSecond) float64 {
	return l * (q[0] + ss.kappa + f*q[1] + (q[2]+ss.rho+f*q[3])*l)
}

// inSpecSlowSecond is InSpec with the second-order term for site i on the panel of slot p at
// offset off outside the table, from the evaluator's rows (c, lin and v
// from slowAt).
func (w *procCheckWorker) inSpecSlowSecond(p, i int, off, c, lin, v, n float64) bool {
	return w.pc.sites[i].tab.window.bit(w.slowSecond(p, i, off, c, lin, v, n)) == 1
}

// slowSecond returns the coupling inSpecSlowSecond tests.
func (w *procCheckWorker) slowSecond(p, i int, off, c, lin, v, n float64) float64 {
	mt := w.pc.sites[i].tab
	pr := mt.ev.Proc
	dev := siteDev(v, n)
	r0, r1, f := pr.rows(off)
	l := dev
	for b, wb := range w.sec[mt.section].w[p][:mt.nb] {
		l += (r0[b] + f*(r1[b]-r0[b])) * wb
	}
	e0, kappa, rho := pr.secondAt(off, w.pc.sites[i].second)
	return c + lin + dev + e0 + (kappa-1)*l + rho*l*l
}
