package drift

// The second-order term in Monte Carlo (variation_quad.go): a draw's
// first-order process deviation L = Σ sᵦ(δ)·(Δpᵦ − μᵦ(site)) is its panel
// deviations' part Σ sᵦ·dᵦ plus the per-site normal, and the coupling is
// the first-order draw plus e₀ + (κ − 1)·L + ρ·L², the closed form's model.

// secondStride is the number of values per interval of mcTab.second: e₀,
// κ and ρ at the interval's start and their steps over it, and the flat
// part of the panel means, Σ sᵦ·Mᵦ and Σ dsᵦ·Mᵦ.
const secondStride = 8

// fillSecond fills mt.second from the evaluator's table (same intervals).
func (mt *mcTab) fillSecond() {
	pr := mt.ev.Proc
	if pr.second == nil || mt.t == nil {
		return
	}
	nb := mt.nb
	mt.second = make([]float64, mt.n*secondStride)
	for j := range mt.n {
		q := mt.second[j*secondStride : (j+1)*secondStride]
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

// second returns the coupling m of a first-order draw at table position x
// (the interval at already filled for this panel) with the second-order
// term added; dev is the draw's per-site part.
func (w *procCheckWorker) second(mt *mcTab, x, m, dev float64) float64 {
	j := int(x)
	if j >= mt.n {
		j = mt.n - 1
	}
	f := x - float64(j)
	q := mt.second[j*secondStride : (j+1)*secondStride]
	kf := w.sec[mt.section].k[2*j : 2*j+2]
	l := dev + (kf[0] - q[6]) + f*(kf[1]-q[7])
	return m + q[0] + f*q[1] + (q[2]+f*q[3]-1)*l + (q[4]+f*q[5])*l*l
}

// slowSecond is second for site i at offset off outside the table, from
// the evaluator's rows.
func (w *procCheckWorker) slowSecond(i int, off, m, dev float64) float64 {
	mt := w.pc.sites[i].tab
	pr := mt.ev.Proc
	r0, r1, f := pr.rows(off)
	l := dev
	for b, wb := range w.sec[mt.section].w[:mt.nb] {
		l += (r0[b] + f*(r1[b]-r0[b])) * (wb - mt.mean[b])
	}
	e0, kappa, rho := pr.secondAt(off)
	return m + e0 + (kappa-1)*l + rho*l*l
}
