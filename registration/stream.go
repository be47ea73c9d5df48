package registration

import (
	"math"
	"math/bits"
)

// Stream is the random stream of one Monte Carlo block: the xoshiro256**
// generator (Blackman & Vigna, "Scrambled linear pseudorandom number
// generators", ACM Trans. Math. Softw. 47(4), 2021), seeded through
// SplitMix64 as its authors recommend (Steele, Lea & Flood, "Fast
// splittable pseudorandom number generators", OOPSLA 2014), and standard
// normals by the ziggurat of Marsaglia & Tsang ("The ziggurat method for
// generating random variables", J. Stat. Softw. 5(8), 2000) with 256
// layers: Norm from a 64-bit word, Norms two from each word's 32-bit
// halves, the word size of Marsaglia & Tsang's own code.
//
// They are written here rather than taken from math/rand/v2 so that a
// draw runs inside the site loops of the Monte Carlo: rand.Rand reaches
// its generator through the Source interface, and that call and the
// generator behind it made up about half of the 130 instructions a
// NormFloat64 took in the loop (measured with cachegrind). Stream is a
// rand.Source too (Uint64), for the draws made once per panel.
type Stream struct{ s0, s1, s2, s3 uint64 }

// Seed starts the stream of block block of a run seeded seed; distinct
// (seed, block) pairs start distinct streams.
func (r *Stream) Seed(seed, block uint64) {
	x := splitMix(seed) ^ block
	r.s0, x = splitMix(x), x+splitMixGamma
	r.s1, x = splitMix(x), x+splitMixGamma
	r.s2, x = splitMix(x), x+splitMixGamma
	r.s3 = splitMix(x)
}

// splitMixGamma is SplitMix64's increment, 2⁶⁴ over the golden ratio.
const splitMixGamma = 0x9e3779b97f4a7c15

// splitMix returns SplitMix64's output for the state x + γ: its mixing
// function (Steele, Lea & Flood 2014, with the constants of Vigna's
// splitmix64), a bijection of the 64-bit words, so that no two states
// give the same word and four consecutive words are never all zero (the
// one state xoshiro256** cannot leave).
func splitMix(x uint64) uint64 {
	z := x + splitMixGamma
	z = (z ^ z>>30) * 0xbf58476d1ce4e5b9
	z = (z ^ z>>27) * 0x94d049bb133111eb
	return z ^ z>>31
}

// Uint64 returns the next 64 random bits (xoshiro256**).
func (r *Stream) Uint64() uint64 {
	var out uint64
	out, r.s0, r.s1, r.s2, r.s3 = xoshiro(r.s0, r.s1, r.s2, r.s3)
	return out
}

// xoshiro is one step of xoshiro256** (Blackman & Vigna 2021): the output
// of state s0…s3 and the next state.
func xoshiro(s0, s1, s2, s3 uint64) (out, n0, n1, n2, n3 uint64) {
	out = bits.RotateLeft64(s1*5, 7) * 9
	t := s1 << 17
	s2 ^= s0
	s3 ^= s1
	s1 ^= s2
	s0 ^= s3
	s2 ^= t
	return out, s0, s1, s2, bits.RotateLeft64(s3, 45)
}

// Float64 returns a uniform number in [0, 1): the top 53 bits of a draw.
func (r *Stream) Float64() float64 { return float64(r.Uint64()>>11) * 0x1p-53 }

// Norm returns a standard normal number (see zigFast and normTail).
func (r *Stream) Norm() float64 {
	u := r.Uint64()
	if x, ok := zigFast(u); ok {
		return x
	}
	return r.normTail(u)
}

