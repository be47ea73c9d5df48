package section

import (
	"context"
	"fmt"
	"syscall"
	"testing"
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// cpuTime returns the user plus system CPU time of the process.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// BenchmarkSweep21 times a 21-offset sweep of the demo section (three
// dielectrics, trapezoidal 1.2 mil traces) at the default accuracy and at
// 0.05 %, on all cores.
func BenchmarkSweep21(b *testing.B) {
	for _, bc := range []struct {
		name string
		acc  float64
	}{{"acc=0.1%", 1e-3}, {"acc=0.05%", 5e-4}} {
		b.Run(bc.name, func(b *testing.B) {
			s := demoSection()
			offs := DefaultOffsets(s, 0)
			set := &Settings{Accuracy: bc.acc}
			b.ReportAllocs()
			var c *Curve
			cpu0 := cpuTime()
			for b.Loop() {
				var err error
				c, err = Sweep(context.Background(), s, offs, set)
				if err != nil {
					b.Fatal(err)
				}
			}
			cpu := cpuTime() - cpu0
			// CPU time is reported beside wall time: on a shared machine the
			// wall time depends on the load, the CPU time much less.
			b.ReportMetric(cpu.Seconds()*1000/float64(b.N), "cpu-ms/op")
			b.ReportMetric(cpu.Seconds()*1000/float64(b.N)/float64(len(offs)), "cpu-ms/offset")
			p := c.Points[len(c.Points)/2].Convergence
			b.ReportMetric(float64(p.Unknowns), "unknowns")
			b.ReportMetric(float64(p.Iterations), "steps")
			b.ReportMetric(p.EstimatedError, "est-err")
		})
	}
}

// BenchmarkSolve times one offset of the demo section at the default
// accuracy (three mesh levels, each with and without dielectrics): at zero
// offset, inside a transition window (two topologies), and at 2 mil (one).
func BenchmarkSolve(b *testing.B) {
	for _, bc := range []struct {
		name string
		off  float64
	}{{"offset=0", 0}, {"offset=2mil", 2 * testMil}} {
		b.Run(bc.name, func(b *testing.B) {
			s := demoSection()
			b.ReportAllocs()
			var sol *Solution
			for b.Loop() {
				var err error
				if sol, err = Solve(s, bc.off, nil); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(sol.Convergence.Unknowns), "unknowns")
			b.ReportMetric(float64(sol.Convergence.BandWidth), "bandwidth")
			b.ReportMetric(float64(sol.Convergence.Iterations), "steps")
		})
	}
}

// BenchmarkCoupling times the interpolant that Monte Carlo calls.
func BenchmarkCoupling(b *testing.B) {
	c := syntheticCurve(b)
	b.ReportAllocs()
	x, sum := -4*testMil, 0.0
	for b.Loop() {
		sum += c.Coupling(x)
		x += 1e-9
		if x > 4*testMil {
			x = -4 * testMil
		}
	}
	sink = sum
}

var sink float64

// BenchmarkDrawing times the picture's geometry and mesh (section.png with
// --mesh) of the demo section at the default level.
func BenchmarkDrawing(b *testing.B) {
	s := demoSection()
	offs := DefaultOffsets(s, 0)
	b.Run("drawing", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			if _, err := s.Drawing(0); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("mesh", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			if _, err := s.SweepMesh(offs, 0, startLevel(DefaultAccuracy)); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// BenchmarkFront times the partial factorisation of one front, U11 by gonum
// Potrf and the rest by schur, against gonum's Trsm and Syrk for the rest.
func BenchmarkFront(b *testing.B) {
	for _, sz := range frontSizes {
		p, m := sz[0], sz[0]+sz[1]
		f0 := randomFront(m, 1)
		F := make([]float64, m*m)
		for _, v := range []struct {
			name string
			fn   func([]float64, int, int)
		}{
			{"schur", func(F []float64, m, p int) {
				lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: p, Data: F, Stride: m})
				if m > p {
					schur(F, m, p)
				}
			}},
			{"gonum-trsm-syrk", gonumFront},
		} {
			b.Run(fmt.Sprintf("%s/%d+%d", v.name, p, m-p), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					copy(F, f0)
					v.fn(F, m, p)
				}
			})
		}
	}
}
