package panel

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// Vec is a point or vector in the panel plane, in metres.
type Vec struct{ X, Y float64 }

// Add returns v+w.
func (v Vec) Add(w Vec) Vec { return Vec{v.X + w.X, v.Y + w.Y} }

// Sub returns v−w.
func (v Vec) Sub(w Vec) Vec { return Vec{v.X - w.X, v.Y - w.Y} }

// Dot returns the scalar product v·w.
func (v Vec) Dot(w Vec) float64 { return v.X*w.X + v.Y*w.Y }

// Perp returns ẑ×v, v turned a quarter turn counter-clockwise.
func (v Vec) Perp() Vec { return Vec{-v.Y, v.X} }

// Dir returns the unit vector at angle a (radians, counter-clockwise from +x).
func Dir(a float64) Vec {
	s, c := math.Sincos(a)
	return Vec{c, s}
}

// Rect is an axis-aligned rectangle, closed: it contains the points with
// Min.X <= X <= Max.X and Min.Y <= Y <= Max.Y. The zero value is the point at
// the origin.
type Rect struct{ Min, Max Vec }

// Overlaps reports whether r and s share interior points; rectangles that only
// touch along an edge do not overlap.
func (r Rect) Overlaps(s Rect) bool {
	const eps = 1e-9 // 1 nm: parts butted edge to edge at a stated pitch touch, they do not overlap
	return r.Min.X < s.Max.X-eps && s.Min.X < r.Max.X-eps &&
		r.Min.Y < s.Max.Y-eps && s.Min.Y < r.Max.Y-eps
}

// Contains reports whether p lies in r.
func (r Rect) Contains(p Vec) bool {
	return p.X >= r.Min.X && p.X <= r.Max.X && p.Y >= r.Min.Y && p.Y <= r.Max.Y
}

// Size returns the width and height of r.
func (r Rect) Size() Vec { return r.Max.Sub(r.Min) }

// Panel is a production panel.
type Panel struct {
	Size   Vec     // outer size, x and y
	Border float64 // width of the frame along every edge where no site may go
	Datum  Vec     // the point that scale and rotation errors act about; zero is the centre
}

// Outline returns the panel's outer rectangle.
func (p Panel) Outline() Rect {
	return Rect{Vec{-p.Size.X / 2, -p.Size.Y / 2}, Vec{p.Size.X / 2, p.Size.Y / 2}}
}

// Usable returns the rectangle inside the border.
func (p Panel) Usable() Rect {
	o := p.Outline()
	return Rect{Vec{o.Min.X + p.Border, o.Min.Y + p.Border}, Vec{o.Max.X - p.Border, o.Max.Y - p.Border}}
}

// Validate checks that the panel has a positive size and a border that leaves room.
func (p Panel) Validate() error {
	switch {
	case !(p.Size.X > 0) || !(p.Size.Y > 0) || math.IsInf(p.Size.X, 0) || math.IsInf(p.Size.Y, 0):
		return &FieldError{Key: "panel.size", Err: errors.New("both sizes must be positive and finite")}
	case p.Size.X > MaxPanelSize || p.Size.Y > MaxPanelSize:
		return &FieldError{Key: "panel.size", Err: fmt.Errorf("a panel side of %.4g m is not plausible: at most %g m (%.0f in)", math.Max(p.Size.X, p.Size.Y), MaxPanelSize, MaxPanelSize/0.0254)}
	case !(p.Border >= 0) || 2*p.Border >= math.Min(p.Size.X, p.Size.Y):
		return &FieldError{Key: "panel.border", Err: errors.New("the border must be non-negative and leave room inside the panel")}
	case !p.Outline().Contains(p.Datum):
		return &FieldError{Key: "panel.datum", Err: errors.New("the datum must lie on the panel")}
	}
	return nil
}

// Coupler is one coupled-line site of a part, in part-local coordinates.
type Coupler struct {
	Name    string
	Section string  // the cross-section at this site
	At      Vec     // from the part's lower-left corner
	Angle   float64 // direction of the coupled lines, radians
}

// Part is a board stepped onto the panel.
type Part struct {
	Name     string
	Size     Vec
	Couplers []Coupler
}

