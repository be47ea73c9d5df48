package registration

import (
	"bytes"
	"cmp"
	"errors"
	"fmt"
	"hash/maphash"
	"io"
	"math"
	"slices"
	"strings"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
)

// Target is one measured registration target: its nominal position on the
// panel and the displacement measured there.
type Target struct {
	Panel string    // panel identifier, as written in the file
	Layer string    // "L3" (against the drilled tooling) or "L3-L4" (L3 relative to L4)
	Name  string    // target name, unique within a panel and layer
	Pos   panel.Vec // nominal position in the panel frame, m
	D     panel.Vec // measured displacement, m
	Row   int       // 1-based line of the file (header = 1), for messages
}

// Error kinds of the measurement reader, for errors.Is.
var (
	ErrMissingColumn = errors.New("missing column")
	ErrDuplicate     = errors.New("duplicate target")
	ErrEmptyCell     = errors.New("empty cell")
)

// SplitLayer splits a measurement's layer field: "L3-L4" is L3 measured
// relative to L4 (relative = true), "L3" is L3 measured against the drilled
// tooling. Layer names themselves may therefore not contain '-'.
func SplitLayer(s string) (upper, lower string, relative bool) {
	if a, b, ok := strings.Cut(s, "-"); ok {
		return a, b, true
	}
	return s, "", false
}

// TargetSet is a measurement file held in memory compactly: its targets
// grouped by panel and layer, the groups in order of first appearance and
// the targets of a group in file order.
//
// Why in memory, and why this form. A robust fit reweights every target
// of its panel and layer on each of up to a hundred iterations, and the
// reader must refuse a duplicate target anywhere in the file before any
// output is written, so the targets have to be at hand; re-reading a file
// of 100 MB for each iteration would cost a hundred times its parse, and a
// file need not list a panel and layer in one run of rows. So the set keeps
// each target in what it really needs:
//
//   - its measured displacement, two float64 (16 bytes);
//   - its file row, an int32 (4 bytes), for the messages;
//   - its site, an int32 index (4 bytes) into a table of the distinct
//     (name, nominal position) pairs of the file. A lot measures the same
//     target layout on every panel and layer, so that table is one panel's
//     layout, not a copy per target; a file whose layout does not repeat
//     stops being indexed (siteTable.add) and costs about 26 bytes more a
//     target, name bytes included.
//
// That is 24 bytes a target where the layout repeats. Positions and
// displacements stay float64, as parsed, so a fit of a set is the same to
// the bit as one of the []Target it came from; float32 would keep 7 digits,
// 0.03 µm on a 600 mm panel, harmless but not identical.
type TargetSet struct {
	Groups []*TargetGroup
	sites  *siteTable
}

// TargetGroup is the targets of one panel and layer, columnwise: target i
// is named Name(i), at nominal position Pos(i), displaced by D(i) and read
// from file row Row(i).
type TargetGroup struct {
	Panel, Layer string
	sites        *siteTable
	site         []int32     // the site of each target
	d            []panel.Vec // the measured displacement, m
	rows         []int32     // 1-based line of the file (header = 1), for messages
}

// Len returns the number of targets in the group.
func (g *TargetGroup) Len() int { return len(g.d) }

// Name returns the name of target i.
func (g *TargetGroup) Name(i int) string { return string(g.name(i)) }

// name returns target i's name as bytes of the site table (not a copy).
func (g *TargetGroup) name(i int) []byte { return g.sites.name(g.site[i]) }

// Pos returns the nominal position of target i, m.
func (g *TargetGroup) Pos(i int) panel.Vec { return g.sites.pos[g.site[i]] }

// D returns the measured displacement of target i, m.
func (g *TargetGroup) D(i int) panel.Vec { return g.d[i] }

// Row returns the file row of target i (header = 1).
func (g *TargetGroup) Row(i int) int { return int(g.rows[i]) }

// Target returns target i as a Target.
func (g *TargetGroup) Target(i int) Target {
	return Target{Panel: g.Panel, Layer: g.Layer, Name: g.Name(i), Pos: g.Pos(i), D: g.d[i], Row: g.Row(i)}
}

// add appends a target to the group.
func (g *TargetGroup) add(name string, pos, d panel.Vec, row int) {
	g.site = append(g.site, g.sites.add(name, pos))
	g.d = append(g.d, d)
	g.rows = append(g.rows, int32(row))
}

// siteTable holds the distinct (name, nominal position) pairs of a set,
// names back to back in one arena.
type siteTable struct {
	pos     []panel.Vec
	names   []byte
	nameEnd []uint32 // the end of site i's name in names
	// index maps a hash of (name, position bits) to the site first seen
	// with it, 12 bytes a site; nil once the sites stopped repeating.
	index map[uint64]int32
	seed  maphash.Seed
	refs  int // targets added
}

