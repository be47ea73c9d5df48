package registration

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
)

const (
	mm = 1e-3
	um = 1e-6
	in = 0.0254
)

func fixed(v float64) Term { return Term{Mean: v} }

// TestDisplaceFacts checks the first-order affine field against values worked
// by hand from d = t + θ·ẑ×r + diag(s)·r [calculated here]: for sx = 300 ppm,
// sy = 200 ppm, θ = 50 µrad, t = (10, −5) µm at r = (304.8, 228.6) mm,
// dx = 10 + 91.44 − 11.43 = 90.01 µm and dy = −5 + 45.72 + 15.24 = 55.96 µm.
func TestDisplaceFacts(t *testing.T) {
	v := [NumTerms]float64{OffsetX: 10 * um, OffsetY: -5 * um, Rotation: 50e-6, ScaleX: 300e-6, ScaleY: 200e-6}
	tests := []struct{ p, want panel.Vec }{
		{panel.Vec{X: 304.8 * mm, Y: 228.6 * mm}, panel.Vec{X: 90.01 * um, Y: 55.96 * um}},
		{panel.Vec{X: -304.8 * mm, Y: 228.6 * mm}, panel.Vec{X: -92.87 * um, Y: 25.48 * um}},
	}
	for _, tt := range tests {
		d := Displace(v, tt.p, panel.Vec{})
		if math.Abs(d.X-tt.want.X) > 0.006*um || math.Abs(d.Y-tt.want.Y) > 0.006*um {
			t.Errorf("at %v: %v µm, want %v µm", tt.p, panel.Vec{X: d.X / um, Y: d.Y / um}, panel.Vec{X: tt.want.X / um, Y: tt.want.Y / um})
		}
	}
}

func TestRelativeAnalytic(t *testing.T) {
	p := panel.Vec{X: 8 * in, Y: -6 * in}
	tests := []struct {
		name          string
		c             []Contributor
		u             panel.Vec
		across, along float64
	}{
		// A pure scale of the upper layer moves p by s·(p − p0); lines along y see
		// the x part across them: n = ẑ×ŷ = −x̂, so δ = −s·x.
		{"scale x, lines along y", []Contributor{{Layers: []string{"A"}, Terms: [NumTerms]Term{ScaleX: fixed(100e-6)}}},
			panel.Vec{Y: 1}, -100e-6 * 8 * in, 0},
		{"scale y, lines along x", []Contributor{{Layers: []string{"A"}, Terms: [NumTerms]Term{ScaleY: fixed(100e-6)}}},
			panel.Vec{X: 1}, 100e-6 * -6 * in, 0},
		// A pure rotation moves p by θ·|r| perpendicular to r: with lines along r
		// the whole θ·|r| lies across them.
		{"rotation, lines along r", []Contributor{{Layers: []string{"A"}, Terms: [NumTerms]Term{Rotation: fixed(50e-6)}}},
			panel.Vec{X: 0.8, Y: -0.6}, 50e-6 * 10 * in, 0},
		// A contributor naming both layers (the core carrying both traces) cancels.
		{"shared contributor cancels", []Contributor{{Layers: []string{"A", "B"}, Terms: [NumTerms]Term{ScaleX: fixed(300e-6), Rotation: fixed(1e-4), OffsetX: fixed(50 * um)}}},
			panel.Vec{Y: 1}, 0, 0},
		// The lower layer enters with the opposite sign.
		{"lower layer offset", []Contributor{{Layers: []string{"B"}, Terms: [NumTerms]Term{OffsetY: fixed(20 * um)}}},
			panel.Vec{X: 1}, -20 * um, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := &Model{Contributors: tt.c}
			r := m.Relative("A", "B")
			s := r.Stats(r.Row(p, tt.u))
			if math.Abs(s.MeanAcross-tt.across) > 1e-12 || math.Abs(s.MeanAlong-tt.along) > 1e-12 {
				t.Errorf("across %.6g along %.6g, want %.6g, %.6g", s.MeanAcross, s.MeanAlong, tt.across, tt.along)
			}
		})
	}
}

