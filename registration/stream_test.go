package registration

import (
	"math"
	"slices"
	"testing"
)

// TestStreamNormal: Stream.Norm against the standard normal distribution
// Φ (NormalCDF, Abramowitz & Stegun 26.2.29).
//
//   - Kolmogorov–Smirnov: the largest distance D between the empirical
//     and the normal CDF of n draws must stay below 1.63/√n, the 1 %
//     critical value of the Kolmogorov distribution for large n (Massey,
//     "The Kolmogorov–Smirnov test for goodness of fit", J. Amer.
//     Statist. Assoc. 46, 1951, Table 1).
//   - The tails, where KS is blind: the frequency of |x| beyond 1, 2, 3,
//     R = 3.4426 (where the ziggurat's base layer hands over to its tail
//     draw), 4 and 4.5 against 2·Φ(−t), each within 4.5 binomial standard
//     errors √(p(1−p)/n) (six tests, so that all pass by chance alone
//     with probability above 1 − 6·6.8e-6).
//   - Mean and variance within 4.5 standard errors (1/√n and √(2/n)).
//
// Both Norm and Norms (two numbers from each word, zigFast32), the latter
// in the Monte Carlo's batches of 2·MCGroup and in batches of 7 (a lone
// last number from Norm); for Norms also the correlation of the two
// numbers of one word, of their values and of their squares (a shared
// layer would show in the squares), each within 4.5 standard errors 1/√m
// of m pairs.
//
// The draws are from a fixed seed, so the test is deterministic; the
// bounds say how unlikely a failure of a correct generator would be.
func TestStreamNormal(t *testing.T) {
	n := 4_000_000
	if testing.Short() {
		n = 400_000
	}
	for _, c := range []struct {
		name  string
		batch int // 0: Norm
	}{{"Norm", 0}, {"NormsGroup", 2 * MCGroup}, {"Norms7", 7}} {
		t.Run(c.name, func(t *testing.T) {
			var r Stream
			r.Seed(1, 0)
			x := make([]float64, n)
			if c.batch == 0 {
				for i := range x {
					x[i] = r.Norm()
				}
			} else {
				for i := 0; i < n; i += c.batch {
					r.Norms(x[i:min(n, i+c.batch)])
				}
				if c.batch%2 == 0 {
					testPairs(t, x)
				}
			}
			testNormal(t, x)
		})
	}
}

// testPairs checks that x[2k] and x[2k+1], the two numbers of one word in
// Norms, are uncorrelated in value and in square (TestStreamNormal).
func testPairs(t *testing.T, x []float64) {
	const seBound = 4.5
	m := float64(len(x) / 2)
	var sxy, sq float64
	for k := 0; k+1 < len(x); k += 2 {
		a, b := x[k], x[k+1]
		sxy += a * b
		// (a² − 1)(b² − 1) has mean 0 and variance 2·2 = 4 for
		// independent standard normals (E[(a² − 1)²] = 2).
		sq += (a*a - 1) * (b*b - 1) / 2
	}
	if rho := sxy / m; math.Abs(rho) > seBound/math.Sqrt(m) {
		t.Errorf("correlation of the pairs %.2e, bound %.2e", rho, seBound/math.Sqrt(m))
	}
	if rho := sq / m; math.Abs(rho) > seBound/math.Sqrt(m) {
		t.Errorf("correlation of the pairs' squares %.2e, bound %.2e", rho, seBound/math.Sqrt(m))
	}
}

// testNormal is TestStreamNormal's test of draws x.
func testNormal(t *testing.T, x []float64) {
	n := len(x)
	var sum, sum2 float64
	for _, v := range x {
		sum += v
		sum2 += v * v
	}
	const ksCrit, seBound = 1.63, 4.5
	fn := float64(n)
	mean, vr := sum/fn, sum2/fn-(sum/fn)*(sum/fn)
	if math.Abs(mean) > seBound/math.Sqrt(fn) || math.Abs(vr-1) > seBound*math.Sqrt(2/fn) {
		t.Errorf("mean %.5f, variance %.5f of %d draws", mean, vr, n)
	}
	for _, tail := range []float64{1, 2, 3, zigR, 4, 4.5} {
		c := 0
		for _, v := range x {
			if math.Abs(v) > tail {
				c++
			}
		}
		p := 2 * NormalCDF(-tail)
		got := float64(c) / fn
		if se := math.Sqrt(p * (1 - p) / fn); math.Abs(got-p) > seBound*se {
			t.Errorf("P(|x| > %g) = %.3g, want %.3g ± %.2g", tail, got, p, se)
		}
	}
	slices.Sort(x)
	var d float64
	for i, v := range x {
		f := NormalCDF(v)
		d = math.Max(d, math.Max(math.Abs(f-float64(i)/fn), math.Abs(float64(i+1)/fn-f)))
	}
	if d*math.Sqrt(fn) > ksCrit {
		t.Errorf("Kolmogorov–Smirnov D·√n = %.3f, want below %g", d*math.Sqrt(fn), ksCrit)
	}
	t.Logf("%d draws: mean %.2e, variance %.5f, KS D·√n %.3f", n, mean, vr, d*math.Sqrt(fn))
}

