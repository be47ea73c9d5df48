package section

import (
	"cmp"
	"math"
	"slices"
)

// Column topology. Every mesh row carries the walls and all four trace edges
// in one fixed x order, so the columns are vertical wherever that order holds
// (no shear, whatever the offset). When the upper trace moves, one of its
// edges may pass an edge of the lower trace: there the order changes and no
// single topology can follow the edges without degenerate elements, while a
// change of topology between offsets would put a step of the size of the
// discretisation error into the coupling curve, and drift is a small
// difference of coupling.
//
// So the offset axis is covered by topologies that overlap in transition
// windows around each crossing. Inside a window each of the two topologies
// keeps its order by holding the passing edges of the other trace a small gap
// away in the rows of each trace (meshPlan.keysOrdered), and the rows
// between the traces blend the two patterns; both are valid meshes, and the
// capacitances are their smoothstep-weighted mean across the window — a
// partition of unity in the offset, smooth (C¹) by construction. For a
// mirror-symmetric section the two topologies of the central window are
// mirror images of each other, so the mean keeps C11 = C22 at zero offset and
// C(+δ) = C(−δ) exactly.

// window is a transition window [lo, hi] between topologies i and i+1.
type window struct{ lo, hi float64 }

// minEdgeSeparation is the lateral distance, as a fraction of the smallest
// feature, below which two edges of different traces count as passing each
// other.
const minEdgeSeparation = 0.05

// windowFrac is the least half-width of a transition window, as a fraction
// of the smallest feature.
const windowFrac = 0.5

// setOffsets builds the topologies for solving offsets in [lo, hi].
func (sv *solver) setOffsets(lo, hi float64) {
	base := sv.g
	edges := func(off float64) [4]struct {
		a, b float64
		e    edgeRef
	} {
		var out [4]struct {
			a, b float64
			e    edgeRef
		}
		for k := range 2 {
			t := base.tr[k]
			hmin, hmax := math.Min(t.hwb, t.hwt), math.Max(t.hwb, t.hwt)
			c := base.x1
			if k == 0 {
				c += off
			}
			out[2*k].a, out[2*k].b, out[2*k].e = c-hmax, c-hmin, edgeRef{k, false}
			out[2*k+1].a, out[2*k+1].b, out[2*k+1].e = c+hmin, c+hmax, edgeRef{k, true}
		}
		return out
	}
	orderAt := func(off float64) (o [4]edgeRef) {
		es := edges(off)
		s := es[:]
		slices.SortStableFunc(s, func(x, y struct {
			a, b float64
			e    edgeRef
		}) int {
			return cmp.Compare(x.a+x.b, y.a+y.b)
		})
		for i := range s {
			o[i] = s[i].e
		}
		return o
	}
	newTopo := func(order [4]edgeRef, clo, chi float64) *geometry {
		g := *base
		g.order = order
		g.offLo, g.offHi = math.Max(lo, clo), math.Min(hi, chi)
		if g.offLo > g.offHi { // outside the range solved: count at the nearer end
			g.offLo, g.offHi = math.Min(math.Max(clo, lo), hi), math.Min(math.Max(clo, lo), hi)
		}
		return &g
	}
	sv.windows = nil
	if base.same {
		sv.topos = []*geometry{newTopo(orderAt((lo+hi)/2), lo, hi)}
		return
	}
	// Crossing zones: upper edge [a_u+δ, b_u+δ] meets lower edge [a_l, b_l]
	// for δ in [a_l − b_u, b_l − a_u].
	base.offLo, base.offHi = lo, hi
	feat := base.smallestFeature(sv.s)
	sep := minEdgeSeparation * feat
	e0 := edges(0)
	var zones []window
	for _, u := range e0[:2] {
		for _, l := range e0[2:] {
			// every crossing, also outside [lo, hi], so that the order
			// between windows is right everywhere
			zones = append(zones, window{l.a - u.b - sep, l.b - u.a + sep})
		}
	}
	slices.SortFunc(zones, func(x, y window) int { return cmp.Compare(x.lo, y.lo) })
	var merged []window
	for _, z := range zones {
		if n := len(merged); n > 0 && z.lo <= merged[n-1].hi {
			merged[n-1].hi = math.Max(merged[n-1].hi, z.hi)
			continue
		}
		merged = append(merged, z)
	}
	// Windows are centred on each zone, windowFrac·feature or half the zone's
	// half-width wide each side, whichever is more, and never reach past the
	// midpoint to the next zone. (Outside a window but inside its zone the
	// one topology holds the passing edges; the displacement is at most half
	// the zone.)
	for i, z := range merged {
		c, h := (z.lo+z.hi)/2, (z.hi-z.lo)/2
		w := math.Max(windowFrac*feat, h/2)
		win := window{c - w, c + w}
		if i > 0 {
			win.lo = math.Max(win.lo, (merged[i-1].hi+z.lo)/2)
		}
		if i+1 < len(merged) {
			win.hi = math.Min(win.hi, (z.hi+merged[i+1].lo)/2)
		}
		sv.windows = append(sv.windows, win)
	}
	// Topology k is valid from window k−1's start to window k's end; its
	// order is the one between the two windows.
	sv.topos = nil
	for k := 0; k <= len(sv.windows); k++ {
		clo, chi := math.Inf(-1), math.Inf(1)
		if k > 0 {
			clo = sv.windows[k-1].lo
		}
		if k < len(sv.windows) {
			chi = sv.windows[k].hi
		}
		var at float64
		switch {
		case k == 0 && len(sv.windows) == 0:
			at = (lo + hi) / 2
		case k == 0:
			at = sv.windows[0].lo - feat
		case k == len(sv.windows):
			at = sv.windows[k-1].hi + feat
		case sv.windows[k].lo <= sv.windows[k-1].hi:
			at = sv.windows[k].lo // windows touch at the midpoint between zones
		default:
			at = (sv.windows[k-1].hi + sv.windows[k].lo) / 2
		}
		sv.topos = append(sv.topos, newTopo(orderAt(at), clo, chi))
	}
}

// locate returns the topology for offset off, and inside a transition window
// the next topology's weight t ∈ (0, 1) (smoothstep 3u² − 2u³ across the
// window, so that the weighted mean is C¹ in the offset).
func (sv *solver) locate(off float64) (k int, t float64) {
	for i, w := range sv.windows {
		if off < w.lo {
			return i, 0
		}
		if off <= w.hi {
			u := (off - w.lo) / (w.hi - w.lo)
			return i, u * u * (3 - 2*u)
		}
	}
	return len(sv.windows), 0
}
