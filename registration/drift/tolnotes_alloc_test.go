package drift

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// allocRootSlack is how many times the root finder's own tolerance the
// checks below allow: the root find stops with the worst-site P within
// AllocPTol of the target or with the root inside a bracket of AllocTol·k
// about k (half a width away at most); 2 leaves room for the last digits
// of the worst-site P, which moves by about 0.1 to 1 per unit of k in these
// fixtures.
const allocRootSlack = 2.0

// TestAllocateDeterministicAlone: an edge-coupled microstrip pair (both
// traces on L1: no registration moves it) whose etched width has a panel
// mean and a tilt along y that by themselves take the far sites out of
// spec, so that no scale of the σ alone can reach the target. Scaling
// every deviation from nominal by k gives an allocation, and with no
// offset spread the evaluator's site is exactly normal in coupling,
// C = c₀ + s·Δw with Δw ~ N(k·μ(p), (k·σ)²), s the solver's sensitivity
// at the design offset and μ(p) = panel mean + A·y/H (the tilt's
// definition, process.Shape.At). So the worst site's P(in spec) at the
// reported k is Φ((hi − m)/sd) − Φ((lo − m)/sd) with m = c₀ + s·k·μ(p),
// sd = |s|·k·σ (the normal distribution, Abramowitz & Stegun 26.2.2;
// evaluated with gonum's distuv.UnitNormal, outside the project), and it
// must equal the target within the root finder's tolerance. The note for
// the width is k·(min μ − 3σ) to k·(max μ + 3σ) over the sites. The
// section and the process are invented for the test.
func TestAllocateDeterministicAlone(t *testing.T) {
	s := microstripPair()
	s.Name = "alloc-ms"
	set := testSettings(t)
	set.Sensitivities = true
	c, err := SolveSection(t.Context(), s, 3*mil, set)
	if err != nil {
		t.Fatal(err)
	}
	// A window of ±0.3 dB about the design's own coupling (rounded).
	s.Spec = section.Spec{Coupling: math.Round(c.Nominal*100) / 100, Tolerance: 0.3}
	if c, err = SolveSection(t.Context(), s, 3*mil, set); err != nil {
		t.Fatal(err)
	}
	pmProbe := &process.Model{Terms: []process.Term{{Name: "w", On: "L1", Layer: "L1", Quantity: process.Width}}}
	bind, _, ok := pmProbe.Bind(s, c.Curve.Params())
	if !ok || len(bind) != 1 {
		t.Fatalf("bindings %+v", bind)
	}
	nom := s.NominalOffset()
	var sw float64
	for _, k := range bind[0].Params {
		sw += c.Curve.CouplingSensitivity(k, nom)
	}
	if sw == 0 {
		t.Fatal("no width sensitivity")
	}
	// The width change that alone reaches the spec limit it moves toward.
	limit := s.Spec.Coupling + math.Copysign(s.Spec.Tolerance, sw)
	wEdge := (limit - c.Nominal) / sw
	arr := panel.Array{Part: "p", Count: [2]int{1, 3}, Pitch: panel.Vec{X: inch, Y: 8 * inch}}
	l, inst, sites := layout(t, s.Name, 90, arr)
	tm := process.Term{Name: "etch drift L1", On: "L1", Layer: "L1", Quantity: process.Width,
		Panel:     registration.Term{Mean: 0.7 * wEdge},
		Shape:     process.Shape{Kind: process.Tilt, AlongY: true, Amplitude: 0.8 * wEdge},
		SiteSigma: 0.1 * math.Abs(wEdge)}
	pm := &process.Model{Size: l.Panel.Size, Terms: []process.Term{tm}}
	in := &Input{Layout: l, Instances: inst, Sites: sites, Sections: []*section.Section{s}, Model: &registration.Model{}, Process: pm}

	mu := func(p panel.Vec) float64 { return tm.Panel.Mean + tm.Shape.Amplitude*p.Y/l.Panel.Size.Y }
	muLo, muHi := math.Inf(1), math.Inf(-1)
	for _, st := range sites {
		muLo, muHi = math.Min(muLo, mu(st.Pos)), math.Max(muHi, mu(st.Pos))
	}
	lo, hi := s.Spec.Coupling-s.Spec.Tolerance, s.Spec.Coupling+s.Spec.Tolerance
	// The fixture's premise: the mean alone is out of spec at a far site.
	out := false
	for _, st := range sites {
		if m := c.Nominal + sw*mu(st.Pos); m < lo || m > hi {
			out = true
		}
	}
	if !out {
		t.Fatal("fixture: the means alone leave every site in spec")
	}
	worstRef := func(k float64) float64 {
		p := 1.0
		for _, st := range sites {
			m, sd := c.Nominal+sw*k*mu(st.Pos), math.Abs(sw)*k*tm.SiteSigma
			p = math.Min(p, distuv.UnitNormal.CDF((hi-m)/sd)-distuv.UnitNormal.CDF((lo-m)/sd))
		}
		return p
	}
	if p := worstRef(1); p > 0.5 {
		t.Fatalf("fixture: the worst site at k = 1 is in spec with P %.4f", p)
	}

	curves, err := SolveCurves(t.Context(), set, New(in, nil))
	if err != nil {
		t.Fatal(err)
	}
	// The reference is the first-order model's exact normal; the
	// second-order term (tested in variation_quad_test.go, its scaling in
	// TestSecondOrderScaled) is taken out so that the rule alone is tested.
	for _, c := range curves {
		if c != nil {
			c.Second = nil
		}
	}
	al := Allocate(in, curves, DefaultTarget)
	if !al.Feasible {
		t.Fatalf("no allocation: %s", al.Reason)
	}
	got := worstRef(al.K)
	width := AllocTol * al.K
	slope := math.Abs(worstRef(al.K*(1+1e-4))-worstRef(al.K*(1-1e-4))) / (2e-4 * al.K)
	t.Logf("k %.7f; worst site P %.10f by the tool, %.10f by the closed form; slope %.3f per unit k", al.K, al.WorstP, got, slope)
	allowed := allocRootSlack * math.Max(AllocPTol, slope*width)
	if d := math.Abs(got - DefaultTarget); d > allowed {
		t.Errorf("closed-form worst-site P at k %.7f: %.10f, target %.4f (off by %.3g, allowed %.3g)", al.K, got, DefaultTarget, d, allowed)
	}
	if len(al.Terms) != 1 {
		t.Fatalf("notes %+v", al.Terms)
	}
	n := al.Terms[0]
	wantLo, wantHi := al.K*(muLo-3*tm.SiteSigma), al.K*(muHi+3*tm.SiteSigma)
	if math.Abs(n.Low-wantLo) > 1e-12*math.Abs(wantLo) || math.Abs(n.High-wantHi) > 1e-12*math.Abs(wantHi) {
		t.Errorf("width note %g to %g mil, want %g to %g", n.Low/mil, n.High/mil, wantLo/mil, wantHi/mil)
	}
	if n.Parameter != "etched width on L1" || n.Nominal != s.Traces[0].Width || n.Per != "m" {
		t.Errorf("note %+v", n)
	}
}

