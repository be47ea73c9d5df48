package section

import (
	"fmt"
	"math"
)

// Sensitivities: the derivative of the capacitance matrices, and through them
// of coupling, directivity, impedances and εeff, with respect to every
// physical parameter of the cross-section. The method is in
// doc_sensitivity.go.

// ParamKind is the kind of a physical parameter of a cross-section.
type ParamKind int

const (
	ParamThickness    ParamKind = iota // a dielectric's thickness, m
	ParamEr                            // a dielectric's relative permittivity
	ParamCopper                        // a copper layer's finished thickness, m (any plating step moves it alike)
	ParamWidth                         // the foot width of every trace on a copper layer, m (centres fixed: an edge-coupled gap moves by −Δw)
	ParamEtch                          // the undercut per side of every trace on a copper layer, m (foot fixed)
	ParamMaskLaminate                  // the mask's thickness over the laminate, m
	ParamMaskCopper                    // the mask's thickness over the copper, m
	ParamMaskEr                        // the mask's relative permittivity
	// ParamOffset is the lateral offset of the upper trace, m: not a
	// parameter of the cross-section (Params leaves it out; the curve
	// covers it) but differentiated the same way, which the tests use.
	ParamOffset
)

var paramQuantity = [...]string{"thickness", "er", "copper", "width", "etch", "thickness", "over_copper", "er", "offset"}

func (k ParamKind) String() string {
	if k >= 0 && int(k) < len(paramQuantity) {
		return paramQuantity[k]
	}
	return fmt.Sprintf("ParamKind(%d)", int(k))
}

// IsLength reports whether the parameter is a length (m); otherwise it is a
// relative permittivity (dimensionless).
func (k ParamKind) IsLength() bool { return k != ParamEr && k != ParamMaskEr }

// Param is one physical parameter of a cross-section.
type Param struct {
	Kind  ParamKind
	Layer int    // stackup index; -1 for the mask
	Key   string // "K1.thickness", "L3.width", "mask.er": the layer's name (or "layers[i]" when a dielectric has none) and the quantity
}

// Params returns every parameter the section's coupling depends on, in
// stackup order: each dielectric inside the solution domain (thickness, εr),
// each copper layer inside it (finished thickness, unless an ideal
// zero-thickness strip), the traces on each copper layer (foot width; etch,
// unless zero thickness) and the mask (both thicknesses, εr). Layers outside
// the domain (beyond a stripline's grounds, below a microstrip's ground)
// have no effect and are left out. s must be valid.
func (s *Section) Params() []Param {
	ls := s.Stackup.Layers
	in := s.domainLayers()
	var out []Param
	for i, l := range ls {
		if !in[i] {
			continue
		}
		name := l.Name
		if name == "" {
			name = fmt.Sprintf("layers[%d]", i)
		}
		add := func(k ParamKind) { out = append(out, Param{Kind: k, Layer: i, Key: name + "." + k.String()}) }
		switch l.Kind {
		case Dielectric:
			add(ParamThickness)
			add(ParamEr)
		case Copper:
			if l.Thickness > 0 {
				add(ParamCopper)
			}
			if l.Name == s.Traces[0].Layer || l.Name == s.Traces[1].Layer {
				add(ParamWidth)
				if l.Thickness > 0 {
					add(ParamEtch)
				}
			}
		}
	}
	if s.Stackup.Mask != nil {
		for _, k := range []ParamKind{ParamMaskLaminate, ParamMaskCopper, ParamMaskEr} {
			out = append(out, Param{Kind: k, Layer: -1, Key: "mask." + k.String()})
		}
	}
	return out
}

// FindParam returns the parameter of kind k on the layer named layer ("" for
// the mask), as listed by Params. A plating step "L1/2" is addressed as its
// layer's ParamCopper: a step moves the finished thickness alike. It reports
// false when the section has no such parameter (a layer outside the domain,
// an etch on a zero-thickness strip, a mask quantity without a mask).
func (s *Section) FindParam(layer string, k ParamKind) (Param, bool) {
	for _, p := range s.Params() {
		if p.Kind != k {
			continue
		}
		if p.Layer < 0 && layer == "" || p.Layer >= 0 && s.Stackup.Layers[p.Layer].Name == layer && layer != "" {
			return p, true
		}
	}
	return Param{}, false
}

