package registration

import (
	"errors"
	"fmt"
	"os"
	"sync"
	"unsafe"

	"github.com/regdrift/regdrift/panel"
)

// spillFile is the temporary file a TargetSet moves its groups' columns
// to (see TargetSet). It is unlinked as soon as it is created, so it never
// outlives the process; where the system cannot unlink an open file, it is
// removed on close.
//
// Each record is one run of a group's targets, its columns back to back
// as their bytes in memory: the file is read only by the process that
// wrote it, so their byte order is the machine's, and a float64 comes back
// with the bits it went out with.
type spillFile struct {
	mu   sync.Mutex
	f    *os.File
	off  int64  // the end of the records written
	name string // the file's name while it still has one
}

// extent is a record of the spill file: the columns of n targets, inline of
// them with a site of their own and names bytes of their names.
type extent struct {
	off                int64
	n, inline, nameLen int32
}

// errSpillClosed is the error of a Load after the set was closed.
var errSpillClosed = errors.New("registration: the target set was closed")

func newSpillFile() (*spillFile, error) {
	f, err := os.CreateTemp("", "regdrift-targets-*")
	if err != nil {
		return nil, fmt.Errorf("temporary file for the targets: %w", err)
	}
	s := &spillFile{f: f, name: f.Name()}
	if os.Remove(s.name) == nil {
		s.name = ""
	}
	return s, nil
}

// asBytes returns the memory of s as bytes (not a copy).
func asBytes[T any](s []T) []byte {
	if len(s) == 0 {
		return nil
	}
	return unsafe.Slice((*byte)(unsafe.Pointer(unsafe.SliceData(s))), len(s)*int(unsafe.Sizeof(s[0])))
}

// write appends c as a record.
func (s *spillFile) write(c *targetCols) (extent, error) {
	if len(c.d) > 1<<31-1 || len(c.names) > 1<<31-1 {
		return extent{}, errors.New("registration: a group's buffer outgrew its record") // the budget is an int far below
	}
	e := extent{off: s.off, n: int32(len(c.d)), inline: int32(len(c.pos)), nameLen: int32(len(c.names))}
	for _, b := range [...][]byte{asBytes(c.d), asBytes(c.rows), asBytes(c.site), asBytes(c.pos), asBytes(c.nameEnd), c.names} {
		if _, err := s.f.WriteAt(b, s.off); err != nil {
			return extent{}, fmt.Errorf("temporary file for the targets: %w", err)
		}
		s.off += int64(len(b))
	}
	return e, nil
}

// load returns g's columns: its records, mapped by frames, then its
// buffered columns (which Frame.Apply mapped in place). The sites and name
// ends of each run are renumbered to follow those of the runs before it.
func (s *spillFile) load(g *TargetGroup, frames []Frame) (*targetCols, error) {
	inline, names := len(g.buf.pos), len(g.buf.names)
	for _, e := range g.spilled {
		inline += int(e.inline)
		names += int(e.nameLen)
	}
	c := &targetCols{
		site: make([]int32, 0, g.n), d: make([]panel.Vec, 0, g.n), rows: make([]int32, 0, g.n),
		pos: make([]panel.Vec, 0, inline), names: make([]byte, 0, names), nameEnd: make([]uint32, 0, inline),
	}
	read := func(b []byte, off *int64) error {
		if len(b) == 0 {
			return nil
		}
		s.mu.Lock()
		f := s.f
		s.mu.Unlock()
		if f == nil {
			return errSpillClosed
		}
		if _, err := f.ReadAt(b, *off); err != nil {
			return fmt.Errorf("temporary file for the targets: %w", err)
		}
		*off += int64(len(b))
		return nil
	}
	for _, e := range g.spilled {
		k0, n0, i0, b0 := len(c.d), len(c.pos), len(c.names), uint32(len(c.names))
		n, m := int(e.n), int(e.inline)
		c.d, c.rows, c.site = c.d[:k0+n], c.rows[:k0+n], c.site[:k0+n]
		c.pos, c.nameEnd, c.names = c.pos[:n0+m], c.nameEnd[:n0+m], c.names[:i0+int(e.nameLen)]
		off := e.off
		for _, b := range [...][]byte{asBytes(c.d[k0:]), asBytes(c.rows[k0:]), asBytes(c.site[k0:]), asBytes(c.pos[n0:]), asBytes(c.nameEnd[n0:]), c.names[i0:]} {
			if err := read(b, &off); err != nil {
				return nil, err
			}
		}
		renumber(c, k0, n0, b0)
		for _, f := range frames {
			f.mapCols(c, k0, n0)
		}
	}
	k0, n0, b0 := len(c.d), len(c.pos), uint32(len(c.names))
	c.d, c.rows, c.site = append(c.d, g.buf.d...), append(c.rows, g.buf.rows...), append(c.site, g.buf.site...)
	c.pos, c.nameEnd, c.names = append(c.pos, g.buf.pos...), append(c.nameEnd, g.buf.nameEnd...), append(c.names, g.buf.names...)
	renumber(c, k0, n0, b0)
	return c, nil
}

// renumber shifts the inline sites of c's targets from k0 on by n0 and
// their name ends from n0 on by b0: a run's own numbering, in c after n0
// inline sites and b0 bytes of names.
func renumber(c *targetCols, k0, n0 int, b0 uint32) {
	if n0 == 0 {
		return
	}
	for i := k0; i < len(c.site); i++ {
		if c.site[i] < 0 {
			c.site[i] -= int32(n0)
		}
	}
	for k := n0; k < len(c.nameEnd); k++ {
		c.nameEnd[k] += b0
	}
}

// close closes the file, removing it where it still has a name; a second
// close does nothing.
func (s *spillFile) close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.f == nil {
		return nil
	}
	err := s.f.Close()
	s.f = nil
	if s.name != "" {
		if rerr := os.Remove(s.name); err == nil {
			err = rerr
		}
		s.name = ""
	}
	return err
}
