package main

import (
	"bufio"
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

// writeBigTargets writes an invented measurement file of panels × layers ×
// targets rows into dir and returns its path: a 60-column grid of targets on
// an 18 x 24 in panel, each layer scaled by 3e-4 and 2e-4 with 0.05 mil of
// noise. It is generated, never committed: 100 × 8 × 3000 rows make about
// 100 MB.
func writeBigTargets(tb testing.TB, dir string, panels, layers, targets int) string {
	path := filepath.Join(dir, "targets.csv")
	f, err := os.Create(path)
	if err != nil {
		tb.Fatal(err)
	}
	w := bufio.NewWriter(f)
	fmt.Fprintln(w, "panel,layer,target,x [in],y [in],dx [mil],dy [mil]")
	rows := (targets + 59) / 60
	rng := rand.New(rand.NewPCG(1, 2))
	for p := 1; p <= panels; p++ {
		for l := 1; l <= layers; l++ {
			for t := 0; t < targets; t++ {
				x := -8 + 16*float64(t%60)/59
				y := -11 + 22*float64(t/60)/float64(max(rows-1, 1))
				fmt.Fprintf(w, "P%03d,L%d,T%05d,%.4f,%.4f,%.4f,%.4f\n", p, l, t+1, x, y,
					0.3*x+0.05*rng.NormFloat64(), -0.2*y+0.05*rng.NormFloat64())
			}
		}
	}
	if err := w.Flush(); err != nil {
		tb.Fatal(err)
	}
	if err := f.Close(); err != nil {
		tb.Fatal(err)
	}
	return path
}

// BenchmarkFit240k times "regdrift fit" end to end on 100 panels × 8 layers
// × 300 targets (240,000 rows, about 10 MB): reading, 800 robust fits, the
// pooled grids, fit.csv, the full residuals.csv and fit.png (a sample).
func BenchmarkFit240k(b *testing.B) {
	in := writeBigTargets(b, b.TempDir(), 100, 8, 300)
	out := b.TempDir()
	args := []string{"fit", in, "--robust", "-o", out}
	var o, e bytes.Buffer
	b.ReportAllocs()
	for b.Loop() {
		o.Reset()
		if code := realMain(args, nil, &o, &e); code != 0 {
			b.Fatalf("exit %d: %s", code, e.String())
		}
	}
}

// TestFitSampledFigure checks that a file with more targets than fit.png
// draws still counts every one in the fit and writes every residual row.
func TestFitSampledFigure(t *testing.T) {
	if testing.Short() {
		t.Skip("writes 24,000 targets")
	}
	in := writeBigTargets(t, t.TempDir(), 10, 1, 2400) // 24,000 on one layer, over the 20,000 drawn
	out := t.TempDir()
	var o, e bytes.Buffer
	if code := realMain([]string{"fit", in, "-o", out}, nil, &o, &e); code != 0 {
		t.Fatalf("exit %d: %s", code, e.String())
	}
	b, err := os.ReadFile(filepath.Join(out, "residuals.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if n := bytes.Count(b, []byte("\n")); n != 24000+1 {
		t.Errorf("residuals.csv has %d lines, want 24,001", n)
	}
	if _, err := os.Stat(filepath.Join(out, "fit.png")); err != nil {
		t.Error(err)
	}
}
