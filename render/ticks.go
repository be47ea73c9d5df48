package render

import (
	"math"
	"strconv"
	"strings"
)

// Ticks returns the tick values for an axis from lo to hi: the multiples of
// a step of 1, 2 or 5 times a power of ten that lie in [lo, hi], with the
// smallest such step that gives at most maxTicks of them (maxTicks below 2
// is taken as 2). It returns nil if lo or hi is not finite or hi < lo, the
// single value lo with step 0 if hi == lo, and just lo and hi when the range
// is too narrow for its magnitude to count steps in (below 2⁻⁵² of it) or
// wider than a float64 holds.
func Ticks(lo, hi float64, maxTicks int) (ticks []float64, step float64) {
	if math.IsNaN(lo) || math.IsNaN(hi) || math.IsInf(lo, 0) || math.IsInf(hi, 0) || hi < lo {
		return nil, 0
	}
	if hi == lo {
		return []float64{lo}, 0
	}
	maxTicks = max(maxTicks, 2)
	raw := (hi - lo) / float64(maxTicks)
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	if math.IsInf(raw, 0) || math.Max(math.Abs(lo), math.Abs(hi))/mag > 1<<52 {
		// The range is a sliver of its magnitude (or overflows): multiples
		// of a step cannot be counted in an int; label the ends only.
		return []float64{lo, hi}, hi - lo
	}
	for {
		for _, m := range []float64{1, 2, 5} {
			step = m * mag
			k0, k1 := tickRange(lo, hi, step)
			if k1-k0+1 <= maxTicks {
				for k := k0; k <= k1; k++ {
					ticks = append(ticks, tickValue(k, step))
				}
				return ticks, step
			}
		}
		mag *= 10
	}
}

// tickRange returns the first and last integers k with k*step in [lo, hi],
// allowing for rounding in the division.
func tickRange(lo, hi, step float64) (k0, k1 int) {
	const slack = 1e-9 // fraction of a step treated as rounding error
	return int(math.Ceil(lo/step - slack)), int(math.Floor(hi/step + slack))
}

// tickValue returns k*step, computed so that decimal steps give the value
// nearest the decimal (0.1*3 gives 0.3, not 0.30000000000000004).
func tickValue(k int, step float64) float64 {
	if step < 1 {
		inv := math.Round(1 / step)
		if math.Abs(inv*step-1) < 1e-12 {
			return float64(k) / inv
		}
	}
	return float64(k) * step
}

// TickLabel formats a tick value with just enough decimals for the step,
// using a true minus sign and never printing "-0".
func TickLabel(v, step float64) string {
	dec := 0
	if step > 0 {
		dec = max(0, int(-math.Floor(math.Log10(step)+1e-9)))
	}
	s := strconv.FormatFloat(v, 'f', dec, 64)
	if strings.Trim(s, "-0.") == "" {
		return strings.TrimPrefix(s, "-")
	}
	return strings.Replace(s, "-", "\u2212", 1)
}

// niceBounds widens [lo, hi] to the enclosing multiples of the tick step, for
// plots whose axis range is taken from the data.
func niceBounds(lo, hi float64, maxTicks int) (float64, float64) {
	if hi == lo {
		d := math.Max(math.Abs(lo)*0.1, 1)
		lo, hi = lo-d, hi+d
	}
	_, step := Ticks(lo, hi, maxTicks)
	return math.Floor(lo/step+1e-9) * step, math.Ceil(hi/step-1e-9) * step
}
