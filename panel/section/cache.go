package section

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"time"
)

// SolverVersion changes whenever a change to the solver changes its numbers;
// it is part of every cache key.
const SolverVersion = "section-4"

// CacheFormat is the version of the cache file layout; it is part of every
// cache key too. Format 2 added the payload checksum.
const CacheFormat = 2

// maxCacheEntry bounds the size of a cache file that is read: a 61-point
// curve takes about 120 kB, a sweep of a thousand offsets about 2 MB.
const maxCacheEntry = 32 << 20

// cacheKey is what the cache hash covers: the section's content (not its
// name), the offsets and the solver accuracy (not the worker count, which
// does not change the numbers).
type cacheKey struct {
	Version      string
	Format       int
	Stackup      Stackup
	Traces       [2]Trace
	Grounds      []string
	Frequency    float64
	Length       float64
	ZRef         float64
	DesignOffset float64
	Offsets      []float64
	Accuracy     float64
	Sens         bool // Settings.Sensitivities
}

// CacheKey returns the hex SHA-256 that names the cache file of a sweep.
func CacheKey(s *Section, offsets []float64, set *Settings) string {
	k := cacheKey{SolverVersion, CacheFormat, s.Stackup, s.Traces, s.Grounds, s.Frequency, s.Length, s.ZRef, s.DesignOffset, offsets, set.accuracy(), set.sensitivities()}
	b, err := json.Marshal(k)
	if err != nil {
		// Only a non-finite number fails to marshal; CachedSweep rejects
		// those before it asks for a key, and the Go syntax names them
		// deterministically for any other caller.
		b = fmt.Appendf(nil, "%#v", k)
	}
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

// cacheFile is the on-disk form of a curve: a header and the payload (a
// cachePayload) with the SHA-256 of its bytes, so that an entry altered on
// disk, even into other valid numbers, is recognised and recomputed.
type cacheFile struct {
	Format  int
	Version string
	Key     string
	Sum     string          // hex SHA-256 of Payload as stored
	Payload json.RawMessage // cachePayload
}

type cachePayload struct {
	Frequency float64
	Length    float64
	ZRef      float64
	Points    []Point
}

// CacheWarning reports a cache entry that could not be used or stored. The
// curve it comes with is good either way (the cache is only a shortcut past
// the solve), so it is a warning for the caller to print, not an error.
type CacheWarning struct {
	Path string
	Op   string // "read": an entry was damaged, ignored and recomputed; "write": the entry could not be stored
	Err  error
}

func (w *CacheWarning) Error() string {
	if w.Op == "read" {
		return fmt.Sprintf("section cache: damaged entry %s ignored and recomputed: %v", w.Path, w.Err)
	}
	return fmt.Sprintf("section cache: entry not stored (the solve is complete): %s: %v", w.Path, w.Err)
}

func (w *CacheWarning) Unwrap() error { return w.Err }

// CachedSweep returns the curve of Sweep from the cache directory dir
// (os.UserCacheDir()/regdrift when dir is ""), keyed by CacheKey; on a miss it
// runs Sweep and stores the result (written to a temporary file, then renamed,
// so that a failed run leaves no half-written entry; temporary files of that
// naming over an hour old, left by a run killed while writing, are removed).
// noCache bypasses the cache in both directions.
//
// A damaged entry (unparseable, altered, not a regular file, too large,
// points out of order) is ignored and recomputed, and rewritten where the
// directory allows. Failing to store an entry (no cache directory, a file
// where the directory should be, a read-only directory, a full disk, a
// directory at the entry's path) does not fail the call: the curve is
// returned with a *CacheWarning in its CacheWarnings, which the caller may
// print. The error is the solve's.
func CachedSweep(ctx context.Context, s *Section, offsets []float64, set *Settings, dir string, noCache bool) (c *Curve, hit bool, err error) {
	if err := s.Validate(); err != nil {
		return nil, false, err
	}
	if err := set.check(s); err != nil {
		return nil, false, err
	}
	for _, o := range offsets {
		// Before the key: a non-finite offset has no key.
		if err := s.checkOffset(o, "offsets"); err != nil {
			return nil, false, err
		}
	}
	if noCache {
		c, err := Sweep(ctx, s, offsets, set)
		return c, false, err
	}
	var warns []error
	if dir == "" {
		base, err := os.UserCacheDir()
		if err != nil {
			c, err2 := Sweep(ctx, s, offsets, set)
			if err2 != nil {
				return nil, false, err2
			}
			c.CacheWarnings = []error{&CacheWarning{Path: "(user cache directory)", Op: "write", Err: err}}
			return c, false, nil
		}
		dir = filepath.Join(base, "regdrift")
	}
	key := CacheKey(s, offsets, set)
	path := filepath.Join(dir, key+".json")
	c, err = readCache(path, key)
	if err == nil {
		c.Section = s.Name
		return c, true, nil
	}
	if !errors.Is(err, errNoEntry) {
		warns = append(warns, &CacheWarning{Path: path, Op: "read", Err: err})
	}
	c, err = Sweep(ctx, s, offsets, set)
	if err != nil {
		return nil, false, err
	}
	if err := writeCache(dir, path, key, c); err != nil {
		warns = append(warns, &CacheWarning{Path: path, Op: "write", Err: err})
	}
	c.CacheWarnings = warns
	return c, false, nil
}

// readCache reads the entry at path. It opens regular files only, without
// blocking (a FIFO at the path would otherwise wait for a writer forever),
// and reads at most maxCacheEntry bytes.
func readCache(path, key string) (*Curve, error) {
	fi, err := os.Lstat(path)
	if err != nil {
		// No entry to read (missing, or a cache directory that is not one):
		// not damage; storing the new entry reports what is wrong.
		return nil, fmt.Errorf("%w: %v", errNoEntry, err)
	}
	if !fi.Mode().IsRegular() {
		return nil, fmt.Errorf("not a regular file (%s)", fi.Mode().Type())
	}
	if fi.Size() > maxCacheEntry {
		return nil, fmt.Errorf("%d bytes, more than the %d a cache entry may have", fi.Size(), maxCacheEntry)
	}
	f, err := os.OpenFile(path, os.O_RDONLY|syscall.O_NONBLOCK, 0)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	// The file may have been replaced between Lstat and Open.
	if fi2, err := f.Stat(); err != nil || !fi2.Mode().IsRegular() || !os.SameFile(fi, fi2) {
		return nil, errors.New("replaced while opened")
	}
	b, err := io.ReadAll(io.LimitReader(f, maxCacheEntry+1))
	if err != nil {
		return nil, err
	}
	if len(b) > maxCacheEntry {
		return nil, fmt.Errorf("more than the %d bytes a cache entry may have", maxCacheEntry)
	}
	return decodeCache(b, key)
}

// errNoEntry reports that there is no cache entry at the path.
var errNoEntry = errors.New("no cache entry")

// errCacheSum reports a payload whose checksum does not match.
var errCacheSum = errors.New("payload checksum mismatch")

// decodeCache parses a cache entry for key and checks it: format, solver
// version, key, checksum, and points that make a curve (at least two, offsets
// strictly increasing, every number finite).
func decodeCache(b []byte, key string) (*Curve, error) {
	var f cacheFile
	if err := json.Unmarshal(b, &f); err != nil {
		return nil, err
	}
	if f.Format != CacheFormat || f.Version != SolverVersion || f.Key != key {
		return nil, fmt.Errorf("stale entry (format %d, solver %q)", f.Format, f.Version)
	}
	sum := sha256.Sum256(f.Payload)
	if hex.EncodeToString(sum[:]) != f.Sum {
		return nil, errCacheSum
	}
	var p cachePayload
	d := json.NewDecoder(bytes.NewReader(f.Payload))
	d.DisallowUnknownFields()
	if err := d.Decode(&p); err != nil {
		return nil, err
	}
	c := &Curve{Frequency: p.Frequency, Length: p.Length, ZRef: p.ZRef, Points: p.Points}
	if err := c.checkPoints(); err != nil {
		return nil, err
	}
	if err := c.fit(); err != nil {
		return nil, err
	}
	return c, nil
}

// Bounds on what a cache entry may hold, wide of anything a solve gives but
// narrow enough that the interpolant's arithmetic cannot overflow: slopes of
// at most maxCacheDB/minCacheStep.
const (
	maxCacheDB   = 1000  // |coupling| and |directivity|, dB (directivity is capped at 200)
	maxCacheZ    = 1e6   // line impedance, ohm
	minCacheStep = 1e-12 // offset spacing, m (1 pm)
)

// checkPoints reports whether the curve's numbers can be interpolated and
// used: frequency, length and reference impedance within the plausibility
// bounds, at least two points, offsets strictly increasing at least
// minCacheStep apart and within ±MaxDimension, the interpolated values
// finite and within their bounds.
func (c *Curve) checkPoints() error {
	if !(c.Frequency > 0 && c.Frequency <= MaxFrequency && c.Length > 0 && c.Length <= MaxDimension && c.ZRef > 0 && c.ZRef <= maxZRef) {
		return fmt.Errorf("frequency %g, length %g, z_ref %g", c.Frequency, c.Length, c.ZRef)
	}
	if len(c.Points) < 2 {
		return fmt.Errorf("%d points, need at least 2", len(c.Points))
	}
	for i, p := range c.Points {
		if !(math.Abs(p.Offset) <= MaxDimension && math.Abs(p.CouplingDB) <= maxCacheDB && math.Abs(p.DirectivityDB) <= maxCacheDB &&
			p.ZLine[0] > 0 && p.ZLine[0] <= maxCacheZ && p.ZLine[1] > 0 && p.ZLine[1] <= maxCacheZ) {
			return fmt.Errorf("point %d: implausible values (offset %g, coupling %g dB, directivity %g dB, z_line %v)", i, p.Offset, p.CouplingDB, p.DirectivityDB, p.ZLine)
		}
		if i > 0 && !(p.Offset-c.Points[i-1].Offset >= minCacheStep) {
			return fmt.Errorf("point %d: offset %g does not follow %g", i, p.Offset, c.Points[i-1].Offset)
		}
	}
	return nil
}

// encodeCache returns the cache entry of curve c under key.
func encodeCache(key string, c *Curve) ([]byte, error) {
	pl, err := json.Marshal(cachePayload{c.Frequency, c.Length, c.ZRef, c.Points})
	if err != nil {
		return nil, err
	}
	sum := sha256.Sum256(pl)
	return json.Marshal(cacheFile{CacheFormat, SolverVersion, key, hex.EncodeToString(sum[:]), pl})
}

func writeCache(dir, path, key string, c *Curve) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	b, err := encodeCache(key, c)
	if err != nil {
		return err
	}
	removeStaleTemps(dir)
	tmp, err := os.CreateTemp(dir, key+".*.tmp")
	if err != nil {
		return err
	}
	if _, err := tmp.Write(b); err != nil {
		tmp.Close()
		os.Remove(tmp.Name())
		return err
	}
	if err := tmp.Close(); err != nil {
		os.Remove(tmp.Name())
		return err
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		os.Remove(tmp.Name())
		return err
	}
	return nil
}

// staleTempAge is the age after which a temporary file of the cache's own
// naming is taken as left behind by a run that was killed while writing: a
// write takes milliseconds.
const staleTempAge = time.Hour

// removeStaleTemps removes temporary files of the cache's naming (a 64-digit
// key, a random part, ".tmp") older than staleTempAge from dir.
func removeStaleTemps(dir string) {
	m, _ := filepath.Glob(filepath.Join(dir, strings.Repeat("[0-9a-f]", 64)+".*.tmp"))
	for _, p := range m {
		if fi, err := os.Lstat(p); err == nil && fi.Mode().IsRegular() && time.Since(fi.ModTime()) > staleTempAge {
			os.Remove(p)
		}
	}
}