// TestStreamUniform: Float64 lies in [0, 1) with the mean 1/2 and
// variance 1/12 of the uniform distribution within 4.5 standard errors
// (the uniform's √(1/12n) and √(1/180n): the fourth central moment is
// 1/80), and two streams of different blocks differ from the first draw.
func TestStreamUniform(t *testing.T) {
	const n = 1_000_000
	var r Stream
	r.Seed(7, 3)
	var sum, sum2 float64
	for range n {
		u := r.Float64()
		if u < 0 || u >= 1 {
			t.Fatalf("Float64 %g outside [0, 1)", u)
		}
		sum += u
		sum2 += (u - 0.5) * (u - 0.5)
	}
	mean, vr := sum/n, sum2/n
	if math.Abs(mean-0.5) > 4.5*math.Sqrt(1.0/12/n) || math.Abs(vr-1.0/12) > 4.5*math.Sqrt((1.0/80-1.0/144)/n) {
		t.Errorf("mean %.5f (want 0.5), variance %.5f (want %.5f)", mean, vr, 1.0/12)
	}
	var a, b Stream
	a.Seed(7, 3)
	b.Seed(7, 4)
	if a.Uint64() == b.Uint64() {
		t.Error("blocks 3 and 4 of one seed start alike")
	}
}

// BenchmarkStreamNorm times one normal draw from Stream.
func BenchmarkStreamNorm(b *testing.B) {
	var r Stream
	r.Seed(1, 0)
	var s float64
	for b.Loop() {
		s += r.Norm()
	}
	_ = s
}

// BenchmarkStreamNorms times normal draws from Stream in the Monte Carlo's
// batches of 2·MCGroup (a site's registration and per-site process
// normals on a group of panels), reported per draw.
func BenchmarkStreamNorms(b *testing.B) {
	var r Stream
	r.Seed(1, 0)
	var dst [2 * MCGroup]float64
	var s float64
	for b.Loop() {
		r.Norms(dst[:])
		s += dst[0]
	}
	_ = s
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*len(dst)), "ns/draw")
}

// TestNormsFast: normsFast (in assembly where there is one,
// stream_amd64.s) fills the same numbers, returns the same word and
// leaves the same state as normsFastGo, from many states and for every
// length from 0 to 2·MCGroup + 3, including the words that stop it (a
// half zigFast32 does not take: about one word in 35).
func TestNormsFast(t *testing.T) {
	var seed Stream
	seed.Seed(11, 0)
	stops := 0
	for trial := range 20000 {
		r := Stream{seed.Uint64(), seed.Uint64(), seed.Uint64(), seed.Uint64()}
		if r == (Stream{}) {
			continue
		}
		g := r
		n := trial % (2*MCGroup + 4)
		a, b := make([]float64, n), make([]float64, n)
		restA, ua := r.normsFast(a)
		restB, ub := g.normsFastGo(b)
		if len(restA) != len(restB) || ua != ub || r != g {
			t.Fatalf("trial %d, %d numbers: %d left, word %#x, state %v; want %d, %#x, %v", trial, n, len(restA), ua, r, len(restB), ub, g)
		}
		for i := range a {
			if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
				t.Fatalf("trial %d, number %d: %v, want %v", trial, i, a[i], b[i])
			}
		}
		if len(restA) >= 2 {
			stops++
		}
	}
	t.Logf("%d of 20000 runs stopped at a word", stops)
	if stops < 100 {
		t.Errorf("%d runs stopped at a word: the test should meet the ziggurat's slow path", stops)
	}
}
