package registration

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"

	"github.com/regdrift/regdrift/panel"
)

// gridTargets returns nx × ny targets spread over a w × h area centred on the
// panel centre, displaced by the affine field v about p0 plus N(0, sigma) noise
// per axis.
func gridTargets(pnl, layer string, nx, ny int, w, h float64, v [NumTerms]float64, p0 panel.Vec, sigma float64, rng *rand.Rand) []Target {
	var ts []Target
	for j := 0; j < ny; j++ {
		for i := 0; i < nx; i++ {
			p := panel.Vec{X: -w/2 + w*float64(i)/float64(nx-1), Y: -h/2 + h*float64(j)/float64(ny-1)}
			d := Displace(v, p, p0)
			if sigma > 0 {
				d.X += sigma * rng.NormFloat64()
				d.Y += sigma * rng.NormFloat64()
			}
			ts = append(ts, Target{Panel: pnl, Layer: layer, Name: fmt.Sprintf("T%02d", len(ts)+1), Pos: p, D: d})
		}
	}
	return ts
}

// truth is an invented but plausible layer movement [common practice:
// raw core shrink of a few hundred ppm, rotation and skew of tens of µrad,
// offsets of a mil or so]; it is the input the fit must recover, not a
// reference value.
var truth = [NumTerms]float64{OffsetX: 21 * um, OffsetY: -13 * um, Rotation: 43e-6, ScaleX: -312e-6, ScaleY: -187e-6, Skew: 17e-6}

func modelTruth(m FitModel) [NumTerms]float64 {
	v := truth
	switch m {
	case Similarity:
		v[ScaleY], v[Skew] = v[ScaleX], 0
	case Translation:
		v = [NumTerms]float64{OffsetX: v[OffsetX], OffsetY: v[OffsetY]}
	}
	return v
}

// TestFitExactRecovery fits noise-free targets displaced by known terms: the
// fit must return them to rounding (relative error 1e-9 of each term's size,
// a term of zero within 1e-9 of the typical term size).
func TestFitExactRecovery(t *testing.T) {
	p0 := panel.Vec{X: 1.5 * in, Y: -2 * in}
	for _, m := range []FitModel{Affine, Similarity, Translation} {
		for _, n := range []int{3, 5} {
			t.Run(fmt.Sprintf("%s/%dx%d", m, n, n), func(t *testing.T) {
				v := modelTruth(m)
				ts := gridTargets("P1", "L3", n, n, 16*in, 22*in, v, p0, 0, nil)
				f, err := FitTargets(ts, &FitSettings{Model: m, Datum: p0})
				if err != nil {
					t.Fatal(err)
				}
				for k := range v {
					ref := math.Max(math.Abs(v[k]), math.Abs(truth[k]))
					if e := math.Abs(f.Terms[k] - v[k]); e > 1e-9*ref {
						t.Errorf("%s = %g, want %g (rel err %.2g)", TermKind(k), f.Terms[k], v[k], e/ref)
					}
				}
				if f.Max > 1e-15 {
					t.Errorf("max residual %g m, want 0", f.Max)
				}
			})
		}
	}
}

// TestFitCoverage checks the standard errors: over many noisy panels, the
// 95 % interval term ± t(0.975, dof)·stderr must cover the true term at the
// nominal rate. With 600 trials the binomial standard error of the rate is
// √(0.95·0.05/600) = 0.0089; the test allows 3.5 of them.
func TestFitCoverage(t *testing.T) {
	const trials = 600
	sigma := 0.1 * 25.4 * um
	rng := rand.New(rand.NewPCG(7, 3))
	for _, m := range []FitModel{Affine, Similarity} {
		t.Run(m.String(), func(t *testing.T) {
			v := modelTruth(m)
			var covered [NumTerms]int
			var q float64
			for trial := 0; trial < trials; trial++ {
				ts := gridTargets("P", "L3", 4, 3, 16*in, 22*in, v, panel.Vec{}, sigma, rng)
				f, err := FitTargets(ts, &FitSettings{Model: m})
				if err != nil {
					t.Fatal(err)
				}
				q = distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(f.DOF)}.Quantile(0.975)
				for k := range v {
					if math.Abs(f.Terms[k]-v[k]) <= q*f.StdErr[k] {
						covered[k]++
					}
				}
			}
			se := math.Sqrt(0.95 * 0.05 / trials)
			for k := range v {
				if !m.Estimates(TermKind(k)) {
					continue
				}
				rate := float64(covered[k]) / trials
				if math.Abs(rate-0.95) > 3.5*se {
					t.Errorf("%s: 95 %% interval covered the truth in %.3f of %d trials", TermKind(k), rate, trials)
				}
			}
		})
	}
}

