package drift

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// TestMCTab: the Monte Carlo table's mean and per-site variance (and
// those of the fallback outside the table, slowAt) agree
// with the same quantities from the curve itself (section.Curve.Coupling,
// the monotone cubic the closed form reads) and Proc.rows (the
// sensitivities' linear interpolation) at random offsets over the whole
// table, for random panel deviations, with the shape groups in one row
// (two groups) and beyond it (six: mcMore). The cubic is refitted from four
// samples per table interval, which reproduces it up to rounding; the
// variance is the exact expansion of the same sums. Measured here: 2.2e-15
// dB and 4.7e-16 relative, double rounding (a -3 dB coupling carries
// 4.4e-16 dB per operation); the bounds of 1e-12 are about 500 times that,
// room for other curves' rounding, and still ten orders below any spec
// tolerance (0.01 dB and up), so a real mismatch (a wrong cubic, a wrong
// interval) fails them. The hot path of InSpec and its general form
// (inSpecAt, through at) decide alike on the same draws.
func TestMCTab(t *testing.T) {
	dome := process.Shape{Kind: process.Dome, Amplitude: 0.12 * mil}
	tilt := func(y bool) process.Shape { return process.Shape{Kind: process.Tilt, Amplitude: 0.6 * mil, AlongY: y} }
	edge := func(l float64) process.Shape {
		return process.Shape{Kind: process.Edge, Amplitude: 0.1 * mil, Decay: l}
	}
	for _, c := range []struct {
		name       string
		terms      []process.Term
		nb, groups int
	}{
		{"two groups", []process.Term{
			{Name: "c2", Layer: "C2", Quantity: process.Thickness, Panel: term(0, 0.06*mil), SiteSigma: 0.03 * mil, Shape: dome},
			{Name: "w3", Layer: "L3", Quantity: process.Width, Panel: term(0, 0.4*mil), SiteSigma: 0.1 * mil, Shape: tilt(false)},
			{Name: "e4", Layer: "L4", Quantity: process.Etch, Panel: term(0, 0.1*mil)},
			// A second dome: one shape group of two terms.
			{Name: "er2", Layer: "C2", Quantity: process.Er, Panel: term(0, 0.02), Shape: process.Shape{Kind: process.Dome, Amplitude: 0.04}}}, 4, 2},
		{"six groups", []process.Term{
			{Name: "c2", Layer: "C2", Quantity: process.Thickness, Panel: term(0, 0.06*mil), SiteSigma: 0.03 * mil, Shape: dome},
			{Name: "w3", Layer: "L3", Quantity: process.Width, Panel: term(0, 0.4*mil), SiteSigma: 0.1 * mil, Shape: tilt(false)},
			{Name: "w4", Layer: "L4", Quantity: process.Width, Panel: term(0, 0.4*mil), Shape: tilt(true)},
			{Name: "cu3", Layer: "L3", Quantity: process.Copper, Panel: term(0, 0.1*mil), SiteSigma: 0.02 * mil, Shape: edge(1 * inch)},
			{Name: "cu4", Layer: "L4", Quantity: process.Copper, Panel: term(0, 0.1*mil), Shape: edge(2 * inch)},
			{Name: "e3", Layer: "L3", Quantity: process.Etch, Panel: term(0, 0.1*mil), Shape: edge(3 * inch)}}, 6, 6},
	} {
		t.Run(c.name, func(t *testing.T) { testMCTab(t, c.terms, c.nb, c.groups) })
	}
}