// domainLayers marks the stackup layers inside the solution domain.
func (s *Section) domainLayers() []bool {
	ls := s.Stackup.Layers
	in := make([]bool, len(ls))
	gi0, _ := s.copperIndex(s.Grounds[0])
	if len(s.Grounds) == 2 {
		gi1, _ := s.copperIndex(s.Grounds[1])
		for i := min(gi0, gi1) + 1; i < max(gi0, gi1); i++ {
			in[i] = true
		}
		return in
	}
	ti, _ := s.copperIndex(s.Traces[0].Layer)
	for i := range ls {
		in[i] = (ti < gi0 && i < gi0) || (ti > gi0 && i > gi0)
	}
	return in
}

// Perturbed returns a copy of s with parameter p moved by dv (m, or units of
// εr). A copper layer built from foil and plating keeps the sum: the foil
// takes the change, the plating steps in proportion what the foil cannot.
// The copy shares nothing with s; it is not validated.
func (s *Section) Perturbed(p Param, dv float64) *Section {
	c := *s
	c.Stackup.Layers = make([]Layer, len(s.Stackup.Layers))
	for i, l := range s.Stackup.Layers {
		l.Plating = append([]float64(nil), l.Plating...)
		c.Stackup.Layers[i] = l
	}
	if s.Stackup.Mask != nil {
		m := *s.Stackup.Mask
		c.Stackup.Mask = &m
	}
	c.Grounds = append([]string(nil), s.Grounds...)
	switch p.Kind {
	case ParamThickness:
		c.Stackup.Layers[p.Layer].Thickness += dv
	case ParamEr:
		c.Stackup.Layers[p.Layer].Er += dv
	case ParamCopper:
		l := &c.Stackup.Layers[p.Layer]
		l.Thickness += dv
		if l.Foil != 0 || len(l.Plating) > 0 {
			l.Foil += dv
			if l.Foil < 0 {
				// Thinner than the plating alone: no foil, and the plating
				// steps in proportion to the finished thickness (only it
				// enters the field; a term on one plating step can reach
				// past the foil under it).
				var sum float64
				for _, pt := range l.Plating {
					sum += pt
				}
				for k := range l.Plating {
					l.Plating[k] *= l.Thickness / sum
				}
				l.Foil = 0
			}
		}
	case ParamWidth, ParamEtch:
		name := s.Stackup.Layers[p.Layer].Name
		for k := range c.Traces {
			if c.Traces[k].Layer != name {
				continue
			}
			if p.Kind == ParamWidth {
				c.Traces[k].Width += dv
			} else {
				c.Traces[k].Etch += dv
			}
		}
	case ParamMaskLaminate:
		c.Stackup.Mask.OverLaminate += dv
	case ParamMaskCopper:
		c.Stackup.Mask.OverCopper += dv
	case ParamMaskEr:
		c.Stackup.Mask.Er += dv
	case ParamOffset:
		c.DesignOffset += dv
	}
	return &c
}

// Sensitivity is the derivative of one point's quantities with respect to
// one parameter, per unit of the parameter (per metre for a length, per unit
// of εr), at a fixed coupled length.
type Sensitivity struct {
	Param         Param
	C, C0         [2][2]float64 // dC/dp, dC0/dp, F/m per unit
	CouplingDB    float64       // dB per unit
	DirectivityDB float64       // dB per unit (0 where the directivity is capped)
	ZLine         [2]float64    // ohm per unit
	EpsEff        [2]float64    // per unit, the two modes ascending
	// ZEven, ZOdd are set when the section is symmetric at this point.
	ZEven, ZOdd float64
}

// pointQuantities are the quantities a Sensitivity differentiates.
type pointQuantities struct {
	coupling, directivity float64
	zline, eeff           [2]float64
	zeven, zodd           float64
}