func TestRelativeFacts(t *testing.T) {
	// Worked by hand from the model [calculated here]: layer A as in
	// TestDisplaceFacts against B at a uniform 250 ppm moves (13.81, −1.19) µm
	// at (304.8, 228.6) mm. The across offset is n·Δd with n = ẑ×u: lines along
	// x (n = ŷ) see −1.19 µm, lines along y (n = −x̂) see −13.81 µm.
	m := &Model{Contributors: []Contributor{
		{Layers: []string{"A"}, Terms: [NumTerms]Term{OffsetX: fixed(10 * um), OffsetY: fixed(-5 * um), Rotation: fixed(50e-6), ScaleX: fixed(300e-6), ScaleY: fixed(200e-6)}},
		{Layers: []string{"B"}, Terms: [NumTerms]Term{ScaleX: fixed(250e-6), ScaleY: fixed(250e-6)}},
	}}
	r := m.Relative("A", "B")
	p := panel.Vec{X: 304.8 * mm, Y: 228.6 * mm}
	alongX := r.Stats(r.Row(p, panel.Vec{X: 1}))
	alongY := r.Stats(r.Row(p, panel.Vec{Y: 1}))
	if math.Abs(alongX.MeanAcross+1.19*um) > 0.006*um || math.Abs(alongX.MeanAlong-13.81*um) > 0.006*um {
		t.Errorf("lines along x: across %.3f µm along %.3f µm", alongX.MeanAcross/um, alongX.MeanAlong/um)
	}
	if math.Abs(alongY.MeanAcross+13.81*um) > 0.006*um {
		t.Errorf("lines along y: across %.3f µm", alongY.MeanAcross/um)
	}
}

// TestStatsMonteCarlo checks the closed-form mean and sigma against a Monte
// Carlo of the same terms: the sample mean is within 4 standard errors and the
// sample variance within 4 of its standard errors (σ²·√(2/(n−1)) for a normal
// sample, larger for a uniform one, which has a lighter tail: bound kept).
func TestStatsMonteCarlo(t *testing.T) {
	m := &Model{Datum: panel.Vec{X: 1 * in}, Contributors: []Contributor{
		{Layers: []string{"A", "B"}, Terms: [NumTerms]Term{ScaleX: {Mean: -180e-6, Spread: 40e-6, Dist: Normal}}},
		{Layers: []string{"A"}, Terms: [NumTerms]Term{OffsetX: {Spread: 9 * um, Dist: Normal}, Rotation: {Spread: 8e-6, Dist: Normal}, ScaleY: {Mean: 20e-6, Spread: 15e-6, Dist: Uniform}}, SiteSigma: 4 * um},
		{Layers: []string{"B"}, Terms: [NumTerms]Term{OffsetY: {Mean: 5 * um, Spread: 12 * um, Dist: Uniform}, Skew: {Spread: 20e-6, Dist: Normal}}},
	}}
	r := m.Relative("A", "B")
	rng := rand.New(rand.NewPCG(1, 2))
	for _, u := range []panel.Vec{{X: 1}, {Y: 1}, {X: 0.6, Y: 0.8}} {
		row := r.Row(panel.Vec{X: 7 * in, Y: 10 * in}, u)
		want := r.Stats(row)
		const n = 200000
		d := m.NewDraw()
		var sum, sum2 float64
		for range n {
			m.Sample(rng, d)
			v := r.Collapse(d)
			x := row.AcrossAt(&v) + math.Sqrt(r.SiteVar)*rng.NormFloat64()
			sum += x
			sum2 += x * x
		}
		mean := sum / n
		vr := (sum2 - n*mean*mean) / (n - 1)
		se := want.SDAcross / math.Sqrt(n)
		if math.Abs(mean-want.MeanAcross) > 4*se {
			t.Errorf("u %v: MC mean %.4g, closed form %.4g (se %.2g)", u, mean, want.MeanAcross, se)
		}
		seVar := want.SDAcross * want.SDAcross * math.Sqrt(2.0/(n-1))
		if math.Abs(vr-want.SDAcross*want.SDAcross) > 4*seVar {
			t.Errorf("u %v: MC sd %.4g, closed form %.4g", u, math.Sqrt(vr), want.SDAcross)
		}
	}
}

