package section

// Closed-form references for the tests. Each formula names its source.

import (
	"math"

	"gonum.org/v1/gonum/mathext"
)

// ellipticRatio returns K(k)/K(k') with K the complete elliptic integral of
// the first kind of modulus k (gonum's mathext.CompleteK takes the parameter
// m = k²).
func ellipticRatio(k float64) float64 {
	return mathext.CompleteK(k*k) / mathext.CompleteK(1-k*k)
}

// cohn1954 returns Z0·√εr of a centred zero-thickness stripline of width w
// between grounds b apart: Z0·√εr = (η0/4)·K(k)/K(k'), k = sech(πw/2b)
// (S. B. Cohn, "Characteristic impedance of the shielded-strip transmission
// line", IRE Trans. MTT-2, pp. 52–57, 1954; printed with 30π for η0/4).
func cohn1954(wb float64) float64 {
	k := 1 / math.Cosh(math.Pi*wb/2)
	return Eta0 / 4 * ellipticRatio(k)
}

// cohn1955 returns Z0e·√εr and Z0o·√εr of two zero-thickness strips of width
// w, gap s, centred between grounds b apart (S. B. Cohn, "Shielded coupled-strip
// transmission line", IRE Trans. MTT-3, pp. 29–38, 1955, eqs. for the thin
// strip): Z·√εr = (η0/4)·K(k')/K(k) with ke = tanh(πw/2b)·tanh(π(w+s)/2b),
// ko = tanh(πw/2b)·coth(π(w+s)/2b).
func cohn1955(wb, sb float64) (ze, zo float64) {
	ke := math.Tanh(math.Pi*wb/2) * math.Tanh(math.Pi*(wb+sb)/2)
	ko := math.Tanh(math.Pi*wb/2) / math.Tanh(math.Pi*(wb+sb)/2)
	return Eta0 / 4 / ellipticRatio(ke), Eta0 / 4 / ellipticRatio(ko)
}

// cohn1960 returns Z0e·√εr and Z0o·√εr of two centred broadside-coupled
// zero-thickness strips of width w, separation s, between grounds b apart
// (S. B. Cohn, "Characteristic impedances of broadside-coupled strip
// transmission lines", IRE Trans. MTT-8, pp. 633–637, 1960; formula from
// memory, not re-checked against the paper; REFERENCES.md): parametric in k,
// R = √((k·b/s − 1)/(b/(k·s) − 1)),
// w/b = (1/π)[ln((1+R)/(1−R)) − (s/b)·ln((1+R/k)/(1−R/k))],
// Z0e·√εr = (η0/2)·K(k')/K(k), Z0o·√εr = (η0·π/4)·(s/b)/atanh(k).
// k is found from w/b by bisection; it also returns k.
func cohn1960(wb, sb float64) (ze, zo, k float64) {
	wOf := func(k float64) float64 {
		r := math.Sqrt((k/sb - 1) / (1/(k*sb) - 1))
		return (math.Log((1+r)/(1-r)) - sb*math.Log((1+r/k)/(1-r/k))) / math.Pi
	}
	lo, hi := sb*(1+1e-12), 1-1e-15
	for range 200 {
		m := (lo + hi) / 2
		if wOf(m) < wb {
			lo = m
		} else {
			hi = m
		}
	}
	k = (lo + hi) / 2
	return Eta0 / 2 / ellipticRatio(k), Eta0 * math.Pi / 4 * sb / math.Atanh(k), k
}

// hammerstadJensen returns Z0 and εeff of a zero-thickness microstrip of width
// w on a substrate of height h and permittivity er (E. Hammerstad and
// Ø. Jensen, "Accurate models for microstrip computer-aided design", IEEE
// MTT-S Int. Microwave Symp. Digest, pp. 407–409, 1980, eqs. 2–4 and 6–8;
// quoted accuracy 0.01 % (Z01) and 0.2 % (εeff) for 0.01 ≤ u ≤ 100, εr ≤ 128):
//
//	Z01(u) = η0/(2π)·ln(f(u)/u + √(1 + (2/u)²)), f(u) = 6 + (2π − 6)·exp(−(30.666/u)^0.7528)
//	εeff = (εr+1)/2 + (εr−1)/2·(1 + 10/u)^(−a·b)
//	a = 1 + ln((u⁴ + (u/52)²)/(u⁴ + 0.432))/49 + ln(1 + (u/18.1)³)/18.7
//	b = 0.564·((εr − 0.9)/(εr + 3))^0.053
//	Z0 = Z01/√εeff
func hammerstadJensen(u, er float64) (z0, eeff float64) {
	f := 6 + (2*math.Pi-6)*math.Exp(-math.Pow(30.666/u, 0.7528))
	z01 := Eta0 / (2 * math.Pi) * math.Log(f/u+math.Sqrt(1+4/(u*u)))
	a := 1 + math.Log((math.Pow(u, 4)+math.Pow(u/52, 2))/(math.Pow(u, 4)+0.432))/49 + math.Log(1+math.Pow(u/18.1, 3))/18.7
	b := 0.564 * math.Pow((er-0.9)/(er+3), 0.053)
	eeff = (er+1)/2 + (er-1)/2*math.Pow(1+10/u, -a*b)
	return z01 / math.Sqrt(eeff), eeff
}