func quantitiesOf(C, C0 [2][2]float64, f0, length, zref float64) (q pointQuantities, capped bool) {
	l := NewLines(C, C0)
	q.coupling, q.directivity = l.couplingAt(f0, length, zref)
	q.zline, q.eeff = l.ZLine, l.EpsEff
	q.zeven = math.Sqrt((l.L[0][0] + l.L[0][1]) / (C[0][0] + C[0][1]))
	q.zodd = math.Sqrt((l.L[0][0] - l.L[0][1]) / (C[0][0] - C[0][1]))
	return q, q.directivity >= maxDirectivityDB
}

// outerStep is the relative change of C and C0 over which the line and
// 4-port quantities are differentiated: their truncation error is of order
// outerStep² (1e−10) and their rounding error about 1e−16/outerStep.
const outerStep = 1e-5

// newSensitivity differentiates coupling, directivity, impedances and εeff
// along dC, dC0 by central differences of the closed-form line and 4-port
// functions (no field solve).
func newSensitivity(par Param, C, C0, dC, dC0 [2][2]float64, f0, length, zref float64, symmetric bool) Sensitivity {
	sv := Sensitivity{Param: par, C: dC, C0: dC0}
	scale := 0.0
	for i := range 2 {
		for j := range 2 {
			scale = math.Max(scale, math.Abs(dC[i][j])/math.Sqrt(C[i][i]*C[j][j]))
			scale = math.Max(scale, math.Abs(dC0[i][j])/math.Sqrt(C0[i][i]*C0[j][j]))
		}
	}
	if scale == 0 {
		return sv
	}
	tau := outerStep / scale
	at := func(sg float64) (pointQuantities, bool) {
		var c, c0 [2][2]float64
		for i := range 2 {
			for j := range 2 {
				c[i][j] = C[i][j] + sg*tau*dC[i][j]
				c0[i][j] = C0[i][j] + sg*tau*dC0[i][j]
			}
		}
		return quantitiesOf(c, c0, f0, length, zref)
	}
	p, pc := at(1)
	m, mc := at(-1)
	d := func(a, b float64) float64 { return (a - b) / (2 * tau) }
	sv.CouplingDB = d(p.coupling, m.coupling)
	if !pc && !mc {
		sv.DirectivityDB = d(p.directivity, m.directivity)
	}
	for k := range 2 {
		sv.ZLine[k] = d(p.zline[k], m.zline[k])
		sv.EpsEff[k] = d(p.eeff[k], m.eeff[k])
	}
	if symmetric {
		sv.ZEven, sv.ZOdd = d(p.zeven, m.zeven), d(p.zodd, m.zodd)
	}
	return sv
}

// Capacitance derivatives on one mesh.

// shapeStep is the parameter step, as a fraction of the smallest feature,
// over which the mesh motion of a length parameter is differenced. The node
// positions are smooth functions of the parameter on the scale of the
// geometry, so a forward difference errs by about shapeStep (1e−6); rounding
// in the coordinates adds about 1e−16·(domain size)/(shapeStep·feature),
// below 1e−8 near the traces.
const shapeStep = 1e-6

// perturbedPlan returns plan p realised for the section moved along
// parameter par by h: the same element counts in every segment and band (so
// the same topology), the nodes where the moved section puts them. The walls,
// the grading and the held-edge gap are p's.
func (p *meshPlan) perturbedPlan(sv *solver, idx int, par Param, h float64) (*meshPlan, error) {
	p.pertMu.Lock()
	defer p.pertMu.Unlock()
	if q, ok := p.pert[idx]; ok {
		return q, nil
	}
	g := p.g
	g2 := sv.s.Perturbed(par, h).buildGeometry()
	g2.order, g2.offLo, g2.offHi, g2.openSpans = g.order, g.offLo, g.offHi, g.openSpans
	bands := append([]band(nil), g2.bands...)
	if g.micro {
		air := p.bands[len(p.bands)-1].y1 - g.stackH
		bands = append(bands, band{y0: g2.stackH, y1: g2.stackH + air, er: 1, trace: -1, src: srcAir, layer: -1})
	}
	bands = splitBands(bands, g2.maskSplits())
	if len(bands) != len(p.bands) {
		return nil, fmt.Errorf("section: parameter %s changes the band structure", par.Key)
	}
	q := &meshPlan{g: g2, level: p.level, bands: bands, rowBand: p.rowBand, xc: p.xc, nx: p.nx, ny: p.ny,
		gx: p.gx, margin: p.margin, wmax: p.wmax, hi: p.hi, lo: p.lo, jub: p.jub, jlt: p.jlt, feat: p.feat, coatEdge: p.coatEdge}
	var sing []float64
	for k := range 2 {
		sing = append(sing, g2.tr[k].yb, g2.tr[k].yt)
	}
	q.ys = make([]float64, 0, len(p.ys))
	q.ys = append(q.ys, bands[0].y0)
	gr := grader{grading: p.gx}
	j := 0
	for bi, b := range bands {
		n := 0
		for j+n < len(p.rowBand) && p.rowBand[j+n] == bi {
			n++
		}
		row := make([]float64, n+1)
		gr.nodes(row, b.y0, b.y1, n, sing)
		q.ys = append(q.ys, row[1:]...)
		j += n
	}
	if p.pert == nil {
		p.pert = map[int]*meshPlan{}
	}
	p.pert[idx] = q
	return q, nil
}

