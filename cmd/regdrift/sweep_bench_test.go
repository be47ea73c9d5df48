package main

import (
	"bytes"
	"testing"
)

// BenchmarkSweepCommand times regdrift sweep of the same-core demo at
// 0.05 %, ±10 mil at 1 mil, nothing cached, end to end in the process: job
// load, the 21-offset solve (11 by the mirror), sweep.csv, sweep.png and
// section.png (and with the mesh overlaid).
func BenchmarkSweepCommand(b *testing.B) {
	for _, bc := range []struct {
		name  string
		extra []string
	}{{"plain", nil}, {"mesh", []string{"--mesh"}}} {
		b.Run(bc.name, func(b *testing.B) {
			dir := b.TempDir()
			args := append([]string{"sweep", "../../samples/same-core.toml", "--accuracy", "0.05%", "--no-cache",
				"--offsets", "-10mil:10mil:1mil", "-o", dir}, bc.extra...)
			b.ReportAllocs()
			for b.Loop() {
				var out, errw bytes.Buffer
				if code := realMain(args, nil, &out, &errw); code != 0 {
					b.Fatalf("exit %d: %s", code, errw.String())
				}
			}
		})
	}
}
