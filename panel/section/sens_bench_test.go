package section

import (
	"context"
	"testing"
)

// benchSweep times Sweep of s over offs with set, reporting CPU time beside
// wall time (the machine is shared).
func benchSweep(b *testing.B, s *Section, offs []float64, set *Settings) {
	b.ReportAllocs()
	var c *Curve
	cpu0 := cpuTime()
	for b.Loop() {
		var err error
		if c, err = Sweep(context.Background(), s, offs, set); err != nil {
			b.Fatal(err)
		}
	}
	cpu := cpuTime() - cpu0
	b.ReportMetric(cpu.Seconds()*1000/float64(b.N), "cpu-ms/op")
	p := c.Points[len(c.Points)/2]
	b.ReportMetric(float64(p.Convergence.Unknowns), "unknowns")
	b.ReportMetric(float64(p.Convergence.Iterations), "steps")
	b.ReportMetric(float64(len(p.Sens)), "params")
}

// BenchmarkSensitivities21: the demo section (three dielectrics, 12
// parameters) over 21 offsets at the default accuracy, plain and with every
// sensitivity.
func BenchmarkSensitivities21(b *testing.B) {
	s := demoSection()
	offs := DefaultOffsets(s, 0)
	b.Run("plain", func(b *testing.B) { benchSweep(b, s, offs, nil) })
	b.Run("sens", func(b *testing.B) { benchSweep(b, s, offs, &Settings{Sensitivities: true}) })
}

// BenchmarkMask: an edge-coupled microstrip pair over 21 offsets at the
// default accuracy, bare and under a solder mask.
func BenchmarkMask(b *testing.B) {
	s := edgeMicro(10*testMil, 18*testMil, 6*testMil, 1.4*testMil, 3.48)
	m := withMask(s, 1.0*testMil, 0.6*testMil, 3.8)
	offs := DefaultOffsets(m, 0) // the coats keep the traces further apart
	b.Run("bare", func(b *testing.B) { benchSweep(b, s, offs, nil) })
	b.Run("mask", func(b *testing.B) { benchSweep(b, m, offs, nil) })
}

// BenchmarkSweepWide: the demo section over ±10 mil in 1 mil steps at
// 0.05 % (the mirror solves 11 of the 21 offsets).
func BenchmarkSweepWide(b *testing.B) {
	s := demoSection()
	var offs []float64
	for i := -10; i <= 10; i++ {
		offs = append(offs, float64(i)*testMil)
	}
	benchSweep(b, s, offs, &Settings{Accuracy: 5e-4})
}