func newSiteTable() *siteTable {
	return &siteTable{index: map[uint64]int32{}, seed: maphash.MakeSeed()}
}

func (s *siteTable) name(i int32) []byte {
	var a uint32
	if i > 0 {
		a = s.nameEnd[i-1]
	}
	return s.names[a:s.nameEnd[i]]
}

// Sharing stops paying when, after siteProbe targets, more than half of
// them have had a site of their own: then the index is dropped and every
// later target gets its own site without a look-up.
const siteProbe = 1 << 16

// add returns the site of (name, pos), new or shared. Positions are
// compared by their bits, so that −0 and +0 stay what the file said.
func (s *siteTable) add(name string, pos panel.Vec) int32 {
	s.refs++
	var h uint64
	if s.index != nil {
		h = maphash.Comparable(s.seed, struct {
			name string
			x, y uint64
		}{name, math.Float64bits(pos.X), math.Float64bits(pos.Y)})
		if i, ok := s.index[h]; ok {
			if q := s.pos[i]; math.Float64bits(q.X) == math.Float64bits(pos.X) && math.Float64bits(q.Y) == math.Float64bits(pos.Y) && string(s.name(i)) == name {
				return i
			}
		}
	}
	id := int32(len(s.pos))
	s.pos = append(s.pos, pos)
	s.names = append(s.names, name...)
	s.nameEnd = append(s.nameEnd, uint32(len(s.names)))
	if s.index != nil {
		if _, taken := s.index[h]; !taken {
			s.index[h] = id
		}
		if s.refs >= siteProbe && 2*len(s.pos) > s.refs {
			s.index = nil
		}
	}
	return id
}

// full reports whether adding name would overflow the name arena's
// uint32 offsets.
func (s *siteTable) full(name string) bool { return len(s.names)+len(name) > math.MaxUint32 }

// Len returns the number of targets in the set.
func (s *TargetSet) Len() int {
	n := 0
	for _, g := range s.Groups {
		n += g.Len()
	}
	return n
}

// setBuilder groups targets into a set as they come.
type setBuilder struct {
	set   *TargetSet
	index map[[2]string]*TargetGroup
}

func newSetBuilder() *setBuilder {
	return &setBuilder{set: &TargetSet{sites: newSiteTable()}, index: map[[2]string]*TargetGroup{}}
}

// group returns the group of panel and layer, or nil.
func (b *setBuilder) group(panel, layer string) *TargetGroup { return b.index[[2]string{panel, layer}] }

// newGroup starts the group of panel and layer (strings the group may keep).
func (b *setBuilder) newGroup(panel, layer string) *TargetGroup {
	g := &TargetGroup{Panel: panel, Layer: layer, sites: b.set.sites}
	b.index[[2]string{panel, layer}] = g
	b.set.Groups = append(b.set.Groups, g)
	return g
}

// GroupTargets returns ts as a set: grouped by panel and layer in order of
// first appearance, each group in the order of ts.
func GroupTargets(ts []Target) *TargetSet {
	b := newSetBuilder()
	for _, t := range ts {
		g := b.group(t.Panel, t.Layer)
		if g == nil {
			g = b.newGroup(t.Panel, t.Layer)
		}
		g.add(t.Name, t.Pos, t.D, t.Row)
	}
	return b.set
}

// Targets returns the set as a []Target in file order (by row).
func (s *TargetSet) Targets() []Target {
	out := make([]Target, 0, s.Len())
	for _, g := range s.Groups {
		for i := range g.Len() {
			out = append(out, g.Target(i))
		}
	}
	slices.SortStableFunc(out, func(a, b Target) int { return cmp.Compare(a.Row, b.Row) })
	return out
}

// ReadTargets reads a measurement file (CSV) as ReadTargetSet does and
// returns its targets in file order.
func ReadTargets(r io.Reader, file string) ([]Target, error) {
	s, err := ReadTargetSet(r, file)
	if err != nil {
		return nil, err
	}
	return s.Targets(), nil
}

