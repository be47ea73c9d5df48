package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// bigVariants writes four thin variants of bigJob's 10,000-site panel: one
// base with everything but the array, and variants that place the 100 x 50
// array at four centres (shifted by up to 0.15 in) under their own names.
func bigVariants(b testing.TB) []string {
	src, err := os.ReadFile(bigJob(b))
	if err != nil {
		b.Fatal(err)
	}
	s := string(src)
	i, k := strings.Index(s, "[[array]]"), strings.Index(s, "[[contributor]]")
	dir := b.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "base.toml"), []byte(s[:i]+s[k:]), 0o644); err != nil {
		b.Fatal(err)
	}
	var paths []string
	for v := range 4 {
		p := filepath.Join(dir, fmt.Sprintf("v%d.toml", v+1))
		text := fmt.Sprintf(`include = ["base.toml"]

[[array]]
name   = "block%d"
part   = "tiny"
count  = [100, 50]
pitch  = ["0.16 in", "0.44 in"]
center = ["%.2f in", "%.2f in"]
`, v+1, 0.05*float64(v), -0.05*float64(v%2))
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			b.Fatal(err)
		}
		paths = append(paths, p)
	}
	return paths
}

// BenchmarkYieldVariants10k times "regdrift yield" of four variants of a
// 10,000-site panel end to end, curves cached: job parsing with includes,
// site expansion, closed-form statistics, the comparison and its files
// (variants.csv, variants.json, variants.png). closed-form is the
// comparison without a Monte Carlo; trials=1000 adds a 1,000-panel Monte
// Carlo per variant.
func BenchmarkYieldVariants10k(b *testing.B) {
	paths := bigVariants(b)
	cache := b.TempDir()
	for _, mode := range []struct {
		name string
		args []string
	}{{"closed-form", []string{"--closed-form"}}, {"trials=1000", []string{"--trials", "1000"}}} {
		b.Run(mode.name, func(b *testing.B) {
			benchCommand(b, append(append(append([]string{"yield"}, paths...), "-o", b.TempDir(), "--cache-dir", cache), mode.args...)...)
			b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/comparison")
		})
	}
}
