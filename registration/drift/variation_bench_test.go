package drift

import (
	"syscall"
	"testing"
	"time"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// bigProcessInput is bigInput with its dielectrics named and 12 process
// terms, one on every parameter of the stripline pair: thicknesses as
// domes, copper as edge profiles, widths as tilts, the rest flat; each
// with a panel and a site part (invented values of the order of a
// fabricator's).
func bigProcessInput(b *testing.B) *Input {
	in := bigInput(b)
	s := in.Sections[0]
	s.Stackup.Layers[1].Name, s.Stackup.Layers[3].Name, s.Stackup.Layers[5].Name = "P1", "C2", "P2"
	n := func(mean, sd float64) registration.Term { return term(mean, sd) }
	dome := func(a float64) process.Shape { return process.Shape{Kind: process.Dome, Amplitude: a} }
	edge := process.Shape{Kind: process.Edge, Amplitude: 0.2 * mil, Decay: 2 * inch}
	tilt := func(y bool) process.Shape { return process.Shape{Kind: process.Tilt, Amplitude: 0.3 * mil, AlongY: y} }
	var ts []process.Term
	for _, d := range []string{"P1", "C2", "P2"} {
		ts = append(ts, process.Term{Name: d + " thickness", Layer: d, Quantity: process.Thickness, Panel: n(0, 0.2*mil), Shape: dome(0.3 * mil), SiteSigma: 0.05 * mil},
			process.Term{Name: d + " er", Layer: d, Quantity: process.Er, Panel: n(0, 0.03)})
	}
	for i, c := range []string{"L3", "L4"} {
		ts = append(ts, process.Term{Name: c + " copper", Layer: c, Quantity: process.Copper, Panel: n(0, 0.1*mil), Shape: edge, SiteSigma: 0.03 * mil},
			process.Term{Name: c + " width", Layer: c, Quantity: process.Width, Panel: registration.Term{Spread: 0.3 * mil, Dist: registration.Uniform}, Shape: tilt(i == 1), SiteSigma: 0.1 * mil},
			process.Term{Name: c + " etch", Layer: c, Quantity: process.Etch, Panel: n(0, 0.1*mil)})
	}
	in.Process = &process.Model{Size: in.Layout.Panel.Size, Terms: ts}
	return in
}

// evaluatedProcess returns bigProcessInput, its curves (solved into a
// temporary cache) and its analysis evaluated on them.
func evaluatedProcess(b *testing.B) (*Input, []*Curve, *Analysis) {
	in := bigProcessInput(b)
	set := &Settings{Accuracy: 0.01, CacheDir: b.TempDir()}
	curves, err := SolveCurves(b.Context(), set, New(in, nil))
	if err != nil {
		b.Fatal(err)
	}
	a := New(in, nil)
	a.Evaluate(curves)
	return in, curves, a
}

// BenchmarkAnalyse10kProcess is BenchmarkAnalyse10k with 12 process
// terms: every quantity of every site, P(in spec) by the offset integral.
func BenchmarkAnalyse10kProcess(b *testing.B) {
	in, curves, a := evaluatedProcess(b)
	if len(a.proc[0].Bind) != 12 {
		b.Fatalf("%d terms bound, want 12", len(a.proc[0].Bind))
	}
	b.ReportAllocs()
	for b.Loop() {
		a := New(in, nil)
		a.Evaluate(curves)
	}
}

// BenchmarkValueProcess times one per-pixel evaluation with 12 process
// terms.
func BenchmarkValueProcess(b *testing.B) {
	in := bigProcessInput(b)
	a, err := Analyse(b.Context(), in, &Settings{Accuracy: 0.01, CacheDir: b.TempDir()})
	if err != nil {
		b.Fatal(err)
	}
	ev := a.Evaluator(0)
	p, u := panel.Vec{X: 3 * inch, Y: -4 * inch}, panel.Vec{Y: 1}
	for _, q := range []struct {
		name string
		q    Quantity
	}{{"drift", Drift}, {"worst", WorstDrift}, {"pinspec", PInSpec}} {
		b.Run(q.name, func(b *testing.B) {
			b.ReportAllocs()
			var sink float64
			for b.Loop() {
				sink += ev.Value(q.q, p, u)
			}
			_ = sink
		})
	}
}

// BenchmarkMonteCarloProcess times the Monte Carlo yield of the 10,000
// sites with 12 process terms on one worker: 256 panels (one block) per
// iteration, reported as site evaluations (one site on one panel) per
// second and per CPU second. Every site is decided by the process check:
// 12 bound terms in 4 shape groups (the three domes, the two edges, the
// two tilts), 7 of them with a per-site part.
func BenchmarkMonteCarloProcess(b *testing.B) {
	in := bigProcessInput(b)
	a, err := Analyse(b.Context(), in, &Settings{Accuracy: 0.01, CacheDir: b.TempDir()})
	if err != nil {
		b.Fatal(err)
	}
	pc, _ := a.Yield.Check.(*procCheck)
	if pc == nil || pc.tabs[0].nb != 12 || len(pc.tabs[0].groups) != 4 || !pc.tabs[0].covers {
		b.Fatal("not 12 bound terms in 4 shape groups on the table's fast path")
	}
	for i := range a.Sites {
		if !pc.Claims(i) {
			b.Fatalf("site %d not decided by the process check", i)
		}
	}
	b.ReportAllocs()
	cpu0 := cpuSeconds(b)
	for b.Loop() {
		if _, err := a.Yield.MonteCarlo(b.Context(), registration.MCSettings{Trials: registration.MCBlock, Seed: 1, Workers: 1}); err != nil {
			b.Fatal(err)
		}
	}
	evals := float64(b.N) * registration.MCBlock * float64(len(in.Sites))
	b.ReportMetric(evals/b.Elapsed().Seconds(), "site-evals/s")
	// Per CPU second too: on a shared machine the wall figure counts the
	// time the one worker waited for a core.
	b.ReportMetric(evals/(cpuSeconds(b)-cpu0), "site-evals/cpu-s")
}

// cpuSeconds returns the CPU time (user and system) of the process so far.
func cpuSeconds(b *testing.B) float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		b.Fatal(err)
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano()).Seconds()
}

// BenchmarkMonteCarloProcessMemory shows that memory is flat in the number
// of trials with process terms: B/op and allocs/op are the same for two
// blocks of panels (one per worker) and for ten.
func BenchmarkMonteCarloProcessMemory(b *testing.B) {
	in := bigProcessInput(b)
	a, err := Analyse(b.Context(), in, &Settings{Accuracy: 0.01, CacheDir: b.TempDir()})
	if err != nil {
		b.Fatal(err)
	}
	for _, blocks := range []int{2, 10} {
		b.Run(map[int]string{2: "trials=512", 10: "trials=2560"}[blocks], func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := a.Yield.MonteCarlo(b.Context(), registration.MCSettings{Trials: blocks * registration.MCBlock, Seed: 1, Workers: 2}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