// TestFitAgainstQR compares the equilibrated normal-equations solution with
// gonum's QR least-squares solve of the tall system (mat.QR and
// mat.Dense.Solve, which solves an over-determined system by QR).
func TestFitAgainstQR(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 1))
	p0 := panel.Vec{X: -3 * in, Y: 4 * in}
	for _, m := range []FitModel{Affine, Similarity, Translation} {
		t.Run(m.String(), func(t *testing.T) {
			ts := gridTargets("P", "L3", 5, 4, 16*in, 22*in, truth, p0, 2*um, rng)
			// Irregular positions too: jitter every target.
			for i := range ts {
				ts[i].Pos.X += 0.3 * in * rng.NormFloat64()
				ts[i].Pos.Y += 0.3 * in * rng.NormFloat64()
			}
			f, err := FitTargets(ts, &FitSettings{Model: m, Datum: p0})
			if err != nil {
				t.Fatal(err)
			}
			np := m.Params()
			a := mat.NewDense(2*len(ts), np, nil)
			b := mat.NewDense(2*len(ts), 1, nil)
			for i, tg := range ts {
				ax, ay := columns(m, tg.Pos, p0)
				for k := 0; k < np; k++ {
					a.Set(2*i, k, ax[k])
					a.Set(2*i+1, k, ay[k])
				}
				b.Set(2*i, 0, tg.D.X)
				b.Set(2*i+1, 0, tg.D.Y)
			}
			var qr mat.QR
			qr.Factorize(a)
			var xq, xs mat.Dense
			if err := qr.SolveTo(&xq, false, b); err != nil {
				t.Fatal(err)
			}
			if err := xs.Solve(a, b); err != nil {
				t.Fatal(err)
			}
			got := f.Terms
			if m == Similarity {
				got = [NumTerms]float64{got[0], got[1], got[2], got[3]}
			}
			for k := 0; k < np; k++ {
				ref := math.Abs(truth[k])
				for _, x := range []*mat.Dense{&xq, &xs} {
					if e := math.Abs(got[k] - x.At(k, 0)); e > 1e-9*ref {
						t.Errorf("param %d: normal equations %g, QR %g", k, got[k], x.At(k, 0))
					}
				}
			}
		})
	}
}

// TestHelmertGhilaniWolf fits the published 2-D conformal transformation of
// Ghilani & Wolf, Adjustment Computations, 4th ed. (Wiley 2006), ch. 18
// (chapter from memory; the control points and results are listed in
// REFERENCES.md). Its model E = a·x − b·y + c, N = b·x + a·y + d is the
// similarity fit of the displacement (E − x, N − y) about the origin with
// a = 1 + scale and b = rotation, solved exactly (no small-angle step).
func TestHelmertGhilaniWolf(t *testing.T) {
	ctrl := []struct{ e, n, x, y float64 }{
		{1049422.40, 51089.20, 121.622, -128.066},
		{1049413.95, 49659.30, 141.228, 187.718},
		{1049244.95, 49884.95, 175.802, 135.728},
	}
	var ts []Target
	for i, c := range ctrl {
		ts = append(ts, Target{Panel: "G&W", Layer: "ch18", Name: fmt.Sprint(i + 1),
			Pos: panel.Vec{X: c.x, Y: c.y}, D: panel.Vec{X: c.e - c.x, Y: c.n - c.y}})
	}
	f, err := FitTargets(ts, &FitSettings{Model: Similarity})
	if err != nil {
		t.Fatal(err)
	}
	a, b, c, d := 1+f.Terms[ScaleX], f.Terms[Rotation], f.Terms[OffsetX], f.Terms[OffsetY]
	// Published to the digits given; each tolerance is half a unit of the last.
	checks := []struct {
		name      string
		got, want float64
		tol       float64
	}{
		{"a", a, -4.51249, 5e-6},
		{"b", b, -0.25371, 5e-6},
		{"c", c, 1050003.715, 5e-4},
		{"d", d, 50542.131, 5e-4},
		{"scale", math.Hypot(a, b), 4.519621, 5e-7},
		{"rotation deg", math.Mod(math.Atan2(b, a)*180/math.Pi+360, 360), 183.2181, 5e-5},
		{"S0", f.Sigma0, 0.140, 5e-4},
		{"E of (174.148, -120.262)", a*174.148 - b*-120.262 + c, 1049187.361, 5e-4},
		{"N of (174.148, -120.262)", b*174.148 + a*-120.262 + d, 51040.629, 5e-4},
	}
	// The book's residuals v are corrections to the observations (computed −
	// observed); ours are observed − fitted, the opposite sign.
	vs := [][2]float64{{0.004, -0.029}, {0.101, -0.077}, {-0.105, 0.106}}
	for i, v := range vs {
		checks = append(checks,
			struct {
				name      string
				got, want float64
				tol       float64
			}{fmt.Sprintf("vE%d", i+1), -f.Residual(i).X, v[0], 6e-4},
			struct {
				name      string
				got, want float64
				tol       float64
			}{fmt.Sprintf("vN%d", i+1), -f.Residual(i).Y, v[1], 6e-4})
	}
	for _, ch := range checks {
		if math.Abs(ch.got-ch.want) > ch.tol {
			t.Errorf("%s = %.7f, want %.7f ± %g", ch.name, ch.got, ch.want, ch.tol)
		}
	}
}