// Array is a step-and-repeat of one part.
type Array struct {
	// Name names the array in site and part names, tables and reports; ""
	// means "a1", "a2", … by its position. Names are unique in a layout.
	Name string
	Part string
	// Coupon marks a test coupon strip (product = false in a job file): its
	// couplers are mapped and reported like any other, but its parts are not
	// products, so they count in no part yield and no good parts per panel.
	Coupon bool
	Count  [2]int // columns (x) and rows (y)
	Pitch  Vec    // step between neighbouring parts, panel axes
	// Center is the centre of the array's extent; when UseOrigin is set, Origin is
	// instead the lower-left corner of the first part (column 0, row 0).
	Center    Vec
	Origin    Vec
	UseOrigin bool
	// Rotate turns every part counter-clockwise by 0, 90, 180 or 270 degrees.
	Rotate int
}

// Placement is a single coupler site given directly in panel coordinates, as
// read from a placement file.
type Placement struct {
	Name    string
	Section string
	At      Vec
	Angle   float64
	File    string // the placement file, for messages
	Row     int    // the file's row, for messages
}

// Layout is everything placed on one panel.
type Layout struct {
	Panel      Panel
	Parts      []Part
	Arrays     []Array
	Placements []Placement
}

// MaxInstances bounds the parts and placements of one layout, so that a typing
// slip in a count cannot exhaust memory: a million parts is far beyond any
// production panel.
const MaxInstances = 1_000_000

// MaxPanelSize is the longest panel side accepted, a plausibility bound:
// production panels are 12 x 18 in to 24 x 30 in, the largest backplanes
// about 1.5 m, so a side beyond 3 m is a typing slip in a unit.
const MaxPanelSize = 3.0 // m

// MaxSites bounds the coupler sites of one layout, from arrays and placements
// together. The analysis holds about a kilobyte per site (the sensitivity
// row, statistics and results of each site; measured: 10 million sites took
// 8.5 GB in map), so two million sites stay near 2 GB, well inside a 24 GB
// machine with room for the figures, while a production panel carries at
// most some tens of thousands of couplers.
const MaxSites = 2_000_000

// Instance is one placed copy of a part.
type Instance struct {
	Index  int // position in the slice returned by Expand
	Array  int // index into Layout.Arrays; -1 for a placement
	Part   string
	I, J   int  // column and row in the array, from 0
	Bounds Rect // the part's outline on the panel
	Name   string
	// Coupon is set for a part of a coupon array (Array.Coupon): not a
	// product, so left out of part counts.
	Coupon bool
}

// ArrayName returns the name of array i of the layout: its Name, or "a" and
// its 1-based position when it has none.
func (l *Layout) ArrayName(i int) string {
	if n := l.Arrays[i].Name; n != "" {
		return n
	}
	return fmt.Sprintf("a%d", i+1)
}

// Site is one coupler on the panel.
type Site struct {
	Index    int
	Name     string // "a1 module(3,4) H1": array, part, 1-based column and row, coupler
	Coupler  string
	Section  string
	Instance int // index of the part instance in the slice returned by Expand
	Array    int // -1 for a placement
	I, J     int
	Pos      Vec
	Angle    float64 // direction of the coupled lines, radians in [0, 2π)
	U        Vec     // unit vector along the lines
}

// N returns the unit vector across the lines, ẑ×U, the direction in which the
// broadside offset is measured.
func (s Site) N() Vec { return s.U.Perp() }

// FieldError is an invalid layout entry; Key names it as in the job file, for
// example "array[1].pitch" or "part[0].couplers[1].at".
type FieldError struct {
	Key string
	Err error
}

func (e *FieldError) Error() string { return e.Key + ": " + e.Err.Error() }
func (e *FieldError) Unwrap() error { return e.Err }

// Errors reported by Expand, for errors.Is.
var (
	ErrOverlap  = errors.New("parts overlap")
	ErrInBorder = errors.New("inside the panel border")
	ErrOffPanel = errors.New("part outside the panel")
	// ErrDuplicateName is an array name given twice.
	ErrDuplicateName = errors.New("duplicate name")
)

// DuplicateNameError is an array name used twice; the FieldError that
// carries it names the later array. It matches ErrDuplicateName.
type DuplicateNameError struct {
	Name    string
	First   int  // index of the array that has the name first
	Default bool // one of the two names is a default one (a1, a2, …)
}

func (e *DuplicateNameError) Error() string {
	how := ""
	if e.Default {
		how = " (an array without a name is called a1, a2, … by its position)"
	}
	return fmt.Sprintf("%v: array name %q is also the name of array[%d]%s", ErrDuplicateName, e.Name, e.First, how)
}