func TestBudgetSums(t *testing.T) {
	m := &Model{Contributors: []Contributor{
		{Layers: []string{"A"}, Terms: [NumTerms]Term{OffsetX: {Spread: 9 * um, Dist: Normal}, ScaleY: {Spread: 15e-6, Dist: Uniform}}, SiteSigma: 4 * um},
		{Layers: []string{"B"}, Terms: [NumTerms]Term{Rotation: {Spread: 20e-6, Dist: Normal}}},
	}}
	r := m.Relative("A", "B")
	row := r.Row(panel.Vec{X: 3 * in, Y: -9 * in}, panel.Vec{X: 0.6, Y: 0.8})
	var total float64
	for _, s := range r.Budget(nil, row) {
		total += s.Variance
	}
	sd := r.Stats(row).SDAcross
	if math.Abs(total-sd*sd) > 1e-12*sd*sd {
		t.Errorf("budget sums to %g, variance %g", total, sd*sd)
	}
}

func TestGrid(t *testing.T) {
	src := "x [in],y [in],dx [mil],dy [um]\n-1,-1,0,0\n1,-1,2,0\n-1,1,0,10\n1,1,2,10\n"
	g, err := ReadGrid(strings.NewReader(src), "r.csv")
	if err != nil {
		t.Fatal(err)
	}
	d := g.At(panel.Vec{X: 0.5 * in, Y: 0})
	if math.Abs(d.X-1.5*25.4*um) > 1e-15 || math.Abs(d.Y-5*um) > 1e-15 {
		t.Errorf("bilinear at (0.5, 0) in: %v", d)
	}
	if d := g.At(panel.Vec{X: 5 * in, Y: 5 * in}); math.Abs(d.X-2*25.4*um) > 1e-15 {
		t.Errorf("clamped: %v", d)
	}
	for _, bad := range []string{
		"x [in],y [in],dx,dy [mil]\n0,0,0,0\n",
		"x [in],y [in],dx [furlong],dy [mil]\n0,0,0,0\n",
		"x [in],y [in],dx [mil],dy [mil]\n0,0,zero,0\n",
		"x [in],y [in],dx [mil],dy [mil]\n0,0,0,0\n1,0,0,0\n0,1,0,0\n",
	} {
		if _, err := ReadGrid(strings.NewReader(bad), "r.csv"); err == nil || !strings.Contains(err.Error(), "r.csv") {
			t.Errorf("accepted or unnamed: %q: %v", bad, err)
		}
	}
}

// BenchmarkSiteEval times one Monte Carlo draw and the across offset at
// 10,000 sites from it, the inner loop of the yield study.
func BenchmarkSiteEval(b *testing.B) {
	m := &Model{Contributors: []Contributor{
		{Layers: []string{"A"}, Terms: [NumTerms]Term{OffsetX: {Spread: 9 * um, Dist: Normal}, ScaleY: {Spread: 15e-6, Dist: Normal}}},
		{Layers: []string{"B"}, Terms: [NumTerms]Term{Rotation: {Spread: 20e-6, Dist: Normal}}},
	}}
	r := m.Relative("A", "B")
	rows := make([]Row, 10000)
	for i := range rows {
		rows[i] = r.Row(panel.Vec{X: float64(i%100) * 0.004, Y: float64(i/100) * 0.005}, panel.Vec{X: 1})
	}
	d := m.NewDraw()
	rng := rand.New(rand.NewPCG(1, 1))
	var sink float64
	b.ReportAllocs()
	for b.Loop() {
		m.Sample(rng, d)
		v := r.Collapse(d)
		for i := range rows {
			sink += rows[i].AcrossAt(&v)
		}
	}
	b.ReportMetric(float64(b.N*len(rows))/b.Elapsed().Seconds(), "sites/s")
	_ = sink
}

func FuzzReadGrid(f *testing.F) {
	f.Add("x [in],y [in],dx [mil],dy [um]\n-1,-1,0,0\n1,-1,2,0\n-1,1,0,10\n1,1,2,10\n")
	f.Add("x [in],y [in],dx [mil],dy [mil]\n\"0,0,0,0\n")
	f.Fuzz(func(t *testing.T, src string) {
		g, err := ReadGrid(strings.NewReader(src), "fuzz.csv")
		if err != nil {
			return
		}
		d := g.At(panel.Vec{X: 0.1, Y: -0.2})
		if math.IsNaN(d.X) || math.IsNaN(d.Y) {
			t.Fatalf("NaN displacement from %q", src)
		}
	})
}
