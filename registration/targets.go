package registration

import (
	"bytes"
	"cmp"
	"errors"
	"fmt"
	"hash/maphash"
	"io"
	"math"
	"runtime"
	"slices"
	"strings"
	"sync"

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

// TargetSet is a measurement file's targets grouped by panel and layer, the
// groups in order of first appearance and the targets of a group in file
// order, held so that its memory grows with the groups, not the targets.
//
// A robust fit reweights every target of its panel and layer on each of up
// to a hundred iterations, and the reader must refuse a duplicate target
// anywhere in the file before any output is written, so every target must
// stay at hand after the reading; but no consumer needs more than a few
// groups at once. So a group's targets are kept as columns:
//
//   - its measured displacement, two float64 (16 bytes);
//   - its file row, an int32 (4 bytes), for the messages;
//   - its site, an int32 index (4 bytes) into a table of the distinct
//     (name, nominal position) pairs of the file. A lot measures the same
//     target layout on every panel and layer, so that table is one panel's
//     layout, not a copy per target. A file whose layout does not repeat
//     (or whose layout outgrows half of SpillBudget) freezes the table
//     (siteTable.add): later targets keep their own position and name in
//     their group's columns ("inline" sites), about 20 bytes more a target
//     and the name.
//
// While the file is read the groups' columns are buffered; whenever the
// buffers of all groups pass SpillBudget bytes they are appended to one
// temporary file as a record per group (spill.go) and let go, so the
// reading holds at most SpillBudget of columns however long the file. A
// group whose targets were spilled must be loaded (TargetGroup.Load) before
// its targets are read and released after; a group that never was spilled
// is always loaded. Fits, residual tables and figures take the groups one
// at a time a worker, so a whole fit holds the site table, the buffers
// still in memory and one group a worker: memory ∝ groups × buffer +
// workers × the largest group, and the temporary file is in the page cache.
// The file is unlinked as soon as it is made, so nothing is left behind even
// when the process is killed; Close (or the garbage collector) closes it.
//
// Positions and displacements stay float64, as parsed, and go to the file
// as their bits, so a fit of a set is the same to the bit whether its groups
// were spilled or not, and the same as one of the []Target it came from.
type TargetSet struct {
	Groups []*TargetGroup
	sites  *siteTable
	spill  *spillFile // nil until a group is spilled
	// frames are the Frames applied (Frame.Apply), in order, that the
	// spilled records still need when they are loaded.
	frames []Frame
}

// SpillBudget is the memory, in bytes, of buffered target columns at which
// ReadTargetSet moves every group's buffered columns to its temporary file,
// and twice the most the site table may take. It is a variable for tests,
// which set it tiny so that small files take the spill path.
var SpillBudget = 16 << 20

// TargetGroup is the targets of one panel and layer, columnwise: target i
// is named Name(i), at nominal position Pos(i), displaced by D(i) and read
// from file row Row(i). Those need the group loaded (Load).
type TargetGroup struct {
	Panel, Layer string
	set          *TargetSet
	n            int   // targets
	firstRow     int32 // the file row of target 0
	buf          targetCols
	spilled      []extent // records in the set's spill file, in file order, before buf
	mu           sync.Mutex
	refs         int         // Loads not yet released, of a spilled group
	cols         *targetCols // the loaded columns: &buf for a group never spilled
	nameBytes    int64       // the bytes of its targets' names, read so far
}

// targetCols is the columns of a run of a group's targets.
type targetCols struct {
	site    []int32     // ≥ 0: a site of the set's table; −k−1: inline site k of these columns
	d       []panel.Vec // the measured displacement, m
	rows    []int32     // 1-based line of the file (header = 1), for messages
	pos     []panel.Vec // the nominal positions of the inline sites
	names   []byte      // the names of the inline sites, back to back
	nameEnd []uint32    // the end of inline site k's name in names
}

// targetBytes and inlineBytes are the column bytes of a target and of an
// inline site beside its name.
const (
	targetBytes = 16 + 4 + 4
	inlineBytes = 16 + 4
)

// Len returns the number of targets in the group.
func (g *TargetGroup) Len() int { return g.n }

// FirstRow returns the file row of the group's first target; it needs no
// Load.
func (g *TargetGroup) FirstRow() int { return int(g.firstRow) }

// loaded returns the group's columns, which must be loaded.
func (g *TargetGroup) loaded() *targetCols {
	if c := g.cols; c != nil {
		return c
	}
	panic("registration: targets of a spilled TargetGroup read without Load")
}

// Name returns the name of target i.
func (g *TargetGroup) Name(i int) string { return string(g.name(i)) }

// name returns target i's name as bytes of the site table or the columns
// (not a copy).
func (g *TargetGroup) name(i int) []byte {
	c := g.loaded()
	if s := c.site[i]; s >= 0 {
		return g.set.sites.name(s)
	} else {
		return c.inlineName(-s - 1)
	}
}

// Pos returns the nominal position of target i, m.
func (g *TargetGroup) Pos(i int) panel.Vec {
	c := g.loaded()
	if s := c.site[i]; s >= 0 {
		return g.set.sites.pos[s]
	} else {
		return c.pos[-s-1]
	}
}

// D returns the measured displacement of target i, m.
func (g *TargetGroup) D(i int) panel.Vec { return g.loaded().d[i] }

// Row returns the file row of target i (header = 1).
func (g *TargetGroup) Row(i int) int { return int(g.loaded().rows[i]) }

// Target returns target i as a Target.
func (g *TargetGroup) Target(i int) Target {
	return Target{Panel: g.Panel, Layer: g.Layer, Name: g.Name(i), Pos: g.Pos(i), D: g.D(i), Row: g.Row(i)}
}

func (c *targetCols) inlineName(k int32) []byte {
	var a uint32
	if k > 0 {
		a = c.nameEnd[k-1]
	}
	return c.names[a:c.nameEnd[k]]
}

// add appends a target to the group and returns the column bytes it took.
func (g *TargetGroup) add(name string, pos, d panel.Vec, row int) int {
	if g.n == 0 {
		g.firstRow = int32(row)
	}
	g.n++
	c := &g.buf
	c.d = append(c.d, d)
	c.rows = append(c.rows, int32(row))
	if s, ok := g.set.sites.add(name, pos); ok {
		c.site = append(c.site, s)
		return targetBytes
	}
	c.site = append(c.site, -int32(len(c.pos))-1)
	c.pos = append(c.pos, pos)
	c.names = append(c.names, name...)
	c.nameEnd = append(c.nameEnd, uint32(len(c.names)))
	return targetBytes + inlineBytes + len(name)
}

// Load makes the group's targets readable until the matching Release:
// a spilled group reads its records back from the set's temporary file (a
// copy per group, shared by Loads that overlap). A group never spilled is
// always loaded. Load and Release may be called from several goroutines.
func (g *TargetGroup) Load() error {
	if len(g.spilled) == 0 {
		return nil
	}
	g.mu.Lock()
	defer g.mu.Unlock()
	if g.refs++; g.refs > 1 {
		return nil
	}
	c, err := g.set.spill.load(g, g.set.frames)
	if err != nil {
		g.refs--
		return err
	}
	g.cols = c
	return nil
}

// Release ends a Load: the last one lets a spilled group's columns go.
func (g *TargetGroup) Release() {
	if len(g.spilled) == 0 {
		return
	}
	g.mu.Lock()
	defer g.mu.Unlock()
	if g.refs--; g.refs == 0 {
		g.cols = nil
	}
}

// siteTable holds the distinct (name, nominal position) pairs of a set,
// names back to back in one arena.
type siteTable struct {
	pos     []panel.Vec
	names   []byte
	nameEnd []uint32 // the end of site i's name in names
	// index maps a hash of (name, position bits) to the site first seen
	// with it, 12 bytes a site; nil once the table is frozen.
	index map[uint64]int32
	seed  maphash.Seed
	refs  int // targets added
	// limit is the most bytes the table may take; a table that reaches
	// it, or whose sites stop repeating, is frozen.
	limit int
}

func newSiteTable(limit int) *siteTable {
	return &siteTable{index: map[uint64]int32{}, seed: maphash.MakeSeed(), limit: limit}
}

func (s *siteTable) name(i int32) []byte {
	var a uint32
	if i > 0 {
		a = s.nameEnd[i-1]
	}
	return s.names[a:s.nameEnd[i]]
}

// Sharing stops paying when, after siteProbe targets, more than half of
// them have had a site of their own: then the table is frozen and every
// later target keeps its own site without a look-up.
const siteProbe = 1 << 16

// siteBytes is what a site of the table takes beside its name: position,
// name end and index entry.
const siteBytes = 16 + 4 + 12

// add returns the site of (name, pos), shared or new, or false when the
// table is frozen and does not hold it. Positions are compared by their
// bits, so that −0 and +0 stay what the file said.
func (s *siteTable) add(name string, pos panel.Vec) (int32, bool) {
	if s.index == nil {
		return 0, false
	}
	s.refs++
	h := maphash.Comparable(s.seed, struct {
		name string
		x, y uint64
	}{name, math.Float64bits(pos.X), math.Float64bits(pos.Y)})
	i, taken := s.index[h]
	if taken {
		if q := s.pos[i]; math.Float64bits(q.X) == math.Float64bits(pos.X) && math.Float64bits(q.Y) == math.Float64bits(pos.Y) && string(s.name(i)) == name {
			return i, true
		}
	}
	if (s.refs >= siteProbe && 2*len(s.pos) > s.refs) || len(s.pos)*siteBytes+len(s.names)+len(name) > s.limit {
		s.index = nil
		return 0, false
	}
	id := int32(len(s.pos))
	s.pos = append(s.pos, pos)
	s.names = append(s.names, name...)
	s.nameEnd = append(s.nameEnd, uint32(len(s.names)))
	if !taken {
		s.index[h] = id
	}
	return id, true
}

// Len returns the number of targets in the set.
func (s *TargetSet) Len() int {
	n := 0
	for _, g := range s.Groups {
		n += g.Len()
	}
	return n
}

// Close closes the set's temporary file, if it has one; its groups that
// were spilled can no longer be loaded. The garbage collector closes it
// too, once the set is unreachable.
func (s *TargetSet) Close() error {
	if s == nil || s.spill == nil {
		return nil
	}
	return s.spill.close()
}

// setBuilder groups targets into a set as they come.
type setBuilder struct {
	set   *TargetSet
	index map[[2]string]*TargetGroup
	// budget is the column bytes the groups may buffer before they are
	// spilled (0: never), buffered what they buffer now.
	budget, buffered int
}

// newSetBuilder returns a builder that spills past budget bytes of columns
// (0: never).
func newSetBuilder(budget int) *setBuilder {
	limit := math.MaxInt
	if budget > 0 {
		limit = budget / 2
	}
	return &setBuilder{set: &TargetSet{sites: newSiteTable(limit)}, index: map[[2]string]*TargetGroup{}, budget: budget}
}

// group returns the group of panel and layer, or nil.
func (b *setBuilder) group(panel, layer string) *TargetGroup { return b.index[[2]string{panel, layer}] }

// newGroup starts the group of panel and layer (strings the group may keep).
func (b *setBuilder) newGroup(panel, layer string) *TargetGroup {
	g := &TargetGroup{Panel: panel, Layer: layer, set: b.set}
	g.cols = &g.buf
	b.index[[2]string{panel, layer}] = g
	b.set.Groups = append(b.set.Groups, g)
	return g
}

// add appends a target to g and spills every group's buffer once they pass
// the budget.
func (b *setBuilder) add(g *TargetGroup, name string, pos, d panel.Vec, row int) error {
	b.buffered += g.add(name, pos, d, row)
	if b.budget <= 0 || b.buffered <= b.budget {
		return nil
	}
	b.buffered = 0
	s := b.set
	if s.spill == nil {
		f, err := newSpillFile()
		if err != nil {
			return err
		}
		s.spill = f
		// A set dropped without Close closes its file all the same.
		runtime.AddCleanup(s, func(f *spillFile) { f.close() }, f)
	}
	for _, g := range s.Groups {
		if len(g.buf.d) == 0 {
			continue
		}
		e, err := s.spill.write(&g.buf)
		if err != nil {
			return err
		}
		g.spilled = append(g.spilled, e)
		g.buf, g.cols = targetCols{}, nil
	}
	return nil
}

// GroupTargets returns ts as a set: grouped by panel and layer in order of
// first appearance, each group in the order of ts. The set is held in
// memory, as ts is: it never spills.
func GroupTargets(ts []Target) *TargetSet {
	b := newSetBuilder(0)
	for _, t := range ts {
		g := b.group(t.Panel, t.Layer)
		if g == nil {
			g = b.newGroup(t.Panel, t.Layer)
		}
		b.add(g, t.Name, t.Pos, t.D, t.Row) // does not fail without a budget
	}
	return b.set
}

// Targets returns the set as a []Target in file order (by row).
func (s *TargetSet) Targets() ([]Target, error) {
	out := make([]Target, 0, s.Len())
	for _, g := range s.Groups {
		if err := g.Load(); err != nil {
			return nil, err
		}
		for i := range g.Len() {
			out = append(out, g.Target(i))
		}
		g.Release()
	}
	slices.SortStableFunc(out, func(a, b Target) int { return cmp.Compare(a.Row, b.Row) })
	return out, nil
}

// ReadTargets reads a measurement file (CSV) as ReadTargetSet does and
// returns its targets in file order.
func ReadTargets(r io.Reader, file string) ([]Target, error) {
	s, err := ReadTargetSet(r, file)
	if err != nil {
		return nil, err
	}
	defer s.Close()
	return s.Targets()
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
	// Nothing here may keep a row alive: the reader reuses its record and
	// a target's name is copied into the site table or its group's
	// columns. The duplicate check runs per group once the file is read
	// (duplicate), so that it needs no map of every name.
	cr.ReuseRecord = true
	b := newSetBuilder(SpillBudget)
	set := b.set
	var failedIO error   // a failure of the temporary file, not of the input
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
		if g.nameBytes += int64(len(names[2])); g.nameBytes > math.MaxUint32 {
			failed = &CSVError{File: file, Row: line, Column: "target", Err: errors.New("more than 4 GB of target names")}
			break
		}
		if err := b.add(g, names[2], pos, d, line); err != nil {
			failedIO = err
			break
		}
		last = g
	}
	if failedIO != nil {
		set.Close()
		return nil, failedIO
	}
	// A duplicate before the row that failed is the earlier error, as it
	// would have been reported first by a check row by row.
	dup, err := set.duplicate(file)
	switch {
	case err != nil:
		set.Close()
		return nil, err
	case dup != nil && (failed == nil || dup.Row < failed.Row || failed.Row == 0):
		set.Close()
		return nil, dup
	case failed != nil:
		set.Close()
		return nil, failed
	case len(set.Groups) == 0:
		set.Close()
		return nil, &CSVError{File: file, Err: errors.New("no targets after the header")}
	}
	return set, nil
}