// TestRobustFlagsPlantedOutliers plants two mis-measured targets (3 mil and
// 2 mil against 0.1 mil noise) and checks that both robust weightings flag
// exactly them and recover the terms as well as a clean fit would.
func TestRobustFlagsPlantedOutliers(t *testing.T) {
	sigma := 0.1 * 25.4 * um
	for _, rb := range []Robust{Huber, Tukey} {
		for seed := uint64(1); seed <= 5; seed++ {
			t.Run(fmt.Sprintf("%s/seed%d", rb, seed), func(t *testing.T) {
				rng := rand.New(rand.NewPCG(seed, 99))
				ts := gridTargets("P", "L4", 5, 5, 16*in, 22*in, truth, panel.Vec{}, sigma, rng)
				bad := []int{int(seed) % 25, (int(seed)*7 + 12) % 25}
				if bad[1] == bad[0] {
					bad[1] = (bad[1] + 1) % 25
				}
				ts[bad[0]].D.X += 3 * 25.4 * um
				ts[bad[1]].D.Y -= 2 * 25.4 * um
				want := []string{ts[bad[0]].Name, ts[bad[1]].Name}
				slices.Sort(want)
				f, err := FitTargets(ts, &FitSettings{Robust: rb})
				if err != nil {
					t.Fatal(err)
				}
				got := slices.Clone(f.Outliers)
				slices.Sort(got)
				if !slices.Equal(got, want) {
					t.Errorf("outliers %v, want %v", got, want)
				}
				for k := range truth {
					if e := math.Abs(f.Terms[k] - truth[k]); e > 4*f.StdErr[k] {
						t.Errorf("%s off by %.2g (%.1f stderr)", TermKind(k), e, e/f.StdErr[k])
					}
				}
				if f.Scale > 2*sigma || f.Scale < sigma/2 {
					t.Errorf("robust scale %.3g m, noise %.3g m", f.Scale, sigma)
				}
				ols, err := FitTargets(ts, nil)
				if err != nil {
					t.Fatal(err)
				}
				if ols.Sigma0 < 2*f.Sigma0 {
					t.Errorf("ordinary fit σ0 %.3g not inflated by the outliers beside robust %.3g", ols.Sigma0, f.Sigma0)
				}
			})
		}
	}
}