func (e *DuplicateNameError) Unwrap() error { return ErrDuplicateName }

// OverlapError is two parts of different arrays whose outlines overlap; B
// belongs to the later array. It matches ErrOverlap.
type OverlapError struct{ A, B Instance }

func (e *OverlapError) Error() string {
	return fmt.Sprintf("%v: %s and %s", ErrOverlap, e.A.Name, e.B.Name)
}
func (e *OverlapError) Is(target error) bool { return target == ErrOverlap }

// rotatePartLocal maps a part-local point q of a part of size sz into the
// coordinates of the turned part's lower-left corner, for a turn of quarter
// quarter-turns counter-clockwise; it also returns the turned size.
func rotatePartLocal(q, sz Vec, quarter int) (Vec, Vec) {
	switch quarter {
	case 1:
		return Vec{sz.Y - q.Y, q.X}, Vec{sz.Y, sz.X}
	case 2:
		return Vec{sz.X - q.X, sz.Y - q.Y}, sz
	case 3:
		return Vec{q.Y, sz.X - q.X}, Vec{sz.Y, sz.X}
	}
	return q, sz
}

// Expand places every array and placement and returns the part instances and
// the coupler sites in panel coordinates. Sites are ordered by array, row,
// column and coupler, then placements in file order. It returns a *FieldError
// for a malformed entry, and errors wrapping ErrOverlap, ErrInBorder or
// ErrOffPanel that name the offending parts or sites.
func (l *Layout) Expand() ([]Instance, []Site, error) {
	if err := l.Panel.Validate(); err != nil {
		return nil, nil, err
	}
	parts := map[string]int{}
	for i, p := range l.Parts {
		key := fmt.Sprintf("part[%d]", i)
		if p.Name == "" {
			return nil, nil, &FieldError{key + ".name", errors.New("a part needs a name")}
		}
		if _, dup := parts[p.Name]; dup {
			return nil, nil, &FieldError{key + ".name", fmt.Errorf("part %q is defined twice", p.Name)}
		}
		parts[p.Name] = i
		if !(p.Size.X > 0 && p.Size.Y > 0) {
			return nil, nil, &FieldError{key + ".size", errors.New("both sizes must be positive")}
		}
		for k, c := range p.Couplers {
			in := Rect{Max: p.Size}
			if !in.Contains(c.At) {
				return nil, nil, &FieldError{fmt.Sprintf("%s.couplers[%d].at", key, k),
					fmt.Errorf("coupler %q lies outside its %q part", c.Name, p.Name)}
			}
		}
	}
	names := map[string]int{}
	for ai, a := range l.Arrays {
		n := l.ArrayName(ai)
		if a.Name != "" && (strings.TrimSpace(a.Name) != a.Name || strings.ContainsAny(a.Name, "\t\r\n")) {
			return nil, nil, &FieldError{fmt.Sprintf("array[%d].name", ai),
				fmt.Errorf("array name %q: want a name on one line without leading or trailing blanks", a.Name)}
		}
		if first, dup := names[n]; dup {
			return nil, nil, &FieldError{fmt.Sprintf("array[%d].name", ai),
				&DuplicateNameError{Name: n, First: first, Default: l.Arrays[first].Name == "" || a.Name == ""}}
		}
		names[n] = ai
	}
	var inst []Instance
	var sites []Site
	var blocks []arrayBlock
	usable := l.Panel.Usable()
	outline := l.Panel.Outline()
	for ai, a := range l.Arrays {
		key := fmt.Sprintf("array[%d]", ai)
		pi, ok := parts[a.Part]
		if !ok {
			return nil, nil, &FieldError{key + ".part", fmt.Errorf("no part named %q", a.Part)}
		}
		part := l.Parts[pi]
		if a.Count[0] < 1 || a.Count[1] < 1 {
			return nil, nil, &FieldError{key + ".count", errors.New("both counts must be at least 1")}
		}
		if a.Rotate%90 != 0 {
			return nil, nil, &FieldError{key + ".rotate", errors.New("parts turn by 0, 90, 180 or 270 degrees")}
		}
		quarter := ((a.Rotate/90)%4 + 4) % 4
		_, sz := rotatePartLocal(Vec{}, part.Size, quarter)
		if (a.Count[0] > 1 && !(a.Pitch.X > 0)) || (a.Count[1] > 1 && !(a.Pitch.Y > 0)) {
			return nil, nil, &FieldError{key + ".pitch", errors.New("the pitch must be positive")}
		}
		if (a.Count[0] > 1 && a.Pitch.X < sz.X-1e-9) || (a.Count[1] > 1 && a.Pitch.Y < sz.Y-1e-9) {
			return nil, nil, &FieldError{key + ".pitch", fmt.Errorf("%w: the pitch is smaller than the (turned) %q part", ErrOverlap, a.Part)}
		}
		if a.Count[0] > MaxInstances || a.Count[1] > MaxInstances || len(inst)+a.Count[0]*a.Count[1] > MaxInstances {
			return nil, nil, &FieldError{key + ".count", fmt.Errorf("more than %d parts on one panel", MaxInstances)}
		}
		if len(sites)+a.Count[0]*a.Count[1]*len(part.Couplers) > MaxSites {
			return nil, nil, &FieldError{key + ".count", fmt.Errorf("more than %d coupler sites on one panel (%d parts of %d couplers here)",
				MaxSites, a.Count[0]*a.Count[1], len(part.Couplers))}
		}
		origin := a.Origin
		if !a.UseOrigin {
			ext := Vec{float64(a.Count[0]-1)*a.Pitch.X + sz.X, float64(a.Count[1]-1)*a.Pitch.Y + sz.Y}
			origin = Vec{a.Center.X - ext.X/2, a.Center.Y - ext.Y/2}
		}
		blk := arrayBlock{first: len(inst), nx: a.Count[0], ny: a.Count[1]}
		blk.extent = Rect{origin, origin.Add(Vec{float64(a.Count[0]-1)*a.Pitch.X + sz.X, float64(a.Count[1]-1)*a.Pitch.Y + sz.Y})}
		blocks = append(blocks, blk)
		for j := 0; j < a.Count[1]; j++ {
			for i := 0; i < a.Count[0]; i++ {
				ll := origin.Add(Vec{float64(i) * a.Pitch.X, float64(j) * a.Pitch.Y})
				in := Instance{Index: len(inst), Array: ai, Part: part.Name, I: i, J: j,
					Bounds: Rect{ll, ll.Add(sz)}, Coupon: a.Coupon,
					Name: fmt.Sprintf("%s %s(%d,%d)", l.ArrayName(ai), part.Name, i+1, j+1)}
				if !outline.Contains(in.Bounds.Min) || !outline.Contains(in.Bounds.Max) {
					return nil, nil, &FieldError{key, fmt.Errorf("%w: %s reaches beyond the panel edge", ErrOffPanel, in.Name)}
				}
				for _, c := range part.Couplers {
					q, _ := rotatePartLocal(c.At, part.Size, quarter)
					s := newSite(len(sites), in.Name+" "+c.Name, c.Name, c.Section, ll.Add(q),
						c.Angle+float64(quarter)*math.Pi/2)
					s.Instance, s.Array, s.I, s.J = in.Index, ai, i, j
					if !usable.Contains(s.Pos) {
						return nil, nil, &FieldError{key, fmt.Errorf("%w: %s at (%.3f, %.3f) in", ErrInBorder, s.Name, s.Pos.X/0.0254, s.Pos.Y/0.0254)}
					}
					sites = append(sites, s)
				}
				inst = append(inst, in)
			}
		}
		// Parts, not only their couplers, stay out of the border (checked
		// after the whole array is on the panel, so that an array beyond the
		// edge is reported as such).
		for _, in := range inst[blk.first:] {
			if !usable.Contains(in.Bounds.Min) || !usable.Contains(in.Bounds.Max) {
				return nil, nil, &FieldError{key, fmt.Errorf("%w: part %s reaches into the %.3g in border", ErrInBorder, in.Name, l.Panel.Border/0.0254)}
			}
		}
	}
	if len(l.Placements) > MaxInstances || len(sites)+len(l.Placements) > MaxSites {
		return nil, nil, &FieldError{"sites", fmt.Errorf("more than %d coupler sites on one panel (%d from placement files)", MaxSites, len(l.Placements))}
	}
	for k, p := range l.Placements {
		key := fmt.Sprintf("sites[%d]", k)
		if p.Name == "" {
			p.Name = fmt.Sprintf("site%d", k+1)
		}
		in := Instance{Index: len(inst), Array: -1, Part: p.Name, Bounds: Rect{p.At, p.At}, Name: p.Name}
		s := newSite(len(sites), p.Name, p.Name, p.Section, p.At, p.Angle)
		s.Instance, s.Array = in.Index, -1
		if !usable.Contains(s.Pos) {
			return nil, nil, &FieldError{key, fmt.Errorf("%w: %s at (%.3f, %.3f) in", ErrInBorder, s.Name, s.Pos.X/0.0254, s.Pos.Y/0.0254)}
		}
		inst = append(inst, in)
		sites = append(sites, s)
	}
	if a, b, ok := firstOverlap(inst, blocks); ok {
		// Named at the later array: the one placed onto the other.
		return nil, nil, &FieldError{fmt.Sprintf("array[%d]", inst[b].Array), &OverlapError{inst[a], inst[b]}}
	}
	return inst, sites, nil
}