// Norms fills dst with independent standard normal numbers, two from
// each 64-bit word (zigFast32 on its low and its high half): half the
// generator steps of Norm a number. A lone last number is Norm's.
func (r *Stream) Norms(dst []float64) {
	for len(dst) >= 2 {
		var u uint64
		if dst, u = r.normsFast(dst); len(dst) < 2 {
			break
		}
		// zigFast32 left one or both halves of u, the word of dst[0:2].
		x, okx := zigFast32(uint32(u))
		if !okx {
			x = r.normTail32(uint32(u))
		}
		y, oky := zigFast32(uint32(u >> 32))
		if !oky {
			y = r.normTail32(uint32(u >> 32))
		}
		dst[0], dst[1] = x, y
		dst = dst[2:]
	}
	if len(dst) == 1 {
		dst[0] = r.Norm()
	}
}

// normsFastGo is Norms' loop: it fills dst two numbers a word as long as
// zigFast32 takes both halves, with the generator's state in registers
// and no call (a call inside would make the compiler keep the loop's
// values on the stack), and returns the part of dst left and the word
// that stopped it, if any. It is normsFast where there is no assembly
// of it (stream_amd64.s), and the reference the assembly is tested
// against (TestNormsFast).
func (r *Stream) normsFastGo(dst []float64) ([]float64, uint64) {
	s0, s1, s2, s3 := r.s0, r.s1, r.s2, r.s3
	for len(dst) >= 2 {
		var u uint64
		u, s0, s1, s2, s3 = xoshiro(s0, s1, s2, s3)
		x, ok := zigFast32(uint32(u))
		if !ok {
			r.s0, r.s1, r.s2, r.s3 = s0, s1, s2, s3
			return dst, u
		}
		y, ok := zigFast32(uint32(u >> 32))
		if !ok {
			r.s0, r.s1, r.s2, r.s3 = s0, s1, s2, s3
			return dst, u
		}
		dst[0], dst[1] = x, y
		dst = dst[2:]
	}
	r.s0, r.s1, r.s2, r.s3 = s0, s1, s2, s3
	return dst, 0
}

// zigFast32 is zigFast on a 32-bit half-word h, the word size of
// Marsaglia & Tsang's own generator: its low 8 bits pick the layer and
// its top 24 a signed position in it (independent bits, as in zigFast),
// which places a number on a grid of 2⁻²³ of its layer's width (4.4e-7
// at the widest), far below anything a Monte Carlo of 10⁶ trials
// resolves.
func zigFast32(h uint32) (x float64, ok bool) {
	e := &zigTab32[uint8(h)] // the low 8 bits: no bounds check
	j := int32(h) >> 8
	return float64(j) * e.w, uint32(j+e.k) < e.k2 // |j| < k as zigFast
}

// normTail32 is normTail for a half-word h that zigFast32 did not take:
// the base layer's tail draw and the wedge test as there, and on
// rejection a new draw by Norm (a rejection starts the ziggurat afresh,
// and any exact normal draw may stand for that).
func (r *Stream) normTail32(h uint32) float64 {
	i, j := h&(zigLayers-1), int64(int32(h)>>8)
	x := float64(j) * zigTab32[i].w
	if i == 0 {
		return r.baseTail(j > 0)
	}
	if zigF[i]+r.Float64()*(zigF[i-1]-zigF[i]) < math.Exp(-0.5*x*x) {
		return x
	}
	return r.Norm()
}

// zigFast is the ziggurat's first step on draw u: its low 8 bits pick the
// layer and its top 53 bits a signed position in it, so that the two are
// independent (Doornik, "An improved ziggurat method to generate normal
// random samples", 2005, shows what taking both from the same bits
// costs). A position inside the next layer's rectangle, the case of 98.5 %
// of draws, is the result (ok); the rest goes to normTail.
func zigFast(u uint64) (x float64, ok bool) {
	i := u & (zigLayers - 1)
	j := int64(u) >> 11
	k := zigK[i]
	return float64(j) * zigW[i], uint64(j+k) < uint64(2*k) // |j| < k, in one comparison
}

