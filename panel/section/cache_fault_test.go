package section

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"syscall"
	"testing"
	"time"
)

// faultSetup returns a section, offsets and settings for the cache fault
// tests (a coarse target keeps each solve short) and the fresh curve, solved
// without the cache, that every damaged or unwritable cache must reproduce.
func faultSetup(t *testing.T) (*Section, []float64, *Settings, *Curve) {
	t.Helper()
	s := demoSection()
	offs := []float64{-2 * testMil, -1 * testMil, 0, 1 * testMil, 2 * testMil}
	set := &Settings{Accuracy: 1e-2}
	fresh, _, err := CachedSweep(context.Background(), s, offs, set, "", true)
	if err != nil {
		t.Fatal(err)
	}
	return s, offs, set, fresh
}

// sameNumbers reports whether two curves carry the same points, bit for bit
// (the solve is deterministic; the worker count does not change it).
func sameNumbers(t *testing.T, what string, got, want *Curve) {
	t.Helper()
	if len(got.Points) != len(want.Points) || got.Length != want.Length || got.Frequency != want.Frequency {
		t.Fatalf("%s: %d points, length %g; want %d, %g", what, len(got.Points), got.Length, len(want.Points), want.Length)
	}
	for i := range got.Points {
		g, w := got.Points[i], want.Points[i]
		if g.Offset != w.Offset || g.C != w.C || g.C0 != w.C0 || g.CouplingDB != w.CouplingDB || g.DirectivityDB != w.DirectivityDB || g.PeakFrequency != w.PeakFrequency {
			t.Errorf("%s: point %d differs from a fresh solve: %+v vs %+v", what, i, g.C, w.C)
		}
	}
	for _, o := range []float64{-1.5 * testMil, 0.3 * testMil} {
		if got.Coupling(o) != want.Coupling(o) {
			t.Errorf("%s: coupling at %s %v, fresh %v", what, mils(o), got.Coupling(o), want.Coupling(o))
		}
	}
}

// warned reports whether c carries a *CacheWarning for op.
func warned(c *Curve, op string) bool {
	for _, w := range c.CacheWarnings {
		var cw *CacheWarning
		if errors.As(w, &cw) && cw.Op == op {
			return true
		}
	}
	return false
}

// reencode rewrites the entry at path with its points changed by f and a
// correct checksum: damage the checksum cannot see.
func reencode(t *testing.T, path, key string, f func([]Point) []Point) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var cf cacheFile
	var p cachePayload
	if err := json.Unmarshal(b, &cf); err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(cf.Payload, &p); err != nil {
		t.Fatal(err)
	}
	c := &Curve{Frequency: p.Frequency, Length: p.Length, ZRef: p.ZRef, Points: f(p.Points)}
	nb, err := encodeCache(key, c)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, nb, 0o644); err != nil {
		t.Fatal(err)
	}
}