func testMCTab(t *testing.T, terms []process.Term, nb, groups int) {
	s := namedPair("mct", section.Spec{Coupling: -3, Tolerance: 0.08})
	arr := panel.Array{Part: "p", Count: [2]int{2, 2}, Pitch: panel.Vec{X: 4 * inch, Y: 6 * inch}}
	l, inst, sites := layout(t, "mct", 90, arr)
	pm := &process.Model{Size: l.Panel.Size, Terms: terms}
	in := &Input{Layout: l, Instances: inst, Sites: sites, Sections: []*section.Section{s}, Model: &registration.Model{}, Process: pm}
	a, err := Analyse(t.Context(), in, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	pc := newProcCheck(a)
	if pc == nil {
		t.Fatal("no process check")
	}
	if mt := pc.tabs[0]; mt.nb != nb || len(mt.groups) != groups {
		t.Fatalf("%d bindings in %d shape groups, want %d in %d", mt.nb, len(mt.groups), nb, groups)
	}
	const (
		meanBound = 1e-12 // dB
		varBound  = 1e-12 // relative
	)
	rng := rand.New(rand.NewPCG(1, 2))
	w := pc.NewWorker().(*procCheckWorker)
	var r registration.Stream
	offs := make([]float64, registration.MCGroup)
	nrm := make([]float64, registration.MCGroup)
	var worstM, worstV float64
	var row procRow
	for range 200 {
		for t := range w.dev {
			w.dev[t] = 0.2 * mil * rng.NormFloat64()
		}
		// One panel in every slot, for the hot path and the general one
		// below.
		for p := range registration.MCGroup {
			w.newPanel(p)
		}
		for k := range pc.sites {
			ps := &pc.sites[k]
			if ps.tab == nil {
				t.Fatalf("site %d unclaimed", k)
			}
			mt := ps.tab
			ev := mt.ev
			x := rng.Float64() * mt.last
			off := mt.lo + x*mt.step
			c, shape, flat, v := w.at(0, ps, x)
			m := c + mt.window.spec + shape + flat // c less spec
			ev.Proc.row(&row, a.Sites[k].Site.Pos)
			// The row's cubic holds the section's e₀ too, with a
			// second-order term (0 without); the site's own part is
			// InSpec's.
			e0, _, _ := ev.Proc.secondAt(off, siteSecond{})
			wm, wv := ev.Curve.Coupling(off)+e0, 0.0
			for b, mu := range row.means() {
				sb := ev.termSens(b, off)
				wm += sb * (mu + w.dev[ev.Proc.Bind[b].Term])
				wv += sb * sb * mt.sv[b]
			}
			// The fallback for offsets outside the table is the same sum.
			if sc, sl, sv := w.slowAt(0, k, off); math.Abs(sc+sl+e0-wm) > meanBound || math.Abs(sv-wv) > varBound*wv {
				t.Fatalf("site %d at %g mil: slow path %g, %g against %g, %g", k, off/mil, sc+sl, sv, wm, wv)
			}
			// The hot path and the general one alike on the same draws,
			// for offsets about the table's middle (where the window is
			// met and missed), some beyond the table, and on the domain's
			// ends and the offsets just outside them (the rows there are
			// not inner ones, mcTab.inner).
			for p := range offs {
				offs[p] = mt.lo + (0.5+0.3*rng.NormFloat64())*mt.last*mt.step
			}
			d := mt.domain
			copy(offs, []float64{d.Lo, d.Hi, math.Nextafter(d.Lo, math.Inf(-1)), math.Nextafter(d.Hi, math.Inf(1))})
			r.Seed(3, uint64(k))
			r.Norms(nrm)
			if hot, gen := w.InSpec(k, offs, nrm), w.inSpecAt(k, offs, nrm); hot != gen {
				t.Fatalf("site %d: InSpec %08b, inSpecAt %08b", k, hot, gen)
			}
			worstM = math.Max(worstM, math.Abs(m-wm))
			if wv > 0 {
				worstV = math.Max(worstV, math.Abs(v-wv)/wv)
			}
		}
	}
	t.Logf("worst mean difference %.3g dB, variance %.3g relative", worstM, worstV)
	if worstM > meanBound || worstV > varBound {
		t.Errorf("table against the curve: mean %.3g dB (bound %g), variance %.3g (bound %g)", worstM, meanBound, worstV, varBound)
	}
}

// TestMCSecondHotSlow: with a strong second-order term (curvedInput) the
// hot path of InSpec, which reads the table (mcRow with its mcSecond),
// and the slow path, which reads the curve, Proc.rows and Proc.secondAt
// (inSpecSlow, inSpecSlowSecond), decide alike on the same panels,
// offsets and normal draws over the whole domain. The two sum the same
// model in different orders, so a draw whose coupling lies within
// edgeBound of a window edge may go either way and is left out; TestMCTab
// measures the table's difference from the curve at 2.2e-15 dB, and
// edgeBound is a million times that, still far below any tolerance.
func TestMCSecondHotSlow(t *testing.T) {
	const edgeBound = 1e-9 // dB
	in := curvedInput(t, "hotslow", 0.15)
	a, err := Analyse(t.Context(), in, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	pc := newProcCheck(a)
	if pc == nil || pc.tabs[0].ev.Proc.second == nil || !pc.tabs[0].covers || !pc.tabs[0].site {
		t.Fatal("no second-order term on the table's hot path with per-site parts")
	}
	mt := pc.tabs[0]
	w := pc.NewWorker().(*procCheckWorker)
	rng := rand.New(rand.NewPCG(5, 6))
	offs := make([]float64, registration.MCGroup)
	nrm := make([]float64, registration.MCGroup)
	var r registration.Stream
	var in1, out, near int
	for trial := range 400 {
		for p := range registration.MCGroup {
			for t := range w.dev {
				w.dev[t] = 0.8 * mil * rng.NormFloat64()
			}
			w.newPanel(p)
		}
		for k := range pc.sites {
			for p := range offs {
				offs[p] = mt.domain.Lo + rng.Float64()*(mt.domain.Hi-mt.domain.Lo)
			}
			r.Seed(9, uint64(trial*len(pc.sites)+k))
			r.Norms(nrm) // the same normals for the slow path
			hot := w.InSpec(k, offs, nrm)
			for p, o := range offs {
				c, lin, v := w.slowAt(p, k, o)
				m := w.slowSecond(p, k, o, c, lin, v, nrm[p])
				if math.Abs(math.Abs(m-mt.window.spec)-mt.window.tol) < edgeBound {
					near++
					continue
				}
				slow := w.inSpecSlow(p, k, o, nrm[p])
				if slow != (hot>>p&1 == 1) {
					t.Fatalf("trial %d, site %d, slot %d at %.4f mil: hot path %v, slow path %v (coupling %.6f dB)", trial, k, p, o/mil, !slow, slow, m)
				}
				if slow {
					in1++
				} else {
					out++
				}
			}
		}
	}
	t.Logf("%d draws in spec, %d out, %d within %g dB of an edge", in1, out, near, edgeBound)
	if in1 < 1000 || out < 1000 {
		t.Errorf("%d draws in spec and %d out: the case should meet and miss the window", in1, out)
	}
}
