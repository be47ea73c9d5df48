package section

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"math"
	"testing"
)

// fuzzKey is the key the fuzzed entries are read under.
const fuzzKey = "fuzz"

// checkAccepted checks a curve that decodeCache accepted: it must be usable
// (sorted finite offsets, finite interpolated values inside and just outside
// its range) and survive a round trip through encodeCache unchanged.
func checkAccepted(t *testing.T, c *Curve) {
	lo, hi := c.Range()
	if !(lo < hi) {
		t.Fatalf("accepted curve with range [%g, %g]", lo, hi)
	}
	for _, o := range []float64{lo, (lo + hi) / 2, hi, lo - (hi - lo), hi + (hi - lo)} {
		if v := c.Coupling(o); math.IsNaN(v) {
			t.Fatalf("coupling at %g is NaN", o)
		}
		_ = c.Directivity(o)
		_ = c.ZLine(o)
	}
	b, err := encodeCache(fuzzKey, c)
	if err != nil {
		t.Fatalf("accepted curve does not encode: %v", err)
	}
	c2, err := decodeCache(b, fuzzKey)
	if err != nil {
		t.Fatalf("round trip rejected: %v", err)
	}
	if len(c2.Points) != len(c.Points) || c2.Coupling((lo+hi)/2) != c.Coupling((lo+hi)/2) {
		t.Fatalf("round trip changed the curve")
	}
}

// cacheSeeds returns a valid entry of the synthetic curve and damaged forms
// of it.
func cacheSeeds(t testing.TB) [][]byte {
	// Three points keep the seeds small (2 kB): the fuzzer minimises every
	// new input, and that is quadratic in its size.
	c := syntheticCurve(t)
	c.Points = c.Points[9:12]
	good, err := encodeCache(fuzzKey, c)
	if err != nil {
		t.Fatal(err)
	}
	seeds := [][]byte{good, good[:len(good)/2], []byte("{}"), []byte(`{"Format":2}`), nil}
	seeds = append(seeds, bytes.Replace(good, []byte(`"CouplingDB":-3`), []byte(`"CouplingDB":-4`), 1))
	return seeds
}

// FuzzCacheEntry feeds arbitrary bytes to the cache-entry reader: it must
// never panic, and an entry it accepts must be a usable curve.
func FuzzCacheEntry(f *testing.F) {
	for _, s := range cacheSeeds(f) {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		c, err := decodeCache(b, fuzzKey)
		if err == nil {
			checkAccepted(t, c)
		}
	})
}

// FuzzCachePayload fuzzes the payload behind a correct header and checksum,
// so that the fuzzer reaches the point checks and the interpolant (a random
// change to a whole entry almost never passes the checksum).
func FuzzCachePayload(f *testing.F) {
	for _, s := range cacheSeeds(f) {
		var cf cacheFile
		if json.Unmarshal(s, &cf) == nil && len(cf.Payload) > 0 {
			f.Add([]byte(cf.Payload))
		}
	}
	f.Add([]byte(`{"Frequency":1e9,"Length":0.01,"ZRef":50,"Points":[{"Offset":1},{"Offset":0}]}`))
	f.Add([]byte(`{"Frequency":1e9,"Length":0.01,"ZRef":50,"Points":[{"Offset":0},{"Offset":0}]}`))
	f.Add([]byte(`{"Frequency":1e9,"Length":0.01,"ZRef":50,"Points":[{"Offset":0,"CouplingDB":1e308},{"Offset":1e-300,"CouplingDB":-1e308}]}`))
	f.Fuzz(func(t *testing.T, payload []byte) {
		sum := sha256.Sum256(payload)
		b, err := json.Marshal(struct {
			Format       int
			Version, Key string
			Sum          string
			Payload      json.RawMessage
		}{CacheFormat, SolverVersion, fuzzKey, hex.EncodeToString(sum[:]), payload})
		if err != nil {
			return // not a JSON value: it cannot be stored as a payload
		}
		c, err := decodeCache(b, fuzzKey)
		if err == nil {
			checkAccepted(t, c)
		}
	})
}
