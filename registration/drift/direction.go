package drift

import (
	"math"
	"sort"

	"github.com/regdrift/regdrift/panel"
)

// DirectionDeg returns the direction of a coupler's lines at angle (radians)
// in whole degrees in [0, 360). Directions a half turn apart stay apart: the
// across offset changes sign between them, which an offset coupler (a
// design offset off zero) feels as the opposite drift.
func DirectionDeg(angle float64) int {
	d := int(math.Round(angle*180/math.Pi)) % 360
	if d < 0 {
		d += 360
	}
	return d
}

// Kind is one kind of coupler: a section and a line direction.
type Kind struct {
	Section int       // index into Input.Sections
	Deg     int       // DirectionDeg of the lines
	U       panel.Vec // the lines' unit vector, from the first site of the kind
}

// Kinds returns the distinct kinds among the sites that keep accepts (all
// when keep is nil), most common first (then by section, then direction).
func (a *Analysis) Kinds(keep func(*Site) bool) []Kind {
	type key struct{ sec, deg int }
	count := map[key]int{}
	first := map[key]panel.Vec{}
	for i := range a.Sites {
		r := &a.Sites[i]
		if keep != nil && !keep(r) {
			continue
		}
		k := key{r.Section, DirectionDeg(r.Site.Angle)}
		if count[k] == 0 {
			first[k] = r.Site.U
		}
		count[k]++
	}
	out := make([]Kind, 0, len(count))
	for k := range count {
		out = append(out, Kind{k.sec, k.deg, first[k]})
	}
	sort.Slice(out, func(p, q int) bool {
		kp, kq := key{out[p].Section, out[p].Deg}, key{out[q].Section, out[q].Deg}
		if count[kp] != count[kq] {
			return count[kp] > count[kq]
		}
		if kp.sec != kq.sec {
			return kp.sec < kq.sec
		}
		return kp.deg < kq.deg
	})
	return out
}

// Dominant returns the most common kind among the sites that keep accepts
// (all sites when keep is nil); ok is false when it accepts none.
func (a *Analysis) Dominant(keep func(*Site) bool) (k Kind, ok bool) {
	ks := a.Kinds(keep)
	if len(ks) == 0 {
		return Kind{}, false
	}
	return ks[0], true
}

// Zone is a region of a panel map whose field is drawn for given coupler
// kinds: an array's extent with the kinds of its couplers, or the whole
// usable area with the job's most common kind.
type Zone struct {
	Rect  panel.Rect
	Kinds []Kind // most common first
}

// Zones returns one zone per array that has sites (its extent and its
// kinds), then the usable area of the panel with the most common kind of all
// sites. A point in no array zone falls in the last one (ZoneAt).
func (a *Analysis) Zones() []Zone {
	var zs []Zone
	for ai, ext := range a.In.ArrayExtents() {
		if ks := a.Kinds(func(r *Site) bool { return r.Site.Array == ai }); len(ks) > 0 {
			zs = append(zs, Zone{ext, ks})
		}
	}
	all := a.In.Layout.Panel.Usable()
	if k, ok := a.Dominant(nil); ok {
		return append(zs, Zone{all, []Kind{k}})
	}
	return append(zs, Zone{Rect: all})
}

// ZoneAt returns the first zone that contains p; the last zone is the
// default for points in none of them.
func ZoneAt(zones []Zone, p panel.Vec) *Zone {
	for k := range zones {
		if zones[k].Rect.Contains(p) {
			return &zones[k]
		}
	}
	return &zones[len(zones)-1]
}

// BarLength returns the drawn length of a site bar on a panel map: 60 % of
// the smallest distance between two couplers of one part or between array
// steps, so that bars do not touch, and at most a fortieth of the panel's
// smaller side.
func (in *Input) BarLength() float64 {
	p := in.Layout.Panel.Size
	l := math.Min(p.X, p.Y) / 40
	for _, ar := range in.Layout.Arrays {
		for _, d := range []float64{ar.Pitch.X, ar.Pitch.Y} {
			if d > 0 {
				l = math.Min(l, 0.6*d)
			}
		}
	}
	for _, pt := range in.Layout.Parts {
		for i := range pt.Couplers {
			for k := i + 1; k < len(pt.Couplers); k++ {
				d := pt.Couplers[i].At.Sub(pt.Couplers[k].At)
				if h := math.Hypot(d.X, d.Y); h > 0 {
					l = math.Min(l, 0.6*h)
				}
			}
		}
	}
	return l
}