// TestCacheDamage: each kind of damage to a stored entry is ignored, reported
// as a read warning, recomputed to the numbers of a fresh solve, and
// rewritten (the next call hits) where the path allows.
func TestCacheDamage(t *testing.T) {
	s, offs, set, fresh := faultSetup(t)
	key := CacheKey(s, offs, set)
	kinds := []struct {
		name    string
		damage  func(t *testing.T, path string)
		rewrite bool // the entry can be rewritten in place
	}{
		{"truncated", func(t *testing.T, path string) {
			b, _ := os.ReadFile(path)
			os.WriteFile(path, b[:len(b)/2], 0o644)
		}, true},
		{"empty", func(t *testing.T, path string) { os.WriteFile(path, nil, 0o644) }, true},
		{"not JSON", func(t *testing.T, path string) { os.WriteFile(path, []byte("\x00\xff garbage"), 0o644) }, true},
		{"altered number", func(t *testing.T, path string) {
			// a parseable change the checksum catches: one digit of a coupling
			b, _ := os.ReadFile(path)
			i := bytes.Index(b, []byte(`"CouplingDB":-`))
			if i < 0 {
				t.Fatal("no coupling in the entry")
			}
			j := i + len(`"CouplingDB":-`)
			b[j] = "12"[b[j]&1]
			os.WriteFile(path, b, 0o644)
		}, true},
		{"reversed points", func(t *testing.T, path string) {
			reencode(t, path, key, func(p []Point) []Point { slices.Reverse(p); return p })
		}, true},
		{"duplicated point", func(t *testing.T, path string) {
			reencode(t, path, key, func(p []Point) []Point { return slices.Insert(p, 2, p[2]) })
		}, true},
		{"one point", func(t *testing.T, path string) {
			reencode(t, path, key, func(p []Point) []Point { return p[:1] })
		}, true},
		{"other key", func(t *testing.T, path string) {
			reencode(t, path, "0123", func(p []Point) []Point { return p })
		}, true},
		{"old format", func(t *testing.T, path string) {
			b, _ := json.Marshal(map[string]any{"Version": SolverVersion, "Key": key, "Points": fresh.Points})
			os.WriteFile(path, b, 0o644)
		}, true},
		{"oversized", func(t *testing.T, path string) {
			os.Truncate(path, maxCacheEntry+1) // sparse: no disk used
		}, true},
		{"symlink", func(t *testing.T, path string) {
			os.Rename(path, path+".real")
			os.Symlink(path+".real", path)
		}, true},
		{"directory", func(t *testing.T, path string) {
			os.Remove(path)
			os.Mkdir(path, 0o755)
		}, false},
		{"FIFO", func(t *testing.T, path string) {
			if runtime.GOOS == "windows" {
				t.Skip("no FIFOs")
			}
			os.Remove(path)
			if err := syscall.Mkfifo(path, 0o644); err != nil {
				t.Skip(err)
			}
		}, true},
	}
	for _, k := range kinds {
		t.Run(k.name, func(t *testing.T) {
			dir := t.TempDir()
			if _, hit, err := CachedSweep(context.Background(), s, offs, set, dir, false); hit || err != nil {
				t.Fatalf("first CachedSweep: hit %v err %v", hit, err)
			}
			path := filepath.Join(dir, key+".json")
			k.damage(t, path)
			type result struct {
				c   *Curve
				hit bool
				err error
			}
			done := make(chan result, 1)
			go func() {
				c, hit, err := CachedSweep(context.Background(), s, offs, set, dir, false)
				done <- result{c, hit, err}
			}()
			var r result
			select {
			case r = <-done:
			case <-time.After(2 * time.Minute): // a hang guard, not a timing assertion
				t.Fatal("CachedSweep hangs on the damaged entry")
			}
			if r.err != nil || r.hit {
				t.Fatalf("damaged entry: hit %v err %v", r.hit, r.err)
			}
			if !warned(r.c, "read") {
				t.Errorf("no read warning: %v", r.c.CacheWarnings)
			}
			if warned(r.c, "write") == k.rewrite {
				t.Errorf("write warning %v, want %v: %v", !k.rewrite, !k.rewrite, r.c.CacheWarnings)
			}
			sameNumbers(t, k.name, r.c, fresh)
			if k.rewrite {
				c, hit, err := CachedSweep(context.Background(), s, offs, set, dir, false)
				if err != nil || !hit {
					t.Errorf("rewritten entry: hit %v err %v", hit, err)
				} else {
					sameNumbers(t, k.name+" rewritten", c, fresh)
				}
			}
			if m, _ := filepath.Glob(filepath.Join(dir, "*.tmp")); len(m) != 0 {
				t.Errorf("temporary files left: %v", m)
			}
		})
	}
}

// TestCacheUnwritable: a cache that cannot be written does not fail the
// solve: the curve comes back with a write warning and the numbers of a
// fresh solve.
func TestCacheUnwritable(t *testing.T) {
	s, offs, set, fresh := faultSetup(t)
	cases := []struct {
		name string
		dir  func(t *testing.T) string
	}{
		{"directory is a file", func(t *testing.T) string {
			p := filepath.Join(t.TempDir(), "cache")
			os.WriteFile(p, []byte("x"), 0o644)
			return p
		}},
		{"parent is a file", func(t *testing.T) string {
			p := filepath.Join(t.TempDir(), "file")
			os.WriteFile(p, []byte("x"), 0o644)
			return filepath.Join(p, "cache")
		}},
		{"read-only directory", func(t *testing.T) string {
			if os.Geteuid() == 0 || runtime.GOOS == "windows" {
				t.Skip("permissions do not bind this user")
			}
			p := t.TempDir()
			os.Chmod(p, 0o555)
			t.Cleanup(func() { os.Chmod(p, 0o755) })
			return p
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := c.dir(t)
			got, hit, err := CachedSweep(context.Background(), s, offs, set, dir, false)
			if err != nil || hit {
				t.Fatalf("hit %v err %v", hit, err)
			}
			if !warned(got, "write") {
				t.Errorf("no write warning: %v", got.CacheWarnings)
			}
			t.Logf("%v", got.CacheWarnings)
			sameNumbers(t, c.name, got, fresh)
		})
	}
}

// TestCacheStaleTemps: a temporary file of the cache's naming older than
// staleTempAge (left by a run killed while writing) is removed by the next
// write; a fresh one (another run writing now) and other files are kept.
func TestCacheStaleTemps(t *testing.T) {
	s, offs, set, _ := faultSetup(t)
	dir := t.TempDir()
	key := CacheKey(s, offs, set)
	other := CacheKey(s, offs[1:], set)
	old := filepath.Join(dir, other+".123.tmp")
	fresh := filepath.Join(dir, other+".456.tmp")
	foreign := filepath.Join(dir, "notes.123.tmp")
	for _, p := range []string{old, fresh, foreign} {
		if err := os.WriteFile(p, []byte("{"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	long := time.Now().Add(-2 * staleTempAge)
	os.Chtimes(old, long, long)
	os.Chtimes(foreign, long, long)
	if _, _, err := CachedSweep(context.Background(), s, offs, set, dir, false); err != nil {
		t.Fatal(err)
	}
	for p, keep := range map[string]bool{old: false, fresh: true, foreign: true, filepath.Join(dir, key+".json"): true} {
		if _, err := os.Lstat(p); (err == nil) != keep {
			t.Errorf("%s: kept %v, want %v", filepath.Base(p), err == nil, keep)
		}
	}
}