// duplicate returns the error of the earliest row whose target repeats the
// name of an earlier one on the same panel and layer, or nil. Each group's
// targets are sorted by name (ties by row), so the check costs a sort of one
// loaded group's indices at a time rather than a map of every name in the
// file. The error is that of a group that could not be loaded.
func (s *TargetSet) duplicate(file string) (*CSVError, error) {
	var best *CSVError
	var idx []int32
	for _, g := range s.Groups {
		if err := g.Load(); err != nil {
			return nil, err
		}
		idx = idx[:0]
		for i := range g.Len() {
			idx = append(idx, int32(i))
		}
		site := g.loaded().site
		slices.SortFunc(idx, func(a, b int32) int {
			if sa, sb := site[a], site[b]; sa != sb {
				if c := bytes.Compare(g.name(int(a)), g.name(int(b))); c != 0 {
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
		g.Release()
	}
	return best, nil
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
// in place: p_panel = Origin + (x, ±y) and d_panel = (dx, ±dy). It is for a
// set just read, none of its groups loaded: the site table and the columns
// in memory are mapped now, the records of spilled groups as they are
// loaded.
func (f Frame) Apply(s *TargetSet) {
	// The groups share the site table: each position is mapped once.
	for i := range s.sites.pos {
		s.sites.pos[i] = f.pos(s.sites.pos[i])
	}
	for _, g := range s.Groups {
		f.mapCols(&g.buf, 0, 0)
	}
	if s.spill != nil {
		s.frames = append(s.frames, f)
	}
}

// pos maps a nominal position into the panel frame.
func (f Frame) pos(p panel.Vec) panel.Vec {
	if f.FlipY {
		p.Y = -p.Y
	}
	return f.Origin.Add(p)
}

// mapCols maps the displacements of c from target k0 on and the inline
// positions from inline site n0 on.
func (f Frame) mapCols(c *targetCols, k0, n0 int) {
	for i := range c.pos[n0:] {
		c.pos[n0+i] = f.pos(c.pos[n0+i])
	}
	if f.FlipY {
		for i := range c.d[k0:] {
			c.d[k0+i].Y = -c.d[k0+i].Y
		}
	}
}

// CheckOutline returns a *CSVError naming the row and column of the first
// target (in file order, in the panel frame) outside outline, the panel's
// outer rectangle: a target off the panel is a frame or unit given wrongly.
func CheckOutline(s *TargetSet, outline panel.Rect, file string) error {
	var first *CSVError
	for _, g := range s.Groups {
		if err := g.Load(); err != nil {
			return err
		}
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
		g.Release()
	}
	if first == nil {
		return nil
	}
	return first
}