// normTail finishes a ziggurat draw u that zigFast did not take: in the
// base layer a draw beyond R from the normal tail (Marsaglia 1964: x =
// −ln(U₁)/R, accepted when −2·ln(U₂) > x²), elsewhere the wedge test
// under exp(−x²/2), and on rejection a new draw.
func (r *Stream) normTail(u uint64) float64 {
	for {
		i, j := u&(zigLayers-1), int64(u)>>11
		x := float64(j) * zigW[i]
		if i == 0 {
			return r.baseTail(j > 0)
		}
		if zigF[i]+r.Float64()*(zigF[i-1]-zigF[i]) < math.Exp(-0.5*x*x) {
			return x
		}
		u = r.Uint64()
		if x, ok := zigFast(u); ok {
			return x
		}
	}
}

// baseTail returns a draw of the ziggurat's base layer beyond R, from the
// normal tail (Marsaglia 1964: x = −ln(U₁)/R, accepted when
// −2·ln(U₂) > x²), on the positive side if pos.
func (r *Stream) baseTail(pos bool) float64 {
	for {
		x := -math.Log(1-r.Float64()) / zigR
		y := -math.Log(1 - r.Float64())
		if y+y >= x*x {
			if pos {
				return zigR + x
			}
			return -zigR - x
		}
	}
}

// The ziggurat's tables (Marsaglia & Tsang 2000, their zigset, here for
// 256 layers, where 98.5 % of draws take the first step against 97.2 %
// with 128, measured; the wedge and tail, with their exp and logs, took
// about a tenth of the Monte Carlo's time with 128): zigR is the right edge x₂₅₅
// of the widest layer and zigV the area of each layer under exp(−x²/2),
// their values for 256 layers. Layer 0 is
// the base (the rectangle of width V/f(R) that holds the tail beyond R);
// layer i ≥ 1 the rectangle [0, xᵢ] × [f(xᵢ), f(xᵢ₋₁)], x₀ = 0. A draw's
// position j in [−2⁵², 2⁵²) is x = j·zigW[i] (zigW[i] = xᵢ/2⁵²), inside
// the next layer's rectangle when |j| < zigK[i] = 2⁵²·xᵢ₋₁/xᵢ; zigF holds
// f(xᵢ) = exp(−xᵢ²/2).
const (
	zigLayers = 256
	zigR      = 3.6541528853610088
	zigV      = 4.92867323399e-3
	zigScale  = 1 << 52
)

var (
	zigK [zigLayers]int64
	zigW [zigLayers]float64
	zigF [zigLayers]float64
	// zigTab32 holds zigK and zigW for zigFast32's positions j in
	// [−2²³, 2²³), side by side so that one index reads both.
	zigTab32 [zigLayers]zigLayer32
)

// zigLayer32 is one layer for zigFast32: k = 2²³·xᵢ₋₁/xᵢ, k2 = 2k (both
// below 2²⁴, so that j + k and the test are 32-bit) and w = xᵢ/2²³.
type zigLayer32 struct {
	k  int32
	k2 uint32
	w  float64
}

func init() {
	f := func(x float64) float64 { return math.Exp(-0.5 * x * x) }
	q := zigV / f(zigR)
	zigK[0] = int64(zigR / q * zigScale)
	zigK[1] = 0
	zigW[0] = q / zigScale
	zigW[zigLayers-1] = zigR / zigScale
	zigF[0] = 1
	zigF[zigLayers-1] = f(zigR)
	dn, tn := zigR, zigR
	for i := zigLayers - 2; i >= 1; i-- {
		dn = math.Sqrt(-2 * math.Log(zigV/dn+f(dn)))
		zigK[i+1] = int64(dn / tn * zigScale)
		tn = dn
		zigF[i] = f(dn)
		zigW[i] = dn / zigScale
	}
	for i := range zigLayers {
		// zigK[i] is ⌊2⁵²·ratio⌋, so the shift is ⌊2²³·ratio⌋; the
		// product by a power of two is exact.
		k := zigK[i] >> (52 - 23)
		zigTab32[i] = zigLayer32{k: int32(k), k2: uint32(2 * k), w: zigW[i] * (zigScale >> 23)}
	}
}
