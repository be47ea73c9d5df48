package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// bigJob returns the same-core demo stackup and error model with 100 x 50
// parts of two couplers each: 10,000 sites on an 18 x 24 in panel.
func bigJob(b testing.TB) string { return bigJobOf(b, false) }

// bigJobOf returns bigJob; with mixed, coupler B of each part is an offset
// coupler of a second section (the same traces 12 mil apart), so that the
// map draws the share of each site's window (two kinds per pixel).
func bigJobOf(b testing.TB, mixed bool) string {
	src, err := os.ReadFile("../../samples/same-core.toml")
	if err != nil {
		b.Fatal(err)
	}
	s := string(src)
	i := strings.Index(s, "[[part]]")
	k := strings.Index(s, "[[contributor]]")
	secB, extra := "hybrid", ""
	if mixed {
		secB = "offset"
		extra = `[[section]]
name      = "offset"
traces    = [
  { layer = "L3", width = "14 mil", etch = "0.6 mil" },
  { layer = "L4", width = "14 mil", etch = "0.6 mil" },
]
grounds   = ["L2", "L5"]
frequency = "2.45 GHz"
length    = "quarter-wave"
spec      = { coupling = "-6.0 dB", tolerance = "1.5 dB" }
design_offset = "12 mil"

`
	}
	parts := extra + `[[part]]
name     = "tiny"
size     = ["0.15 in", "0.40 in"]
couplers = [
  { name = "A", section = "hybrid", at = ["0.04 in", "0.2 in"], angle = "90 deg" },
  { name = "B", section = "` + secB + `", at = ["0.11 in", "0.2 in"], angle = "90 deg" },
]

[[array]]
part   = "tiny"
count  = [100, 50]
pitch  = ["0.16 in", "0.44 in"]
center = ["0 in", "0 in"]

`
	dir := b.TempDir()
	path := filepath.Join(dir, "big.toml")
	if err := os.WriteFile(path, []byte(s[:i]+parts+s[k:]), 0o644); err != nil {
		b.Fatal(err)
	}
	return path
}

// BenchmarkMap10k times "regdrift map" end to end on 10,000 sites with a
// 3000-pixel heatmap, the field solve cached: job parsing, site expansion,
// closed-form statistics, the cached curve, sites.csv, summary.json and the
// PNG, written to disk. The mixed case draws the window field of two
// sections.
func BenchmarkMap10k(b *testing.B) {
	b.Run("one section", func(b *testing.B) { benchMap(b, bigJobOf(b, false)) })
	b.Run("two sections", func(b *testing.B) { benchMap(b, bigJobOf(b, true)) })
}

func benchMap(b *testing.B, job string) {
	benchCommand(b, "map", job, "-o", b.TempDir(), "--width", "3000", "--cache-dir", b.TempDir())
	b.ReportMetric(b.Elapsed().Seconds()*1e3/float64(b.N), "ms/map")
}

// benchCommand runs the command line args once (solving and filling the
// cache it names) and then times it, allocations reported.
func benchCommand(b *testing.B, args ...string) {
	var o, e bytes.Buffer
	if code := realMain(args, nil, &o, &e); code != 0 {
		b.Fatalf("exit %d: %s", code, e.String())
	}
	b.ReportAllocs()
	for b.Loop() {
		o.Reset()
		if code := realMain(args, nil, &o, &e); code != 0 {
			b.Fatalf("exit %d: %s", code, e.String())
		}
	}
}
