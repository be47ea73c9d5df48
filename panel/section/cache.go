package section

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
)

// SolverVersion changes whenever a change to the solver changes its numbers;
// it is part of every cache key.
const SolverVersion = "section-3"

// cacheKey is what the cache hash covers: the section's content (not its
// name), the offsets and the solver accuracy (not the worker count, which
// does not change the numbers).
type cacheKey struct {
	Version      string
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
	k := cacheKey{SolverVersion, s.Stackup, s.Traces, s.Grounds, s.Frequency, s.Length, s.ZRef, s.DesignOffset, offsets, set.accuracy(), set.sensitivities()}
	b, err := json.Marshal(k)
	if err != nil {
		panic(err) // only finite floats reach here: Validate ran first
	}
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

// cacheFile is the on-disk form of a curve.
type cacheFile struct {
	Version   string
	Key       string
	Frequency float64
	Length    float64
	ZRef      float64
	Points    []Point
}

// CachedSweep returns the curve of Sweep from the cache directory dir
// (os.UserCacheDir()/regdrift when dir is ""), keyed by CacheKey; on a miss it
// runs Sweep and stores the result (written to a temporary file, then renamed,
// so that a failed run leaves no half-written entry). noCache bypasses the
// cache in both directions. A damaged or stale entry is ignored and rewritten.
func CachedSweep(ctx context.Context, s *Section, offsets []float64, set *Settings, dir string, noCache bool) (c *Curve, hit bool, err error) {
	if err := s.Validate(); err != nil {
		return nil, false, err
	}
	if noCache {
		c, err := Sweep(ctx, s, offsets, set)
		return c, false, err
	}
	if dir == "" {
		base, err := os.UserCacheDir()
		if err != nil {
			return nil, false, fmt.Errorf("section cache: %w", err)
		}
		dir = filepath.Join(base, "regdrift")
	}
	key := CacheKey(s, offsets, set)
	path := filepath.Join(dir, key+".json")
	// A missing, unreadable or stale entry is recomputed.
	if c, err := readCache(path, key); err == nil {
		c.Section = s.Name
		return c, true, nil
	}
	c, err = Sweep(ctx, s, offsets, set)
	if err != nil {
		return nil, false, err
	}
	if err := writeCache(dir, path, key, c); err != nil {
		return c, false, fmt.Errorf("section cache: %w", err)
	}
	return c, false, nil
}

func readCache(path, key string) (*Curve, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var f cacheFile
	if err := json.Unmarshal(b, &f); err != nil {
		return nil, err
	}
	if f.Version != SolverVersion || f.Key != key || len(f.Points) < 2 {
		return nil, errors.New("stale cache entry")
	}
	c := &Curve{Frequency: f.Frequency, Length: f.Length, ZRef: f.ZRef, Points: f.Points}
	if err := c.fit(); err != nil {
		return nil, err
	}
	return c, nil
}

func writeCache(dir, path, key string, c *Curve) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	b, err := json.Marshal(cacheFile{SolverVersion, key, c.Frequency, c.Length, c.ZRef, c.Points})
	if err != nil {
		return err
	}
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