func newSite(index int, name, coupler, section string, pos Vec, angle float64) Site {
	angle = math.Mod(angle, 2*math.Pi)
	if angle < 0 {
		angle += 2 * math.Pi
	}
	u := Dir(angle)
	// Quarter turns should give exact axis directions, not 6e-17 residues.
	u.X, u.Y = snap(u.X), snap(u.Y)
	return Site{Index: index, Name: name, Coupler: coupler, Section: section, Pos: pos, Angle: angle, U: u}
}

func snap(v float64) float64 {
	switch {
	case math.Abs(v) < 1e-15:
		return 0
	case math.Abs(v-1) < 1e-15:
		return 1
	case math.Abs(v+1) < 1e-15:
		return -1
	}
	return v
}

// arrayBlock is the run of instances of one array in the slice Expand builds:
// instance (i, j) is at first + j·nx + i.
type arrayBlock struct {
	first, nx, ny int
	extent        Rect
}

// firstOverlap finds two part instances of different arrays with overlapping
// outlines. Parts of one array cannot overlap (the pitch is checked), so only
// pairs of arrays whose extents overlap are compared, and for each instance of
// one array the instances of the other that could touch it follow from the
// other's regular grid in O(1): the whole check is linear in the number of
// instances of overlapping arrays.
func firstOverlap(inst []Instance, blocks []arrayBlock) (int, int, bool) {
	for p := range blocks {
		for q := p + 1; q < len(blocks); q++ {
			a, b := blocks[p], blocks[q]
			if !a.extent.Overlaps(b.extent) {
				continue
			}
			first := inst[a.first].Bounds
			step := Vec{}
			if a.nx > 1 {
				step.X = inst[a.first+1].Bounds.Min.X - first.Min.X
			}
			if a.ny > 1 {
				step.Y = inst[a.first+a.nx].Bounds.Min.Y - first.Min.Y
			}
			span := func(lo, hi, origin, size, step float64, n int) (int, int) {
				if n == 1 || step <= 0 {
					return 0, n - 1
				}
				i0 := int(math.Floor((lo - origin - size) / step))
				i1 := int(math.Ceil((hi - origin) / step))
				return max(i0, 0), min(i1, n-1)
			}
			sz := first.Size()
			for k := b.first; k < b.first+b.nx*b.ny; k++ {
				r := inst[k].Bounds
				i0, i1 := span(r.Min.X, r.Max.X, first.Min.X, sz.X, step.X, a.nx)
				j0, j1 := span(r.Min.Y, r.Max.Y, first.Min.Y, sz.Y, step.Y, a.ny)
				for j := j0; j <= j1; j++ {
					for i := i0; i <= i1; i++ {
						if m := a.first + j*a.nx + i; r.Overlaps(inst[m].Bounds) {
							return m, k, true
						}
					}
				}
			}
		}
	}
	return 0, 0, false
}

// ArrayExtents returns, per array (narrays of them), the rectangle its part
// instances in inst cover; an array with no instances gets the zero Rect.
func ArrayExtents(narrays int, inst []Instance) []Rect {
	ext := make([]Rect, narrays)
	seen := make([]bool, narrays)
	for _, in := range inst {
		if in.Array < 0 {
			continue
		}
		b, e := in.Bounds, &ext[in.Array]
		if !seen[in.Array] {
			*e, seen[in.Array] = b, true
			continue
		}
		e.Min = Vec{X: math.Min(e.Min.X, b.Min.X), Y: math.Min(e.Min.Y, b.Min.Y)}
		e.Max = Vec{X: math.Max(e.Max.X, b.Max.X), Y: math.Max(e.Max.Y, b.Max.Y)}
	}
	return ext
}