// TestAllocateFixedRegistration: a centred broadside pair whose upper layer
// has a fixed offset of 1.3 times its offset tolerance (the allowed
// interval's half-width) and a per-site scatter: every site is out of spec
// whatever the scatter, yet scaling the fixed offset with the rest gives
// an allocation. At the reported k the worst-site P(in spec), by the one
// site evaluator on the input scaled by hand, straddles the target at
// k·(1 ∓ 2·AllocTol) (the root lies within half a bracket width of k, or
// closer where P came within AllocPTol, which here is 1e-9 / 0.2 per unit
// k = 5e-9 of k, well inside), and the registration note is the across offset's mean ± 3σ: the
// fixed offset, and the site σ, both times k. The section and the model
// are invented for the test.
func TestAllocateFixedRegistration(t *testing.T) {
	s := namedPair("alloc-reg", section.Spec{Coupling: -3, Tolerance: 0.1})
	c, err := SolveSection(t.Context(), s, 3*mil, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	if !c.DesignInSpec {
		t.Fatalf("design out of spec: %.4f dB", c.Nominal)
	}
	half := math.Min(c.Allowed.Hi-s.NominalOffset(), s.NominalOffset()-c.Allowed.Lo)
	fixed, site := 1.3*half, 0.1*half
	model := func(k float64) *registration.Model {
		return &registration.Model{Contributors: []registration.Contributor{{Name: "L3 fixed", Layers: []string{"L3"},
			Terms: [registration.NumTerms]registration.Term{registration.OffsetX: {Mean: k * fixed}}, SiteSigma: k * site}}}
	}
	arr := panel.Array{Part: "p", Count: [2]int{2, 2}, Pitch: panel.Vec{X: 4 * inch, Y: 6 * inch}}
	l, inst, sites := layout(t, s.Name, 90, arr)
	in := &Input{Layout: l, Instances: inst, Sites: sites, Sections: []*section.Section{s}, Model: model(1)}
	curves, err := SolveCurves(t.Context(), testSettings(t), New(in, nil))
	if err != nil {
		t.Fatal(err)
	}
	// The worst site on the same curves, the model rebuilt by hand at k.
	worstAt := func(k float64) float64 {
		sc := *in
		sc.Model = model(k)
		a := New(&sc, nil)
		a.Evaluate(curves)
		p := 1.0
		for i := range a.Sites {
			p = math.Min(p, a.Sites[i].PInSpec)
		}
		return p
	}
	if p := worstAt(1); p > 0.5 {
		t.Fatalf("fixture: the worst site at k = 1 is in spec with P %.4f", p)
	}
	al := Allocate(in, curves, DefaultTarget)
	if !al.Feasible {
		t.Fatalf("no allocation: %s", al.Reason)
	}
	below, above := worstAt(al.K*(1-allocRootSlack*AllocTol)), worstAt(al.K*(1+allocRootSlack*AllocTol))
	t.Logf("k %.7f: worst P %.8f at k(1−%g·tol), %.8f at k(1+%g·tol), %.8f by the tool", al.K, below, allocRootSlack, above, allocRootSlack, al.WorstP)
	if !(below >= DefaultTarget && above <= DefaultTarget) {
		t.Errorf("the worst-site P does not cross the target %.4f within %g·AllocTol of k %.7f: %.8f below, %.8f above",
			DefaultTarget, allocRootSlack, al.K, below, above)
	}
	if len(al.Terms) != 1 || al.Terms[0].Term != "" {
		t.Fatalf("notes %+v", al.Terms)
	}
	n := al.Terms[0]
	// Lines along y: the across offset is ±x, the fixed offset's sign
	// depending on the across direction; its scatter the site σ.
	mid, spread := (n.High+n.Low)/2, (n.High-n.Low)/2
	const rel = 1e-9 // a sum of a few products of order 1 (calculated here)
	if math.Abs(math.Abs(mid)-al.K*fixed) > rel*fixed || math.Abs(spread-3*al.K*site) > rel*fixed {
		t.Errorf("registration note %+.4f to %+.4f mil, want ±%.4f ± %.4f mil", n.Low/mil, n.High/mil, al.K*fixed/mil, 3*al.K*site/mil)
	}
	if n.Parameter != "L3–L4 layer-to-layer registration" {
		t.Errorf("note %+v", n)
	}
}

// TestAllocateDesignOutOfSpec: a design that is itself out of spec has no
// allocation, and says why.
func TestAllocateDesignOutOfSpec(t *testing.T) {
	s := namedPair("alloc-out", section.Spec{Coupling: -10, Tolerance: 0.1})
	l, inst, sites := layout(t, s.Name, 90, panel.Array{Part: "p", Count: [2]int{1, 1}, Pitch: panel.Vec{X: inch, Y: inch}})
	in := &Input{Layout: l, Instances: inst, Sites: sites, Sections: []*section.Section{s},
		Model: &registration.Model{Contributors: []registration.Contributor{{Name: "L3", Layers: []string{"L3"}, SiteSigma: 0.5 * mil}}}}
	curves, err := SolveCurves(t.Context(), testSettings(t), New(in, nil))
	if err != nil {
		t.Fatal(err)
	}
	if curves[0].DesignInSpec {
		t.Fatalf("fixture: design in spec at %.3f dB", curves[0].Nominal)
	}
	if al := Allocate(in, curves, DefaultTarget); al.Feasible || al.Reason == "" {
		t.Errorf("allocation %+v", al)
	}
}

// TestSecondOrderScaled: for a coupling exactly quadratic in one
// parameter, f(Δp) = s·Δp + ½·h·Δp², the second-order term fitted by the
// package's definitions (variation_quad.go: the parabola through t = −3, 0,
// +3 about the mean μ, e₀ = C₀ − s·μ, κ = b/|a|, ρ = q/|a|², |a| = |s|·σ)
// at k·μ and k·σ equals the term fitted at μ and σ scaled by
// SecondOrder.Scaled(k), to rounding. The quadratic and its numbers are
// invented for the test; the parabola through three points is Newton's
// divided differences (Abramowitz & Stegun 25.2.4).
func TestSecondOrderScaled(t *testing.T) {
	const s, h = -0.8, 0.35 // dB per unit, dB per unit²
	f := func(dp float64) float64 { return s*dp + h*dp*dp/2 }
	fit := func(mu, sigma float64) *SecondOrder {
		u := math.Copysign(1, s*sigma)
		cm, c0, cp := f(mu-secondT*sigma*u), f(mu), f(mu+secondT*sigma*u)
		a := math.Abs(s) * sigma
		b, q := (cp-cm)/(2*secondT), (cp+cm-2*c0)/(2*secondT*secondT)
		return &SecondOrder{Offsets: []float64{0}, Shift: []float64{c0 - s*mu}, Slope: []float64{b / a}, Curv: []float64{q / (a * a)}}
	}
	for _, c := range []struct{ mu, sigma, k float64 }{{0.4, 0.1, 0.3}, {-0.7, 0.25, 2.5}, {1.2, 0.05, 1}} {
		got, want := fit(c.mu, c.sigma).Scaled(c.k), fit(c.k*c.mu, c.k*c.sigma)
		const tol = 1e-12 // rounding of a few products of numbers near 1
		for _, v := range []struct {
			name string
			g, w float64
		}{{"e0", got.Shift[0], want.Shift[0]}, {"kappa", got.Slope[0], want.Slope[0]}, {"rho", got.Curv[0], want.Curv[0]}} {
			if math.Abs(v.g-v.w) > tol {
				t.Errorf("μ %g σ %g k %g: %s scaled %.15g, fitted at the scaled model %.15g", c.mu, c.sigma, c.k, v.name, v.g, v.w)
			}
		}
	}
}