// sensWork holds the buffers of the derivative computation of one worker.
type sensWork struct {
	m     mesh // the perturbed mesh
	vx    []float64
	vy    []float64
	erSum []float64 // field energy per permittivity source
}

// capDerivatives returns dC/dp and dC0/dp for every parameter of sv.sens on
// the mesh w.m, whose potentials are w.phi (with dielectrics) and w.phi0
// (vacuum), both solved.
//
// For an εr the derivative is the field energy in the region it fills:
// C_mn = ε0·φ_mᵀ·K(ε)·φ_n with φ stationary, so dC_mn/dεr = ε0·φ_mᵀ·K_region·φ_n
// exactly for the discrete problem. For a length the mesh moves with the
// interface (perturbedPlan) and, by the same stationarity, dC_mn/dp =
// ε0·φ_mᵀ·(dK/dp)·φ_n with dK/dp the derivative of the element matrices
// under the node motion — the discrete shape derivative, exact for this
// mesh family up to the difference step. Elements that only translate
// contribute nothing and are skipped.
func (sv *solver) capDerivatives(off float64, p *meshPlan, w *femWork) (dC, dC0 [][2][2]float64, err error) {
	m := &w.m
	nx, ny := m.nx, m.ny
	n := len(sv.sens)
	dC = make([][2][2]float64, n)
	dC0 = make([][2][2]float64, n)
	sw := &w.sens
	nsrc := len(sv.s.Stackup.Layers) + 2
	sw.erSum = resize(sw.erSum, 3*nsrc)
	clear(sw.erSum)
	phi, phi0 := w.phi, w.phi0
	// Energy per permittivity source, all εr parameters at once.
	for i := range nx {
		for j := range ny {
			e := i*ny + j
			if m.er[e] == 0 {
				continue
			}
			ke := w.ke[16*e : 16*e+16]
			ns := elementNodes(i, j, ny)
			var e00, e01, e11 float64
			for a, na := range ns {
				var k0, k1 float64
				for b, nb := range ns {
					k0 += ke[a*4+b] * phi[0][nb]
					k1 += ke[a*4+b] * phi[1][nb]
				}
				e00 += phi[0][na] * k0
				e01 += phi[0][na] * k1
				e11 += phi[1][na] * k1
			}
			s := 3 * (int(m.src[e]) + 2)
			sw.erSum[s] += e00
			sw.erSum[s+1] += e01
			sw.erSum[s+2] += e11
		}
	}
	var kp [16]float64
	for pi, par := range sv.sens {
		if !par.Kind.IsLength() {
			src := par.Layer
			if par.Kind == ParamMaskEr {
				src = srcMask
			}
			s := 3 * (src + 2)
			dC[pi] = sym2(Eps0*sw.erSum[s], Eps0*sw.erSum[s+1], Eps0*sw.erSum[s+2])
			continue
		}
		h := shapeStep * p.feat
		if par.Kind == ParamOffset {
			p.place(off+h, &sw.m, false)
		} else {
			q, err := p.perturbedPlan(sv, pi, par, h)
			if err != nil {
				return nil, nil, err
			}
			q.place(off, &sw.m, false)
		}
		mp := &sw.m
		var d, d0 [3]float64
		for i := range nx {
			for j := range ny {
				e := i*ny + j
				if m.er[e] == 0 {
					continue
				}
				ns := elementNodes(i, j, ny)
				var x, y [4]float64
				rigid := true
				dx0, dy0 := mp.x[ns[0]]-m.x[ns[0]], mp.y[ns[0]]-m.y[ns[0]]
				for a, na := range ns {
					x[a], y[a] = mp.x[na], mp.y[na]
					dx, dy := x[a]-m.x[na], y[a]-m.y[na]
					tol := rigidTol*h + 1e-15*(math.Abs(x[a])+math.Abs(y[a]))
					if math.Abs(dx-dx0) > tol || math.Abs(dy-dy0) > tol {
						rigid = false
					}
				}
				if rigid {
					continue
				}
				ke := w.ke[16*e : 16*e+16]
				if !rectDerivative(kp[:], m, ns, mp, h) {
					if err := stiffness(kp[:], x, y); err != nil {
						return nil, nil, err
					}
					for i := range kp {
						kp[i] = (kp[i] - ke[i]) / h
					}
				}
				var e00, e01, e11, v00, v01, v11 float64
				for a, na := range ns {
					var k0, k1, u0, u1 float64
					for b, nb := range ns {
						dk := kp[a*4+b]
						k0 += dk * phi[0][nb]
						k1 += dk * phi[1][nb]
						u0 += dk * phi0[0][nb]
						u1 += dk * phi0[1][nb]
					}
					e00 += phi[0][na] * k0
					e01 += phi[0][na] * k1
					e11 += phi[1][na] * k1
					v00 += phi0[0][na] * u0
					v01 += phi0[0][na] * u1
					v11 += phi0[1][na] * u1
				}
				er := m.er[e]
				d[0] += er * e00
				d[1] += er * e01
				d[2] += er * e11
				d0[0] += v00
				d0[1] += v01
				d0[2] += v11
			}
		}
		dC[pi] = sym2(Eps0*d[0], Eps0*d[1], Eps0*d[2])
		dC0[pi] = sym2(Eps0*d0[0], Eps0*d0[1], Eps0*d0[2])
	}
	return dC, dC0, nil
}