func TestFitErrors(t *testing.T) {
	line := func(n int) []Target {
		var ts []Target
		for i := 0; i < n; i++ {
			ts = append(ts, Target{Panel: "P7", Layer: "L4", Name: fmt.Sprint(i), Pos: panel.Vec{X: float64(i) * in, Y: 2 * float64(i) * in}})
		}
		return ts
	}
	tight := line(3)
	tight[1].Pos.Y += 1e-9 // nearly on one line
	tests := []struct {
		name string
		ts   []Target
		m    FitModel
		want error
	}{
		{"two targets affine", gridTargets("P7", "L4", 2, 1, in, in, truth, panel.Vec{}, 0, nil), Affine, ErrTooFewTargets},
		{"one target similarity", line(1), Similarity, ErrTooFewTargets},
		{"collinear affine", line(5), Affine, ErrIllConditioned},
		{"nearly collinear affine", tight, Affine, ErrIllConditioned},
		{"coincident similarity", []Target{{Panel: "P7", Layer: "L4", Name: "a"}, {Panel: "P7", Layer: "L4", Name: "b"}}, Similarity, ErrIllConditioned},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := FitTargets(tt.ts, &FitSettings{Model: tt.m})
			var fe *FitError
			if !errors.Is(err, tt.want) || !errors.As(err, &fe) || fe.Panel != "P7" || fe.Layer != "L4" {
				t.Fatalf("error %v, want %v naming panel P7 and layer L4", err, tt.want)
			}
		})
	}
	// Two targets determine a similarity fit exactly: no redundancy, no stderr.
	two := []Target{{Name: "a", Pos: panel.Vec{X: -5 * in}, D: panel.Vec{X: 1 * um}}, {Name: "b", Pos: panel.Vec{X: 5 * in, Y: in}}}
	f, err := FitTargets(two, &FitSettings{Model: Similarity})
	if err != nil {
		t.Fatal(err)
	}
	if f.DOF != 0 || !math.IsNaN(f.StdErr[OffsetX]) {
		t.Errorf("exactly determined fit: dof %d, stderr %g; want 0 and NaN", f.DOF, f.StdErr[OffsetX])
	}
}

// TestLotStats checks the lot mean and sample SD against gonum's stat on the
// same numbers, and the grouping by panel and layer.
func TestLotStats(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	var ts []Target
	var sx []float64
	for p := 0; p < 6; p++ {
		v := truth
		v[ScaleX] += 40e-6 * rng.NormFloat64()
		sx = append(sx, v[ScaleX])
		ts = append(ts, gridTargets(fmt.Sprint("P", p), "L3", 3, 3, 16*in, 22*in, v, panel.Vec{}, 0, nil)...)
		ts = append(ts, gridTargets(fmt.Sprint("P", p), "L3-L4", 3, 3, 16*in, 22*in, truth, panel.Vec{}, 0, nil)...)
	}
	fits, err := FitAll(ts, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(fits) != 12 {
		t.Fatalf("%d fits, want 12", len(fits))
	}
	lots := LotStats(fits)
	if len(lots) != 2 || lots[0].Layer != "L3" || lots[1].Layer != "L3-L4" {
		t.Fatalf("lots %+v", lots)
	}
	var mean, ss float64
	for _, v := range sx {
		mean += v / float64(len(sx))
	}
	for _, v := range sx {
		ss += (v - mean) * (v - mean)
	}
	sd := math.Sqrt(ss / float64(len(sx)-1))
	if math.Abs(lots[0].Mean[ScaleX]-mean) > 1e-15 || math.Abs(lots[0].SD[ScaleX]-sd) > 1e-15 {
		t.Errorf("L3 scale_x lot %g ± %g, want %g ± %g", lots[0].Mean[ScaleX], lots[0].SD[ScaleX], mean, sd)
	}
	if lots[1].SD[ScaleX] > 1e-15 {
		t.Errorf("constant L3-L4 scale_x has SD %g", lots[1].SD[ScaleX])
	}
	c := lots[1].Contributor("measured")
	if !slices.Equal(c.Layers, []string{"L3"}) || c.Terms[ScaleX].Dist != Fixed {
		t.Errorf("relative lot contributor %+v", c)
	}
}

// TestPooledResiduals plants the same non-affine bump on every panel: the
// pooled grid must show it where it was planted and nothing far from it.
func TestPooledResiduals(t *testing.T) {
	var fits []Fit
	for p := 0; p < 4; p++ {
		// A fit with all parameters zero leaves each target's displacement
		// as its residual.
		ts := gridTargets(fmt.Sprint(p), "L3", 5, 5, 16*in, 20*in, [NumTerms]float64{}, panel.Vec{}, 0, nil)
		ts[12].D = panel.Vec{X: 5 * um} // the centre target
		fits = append(fits, Fit{Layer: "L3", Group: GroupTargets(ts).Groups[0]})
	}
	g, err := PooledResiduals(fits, "L3", 5, 5)
	if err != nil {
		t.Fatal(err)
	}
	if d := g.At(panel.Vec{}); math.Abs(d.X-5*um) > 0.5*um {
		t.Errorf("centre %v, want 5 µm in x", d)
	}
	if d := g.At(panel.Vec{X: 8 * in, Y: 10 * in}); math.Abs(d.X) > 0.01*um {
		t.Errorf("corner %v, want 0", d)
	}
	if g, _ := PooledResiduals(fits, "L9", 5, 5); g != nil {
		t.Error("grid for a layer without targets")
	}
}

// BenchmarkFitLot fits a lot of 100 panels × 8 layers × 25 targets (the
// speed target is 100 ms; the measured figure is in the README's speed table).
func BenchmarkFitLot(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	var ts []Target
	for p := 0; p < 100; p++ {
		for l := 0; l < 8; l++ {
			ts = append(ts, gridTargets(fmt.Sprint("P", p), fmt.Sprint("L", l+1), 5, 5, 16*in, 22*in, truth, panel.Vec{}, 2*um, rng)...)
		}
	}
	for _, rb := range []Robust{NoRobust, Tukey} {
		b.Run(rb.String(), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				fits, err := FitAll(ts, &FitSettings{Robust: rb})
				if err != nil {
					b.Fatal(err)
				}
				LotStats(fits)
			}
			b.ReportMetric(float64(b.Elapsed().Milliseconds())/float64(b.N), "ms/lot")
		})
	}
}