// ReadTargetSet reads a measurement file (CSV). The header carries units:
//
//	panel,layer,target,x [in],y [in],dx [mil],dy [mil]
//
// gives the nominal target position and the measured displacement; the columns
// x_meas [unit], y_meas [unit] (the measured position) may stand instead of dx
// and dy. Lines starting with '#' are comments; other columns are ignored.
// Errors are *CSVError values naming the row and column; of several, the
// one on the earliest row.
func ReadTargetSet(r io.Reader, file string) (*TargetSet, error) {
	cr, err := NewCSVReader(r, file)
	if err != nil {
		return nil, err
	}
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			return nil, &CSVError{File: file, Row: 1, Err: errors.New("the file is empty (want a header such as \"panel,layer,target,x [in],y [in],dx [mil],dy [mil]\")")}
		}
		return nil, ReadError(file, err)
	}
	kinds := map[string]unit.Kind{
		"x": unit.Length, "y": unit.Length, "dx": unit.Length, "dy": unit.Length,
		"x_meas": unit.Length, "y_meas": unit.Length,
	}
	idx, cols, err := unit.ParseHeader(header, kinds)
	if err != nil {
		return nil, &CSVError{File: file, Row: 1, Err: err}
	}
	const want = "want panel, layer, target, x [unit], y [unit] and dx [unit], dy [unit] or x_meas [unit], y_meas [unit]"
	for _, need := range []string{"panel", "layer", "target", "x", "y"} {
		if _, ok := idx[need]; !ok {
			return nil, &CSVError{File: file, Row: 1, Column: need, Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
		}
	}
	_, hasDX := idx["dx"]
	_, hasDY := idx["dy"]
	_, hasXM := idx["x_meas"]
	_, hasYM := idx["y_meas"]
	disp := hasDX || hasDY
	switch {
	case disp && (hasXM || hasYM):
		return nil, &CSVError{File: file, Row: 1, Err: errors.New("give dx, dy or x_meas, y_meas, not both")}
	case disp && !hasDX:
		return nil, &CSVError{File: file, Row: 1, Column: "dx", Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
	case disp && !hasDY:
		return nil, &CSVError{File: file, Row: 1, Column: "dy", Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
	case !disp && !hasXM:
		return nil, &CSVError{File: file, Row: 1, Column: "dx", Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
	case !disp && !hasYM:
		return nil, &CSVError{File: file, Row: 1, Column: "y_meas", Err: fmt.Errorf("%w (%s)", ErrMissingColumn, want)}
	}
	numeric := []string{"x", "y", "dx", "dy"}
	if !disp {
		numeric = []string{"x", "y", "x_meas", "y_meas"}
	}
	iPanel, iLayer, iTarget := idx["panel"], idx["layer"], idx["target"]
	// Memory is per target, so nothing here may keep a row alive: the
	// reader reuses its record and a target's name is copied into its
	// group's arena. The duplicate check runs per group once the file is
	// read (duplicate), so that it needs no map of every name.
	cr.ReuseRecord = true
	b := newSetBuilder()
	set := b.set
	var failed *CSVError // the first error of a row, which ends the reading
	var last *TargetGroup
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			// FieldPos is only valid after a successful Read.
			failed = ReadError(file, err)
			break
		}
		line, _ := cr.FieldPos(0)
		if len(rec) != len(header) {
			failed = &CSVError{File: file, Row: line, Err: fmt.Errorf("%d fields, the header has %d", len(rec), len(header))}
			break
		}
		if line > math.MaxInt32 {
			failed = &CSVError{File: file, Row: line, Err: fmt.Errorf("more than %d lines", math.MaxInt32)}
			break
		}
		var names [3]string
		for k, c := range [...]int{iPanel, iLayer, iTarget} {
			if names[k] = strings.TrimSpace(rec[c]); names[k] == "" {
				failed = &CSVError{File: file, Row: line, Column: [...]string{"panel", "layer", "target"}[k], Err: ErrEmptyCell}
				break
			}
		}
		if failed != nil {
			break
		}
		// A file lists a panel and layer in runs of rows, mostly: the last
		// group is tried before the map.
		g := last
		if g == nil || g.Panel != names[0] || g.Layer != names[1] {
			g = b.group(names[0], names[1])
		}
		if g == nil {
			layer := names[1]
			if a, b, rel := SplitLayer(layer); rel && (a == "" || b == "" || strings.Contains(b, "-") || a == b) {
				failed = &CSVError{File: file, Row: line, Column: "layer", Err: fmt.Errorf("%q: want a layer (\"L3\") or a pair of different layers (\"L3-L4\")", layer)}
				break
			}
			g = b.newGroup(strings.Clone(names[0]), strings.Clone(layer))
		}
		var v [4]float64
		for k, name := range numeric {
			c := idx[name]
			// Positions (nominal, and measured ones) lie on a panel; a
			// displacement is a registration movement.
			if v[k], err = boundedCell(file, line, cols[c], rec[c], k < 2 || !disp); err != nil {
				if !errors.As(err, &failed) {
					failed = &CSVError{File: file, Row: line, Column: name, Err: err}
				}
				break
			}
		}
		if failed != nil {
			break
		}
		pos := panel.Vec{X: v[0], Y: v[1]}
		d := panel.Vec{X: v[2], Y: v[3]}
		if !disp {
			d = d.Sub(pos)
			for k, x := range []float64{d.X, d.Y} {
				if err := CheckTerm(x, unit.Length); err != nil {
					failed = &CSVError{File: file, Row: line, Column: numeric[2+k], Err: fmt.Errorf("measured minus nominal: %w", err)}
					break
				}
			}
			if failed != nil {
				break
			}
		}
		if set.sites.full(names[2]) {
			failed = &CSVError{File: file, Row: line, Column: "target", Err: errors.New("more than 4 GB of target names")}
			break
		}
		g.add(names[2], pos, d, line)
		last = g
	}
	// A duplicate before the row that failed is the earlier error, as it
	// would have been reported first by a check row by row.
	if dup := set.duplicate(file); dup != nil && (failed == nil || dup.Row < failed.Row || failed.Row == 0) {
		return nil, dup
	}
	if failed != nil {
		return nil, failed
	}
	if len(set.Groups) == 0 {
		return nil, &CSVError{File: file, Err: errors.New("no targets after the header")}
	}
	return set, nil
}

// duplicate returns the error of the earliest row whose target repeats the
// name of an earlier one on the same panel and layer, or nil. Each group's
// targets are sorted by name (ties by row), so the check costs a sort of one
// group's indices at a time rather than a map of every name in the file.
func (s *TargetSet) duplicate(file string) *CSVError {
	var best *CSVError
	var idx []int32
	for _, g := range s.Groups {
		idx = idx[:0]
		for i := range g.Len() {
			idx = append(idx, int32(i))
		}
		slices.SortFunc(idx, func(a, b int32) int {
			if sa, sb := g.site[a], g.site[b]; sa != sb {
				if c := bytes.Compare(g.sites.name(sa), g.sites.name(sb)); c != 0 {
					return c
				}
			}
			return cmp.Compare(a, b)
		})
		// In a run of equal names the first is the original and the
		// second the earliest repeat, the row a row-by-row check stops at.
		for k := 0; k+1 < len(idx); {
			j := k + 1
			for j < len(idx) && bytes.Equal(g.name(int(idx[j])), g.name(int(idx[k]))) {
				j++
			}
			if j-k > 1 {
				first, again := int(idx[k]), int(idx[k+1])
				if row := g.Row(again); best == nil || row < best.Row {
					best = &CSVError{File: file, Row: row, Column: "target", Err: fmt.Errorf("%w: %q on panel %q, layer %q is also on row %d", ErrDuplicate, g.Name(again), g.Panel, g.Layer, g.Row(first))}
				}
			}
			k = j
		}
	}
	return best
}

// Frame maps target positions from the frame a measuring machine exports
// (an x-ray drill's or an optical inspection system's) into the panel frame
// of the job file: origin at the panel centre, x along the first size, y
// up. The zero value is the panel frame itself.
type Frame struct {
	// Origin is where the machine frame's origin lies in the panel frame:
	// (−W/2, −H/2) for a machine that measures from the panel's lower-left
	// corner, (−W/2, +H/2) from the upper-left with FlipY.
	Origin panel.Vec
	// FlipY is set for a machine whose y axis points down the panel: the
	// y of every position and of every displacement changes sign.
	FlipY bool
}

// Apply maps the targets' positions and displacements into the panel frame,
// in place: p_panel = Origin + (x, ±y) and d_panel = (dx, ±dy).
func (f Frame) Apply(s *TargetSet) {
	// The groups share the site table: each position is mapped once.
	for i := range s.sites.pos {
		p := &s.sites.pos[i]
		if f.FlipY {
			p.Y = -p.Y
		}
		*p = f.Origin.Add(*p)
	}
	if f.FlipY {
		for _, g := range s.Groups {
			for i := range g.d {
				g.d[i].Y = -g.d[i].Y
			}
		}
	}
}

// CheckOutline returns a *CSVError naming the row and column of the first
// target (in file order, in the panel frame) outside outline, the panel's
// outer rectangle: a target off the panel is a frame or unit given wrongly.
func CheckOutline(s *TargetSet, outline panel.Rect, file string) error {
	var first *CSVError
	for _, g := range s.Groups {
		for i := range g.Len() {
			p := g.Pos(i)
			col := ""
			switch {
			case p.X < outline.Min.X || p.X > outline.Max.X:
				col = "x"
			case p.Y < outline.Min.Y || p.Y > outline.Max.Y:
				col = "y"
			default:
				continue
			}
			if row := g.Row(i); first == nil || row < first.Row {
				first = &CSVError{File: file, Row: row, Column: col, Err: fmt.Errorf("target %q at (%.4g, %.4g) mm in the panel frame is off the %.4g x %.4g mm panel (centre origin, y up; see the frame options)",
					g.Name(i), p.X*1e3, p.Y*1e3, (outline.Max.X-outline.Min.X)*1e3, (outline.Max.Y-outline.Min.Y)*1e3)}
			}
			break // later targets of the group are on later rows
		}
	}
	if first == nil {
		return nil
	}
	return first
}
