package drift

// The second-order term in Monte Carlo (variation_quad.go): a draw's
// first-order process deviation L = Σ sᵦ(δ)·(Δpᵦ − μᵦ(site)) is its panel
// deviations' part Σ sᵦ·dᵦ plus the per-site normal, and the coupling is
// the first-order draw plus e₀ + (κ − 1)·L + ρ·L², the closed form's model.

// secondStride is the number of values per interval of mcTab.second: e₀,
// κ and ρ at the interval's start and their steps over it, and the flat
// part of the panel means, Σ sᵦ·Mᵦ and Σ dsᵦ·Mᵦ.
const secondStride = 8

// mcSecond is one interval's second-order values (secondStride of them),
// held in the interval's mcRow so that the hot loop reads them from the
// cache lines it reads the rest from.
type mcSecond [secondStride]float64

// fillSecond fills mt.second from the evaluator's table (same intervals).
func (mt *mcTab) fillSecond() {
	pr := mt.ev.Proc
	if pr.second == nil || mt.rows == nil {
		return
	}
	nb := mt.nb
	mt.second = true
	for j := range mt.n {
		q := &mt.rows[j].q
		r0, r1 := pr.second[3*j:3*j+3], pr.second[3*(j+1):3*(j+1)+3]
		for k := range 3 {
			q[2*k], q[2*k+1] = r0[k], r1[k]-r0[k]
		}
		sd := mt.sd[j*2*nb : (j+1)*2*nb]
		for b := range nb {
			q[6] += sd[2*b] * mt.mean[b]
			q[7] += sd[2*b+1] * mt.mean[b]
		}
	}
}

// inSpecSecond is mcTab.inSpec with the second-order term, in interval j
// at position f: c the curve, lin the linear process part without the
// per-site parts, flat its flat part on the panel (Σ sᵦ·(Mᵦ + dᵦ)), v the
// per-site variance and n the site's normal draw. L is the per-site part
// plus the panel deviations' Σ sᵦ·dᵦ (the flat part less the panel
// means'), and the coupling the first-order draw plus e₀ + (κ − 1)·L + ρ·L².
func (mt *mcTab) inSpecSecond(j int, f, c, lin, flat, v, n float64) bool {
	return mt.window.bit(mt.rows[j].q.coupling(f, c, lin, flat, siteDev(v, n))) == 1
}

// coupling returns the coupling of inSpecSecond at position f in the
// interval, dev the per-site parts' deviation (siteDev), small enough to
// be inlined into InSpec's loop.
func (q *mcSecond) coupling(f, c, lin, flat, dev float64) float64 {
	l := dev + flat - (q[6] + f*q[7])
	return c + lin + dev + q[0] + f*q[1] + (q[2]+f*q[3]-1)*l + (q[4]+f*q[5])*l*l
}

// inSpecSlowSecond is inSpecSecond for site i on the panel of slot p at
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
		l += (r0[b] + f*(r1[b]-r0[b])) * (wb - mt.mean[b])
	}
	e0, kappa, rho := pr.secondAt(off)
	return c + lin + dev + e0 + (kappa-1)*l + rho*l*l
}