// TestFitSetWorkers checks that the fits of a lot do not depend on how many
// groups are fitted at once, and that of two groups that cannot be fitted
// the error names the earlier one whatever finishes first.
func TestFitSetWorkers(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	var ts []Target
	for p := 0; p < 12; p++ {
		for l := 0; l < 3; l++ {
			g := gridTargets(fmt.Sprint("P", p), fmt.Sprint("L", l+1), 6, 5, 16*in, 22*in, truth, panel.Vec{}, 2*um, rng)
			g[7].D.X += 40 * um // a mis-measured target for the robust fit to reject
			ts = append(ts, g...)
		}
	}
	s := GroupTargets(ts)
	one, err := FitSet(s, &FitSettings{Robust: Tukey, Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	for _, w := range []int{2, 5, 64} {
		many, err := FitSet(s, &FitSettings{Robust: Tukey, Workers: w})
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(one, many) {
			t.Errorf("%d workers: the fits differ from one worker's", w)
		}
	}
	// Groups 5 and 30 have one target each: too few for an affine fit.
	bad := GroupTargets(ts)
	for _, k := range []int{5, 30} {
		g := bad.Groups[k]
		g.buf.site, g.buf.d, g.buf.rows, g.n = g.buf.site[:1], g.buf.d[:1], g.buf.rows[:1], 1
	}
	for _, w := range []int{1, 2, 64} {
		_, err := FitSet(bad, &FitSettings{Workers: w})
		var fe *FitError
		if !errors.As(err, &fe) || fe.Panel != bad.Groups[5].Panel || fe.Layer != bad.Groups[5].Layer {
			t.Errorf("%d workers: error %v, want one naming group 5 (%s, %s)", w, err, bad.Groups[5].Panel, bad.Groups[5].Layer)
		}
	}
}

// TestSortNearlySorted checks the robust scale's sort on the inputs it
// meets (nearly sorted: a few neighbours swapped) and on ones it hands over
// (shuffled, reversed): the values come out ascending, none lost.
func TestSortNearlySorted(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, kind := range []string{"nearly sorted", "shuffled", "reversed", "one", "empty"} {
		n := 3000
		switch kind {
		case "one":
			n = 1
		case "empty":
			n = 0
		}
		a := make([]radialResidual, n)
		for i := range a {
			a[i] = radialResidual{float64(i) + 0.5*rng.Float64(), int32(i)}
		}
		switch kind {
		case "nearly sorted":
			for range n / 20 {
				i := rng.IntN(n - 1)
				a[i], a[i+1] = a[i+1], a[i]
			}
		case "shuffled":
			rng.Shuffle(n, func(i, j int) { a[i], a[j] = a[j], a[i] })
		case "reversed":
			slices.Reverse(a)
		}
		want := slices.Clone(a)
		slices.SortFunc(want, compareRadial)
		sortNearlySorted(a)
		if !slices.Equal(a, want) {
			t.Errorf("%s: not sorted as slices.SortFunc sorts", kind)
		}
	}
}