// rectDerivative writes into dk the derivative of the stiffness of a
// rectangular element of m (nodes ns) that stays rectangular under the
// motion to mp over the step h, in closed form: with K = (b/6a)·Kx +
// (a/6b)·Ky (rectStiffness), dK = (ḃ/b − ȧ/a)·((b/6a)·Kx − (a/6b)·Ky). It
// reports false for any other element.
func rectDerivative(dk []float64, m *mesh, ns [4]int, mp *mesh, h float64) bool {
	x, y := m.x, m.y
	if !(x[ns[0]] == x[ns[3]] && x[ns[1]] == x[ns[2]] && y[ns[0]] == y[ns[1]] && y[ns[2]] == y[ns[3]]) {
		return false
	}
	var dx, dy [4]float64
	for a, n := range ns {
		dx[a], dy[a] = mp.x[n]-x[n], mp.y[n]-y[n]
	}
	a, b := x[ns[1]]-x[ns[0]], y[ns[3]]-y[ns[0]]
	tol := rigidTol*h + 1e-15*(math.Abs(x[ns[2]])+math.Abs(y[ns[2]]))
	if math.Abs(dx[0]-dx[3]) > tol || math.Abs(dx[1]-dx[2]) > tol || math.Abs(dy[0]-dy[1]) > tol || math.Abs(dy[2]-dy[3]) > tol {
		return false
	}
	r := ((dy[3]-dy[0])/b - (dx[1]-dx[0])/a) / h
	fx, fy := r*b/(6*a), -r*a/(6*b)
	for i := range dk[:16] {
		dk[i] = fx*rectKx[i] + fy*rectKy[i]
	}
	return true
}

// rigidTol is the relative difference of node motions (in units of the
// step) below which an element counts as translated, not deformed.
const rigidTol = 1e-7

func sym2(a, b, c float64) [2][2]float64 { return [2][2]float64{{a, b}, {b, c}} }
