package main

import (
	"cmp"
	"context"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"text/tabwriter"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render/figure"
)

// topologyJobs are the three builds of the demo's topology comparison, in
// the order of its table: one 20 dB coupler designed three ways on one
// panel and one process file (samples/topology-*.toml, invented).
var topologyJobs = []struct{ file, build string }{
	{"topology-one-core.toml", "broadside, one core"},
	{"topology-two-core.toml", "broadside, two cores"},
	{"topology-microstrip.toml", "edge-coupled microstrip"},
}

// topologyRow is one build's line of the comparison.
type topologyRow struct {
	build              string
	nominal            float64 // dB at the design offset
	siteMC, siteClosed float64
	partYield          float64
	goodMean           float64
	goodP05, parts     int
	worst              drift.WorstSite
	// top is the coupling budget's first term over the panel and its share.
	top      string
	topShare float64
	// linear is the largest error of the process model used (with its
	// second-order term) against direct solves at ±3σ of every term, at
	// the worst sites, and firstOrder the first-order model's, dB;
	// warning is the check's warning, if any (drift.Linearity).
	linear, firstOrder float64
	warning            string
}

// demoTopology runs the topology comparison: map and yield of each build
// into out/topology-<build>/, the side-by-side table, and the finished
// copper against base foil study of the microstrip.
func demoTopology(ctx context.Context, std stdio, dir, out string, set *drift.Settings, width int, lu lengthUnit) error {
	fmt.Fprintf(std.out, "\ntopology: one 20 dB coupler designed three ways, one 18 x 24 in panel, one process file (topology-process.inc.toml)\n")
	var rows []topologyRow
	for _, tj := range topologyJobs {
		j, err := loadJob(filepath.Join(dir, tj.file), nil)
		if err != nil {
			return err
		}
		a, err := drift.Analyse(ctx, input(j), set)
		if err != nil {
			return err
		}
		// The first-order check of map, so that the table says how far
		// the linear process model is from direct solves.
		if err := a.CheckLinearity(ctx, set, 10); err != nil {
			return err
		}
		o := filepath.Join(out, strings.TrimSuffix(tj.file, ".toml"))
		msum, _, err := writeMap(o, a, figure.MapOptions{Show: "drift", Width: width}, lu)
		if err != nil {
			return err
		}
		res, err := a.Yield.MonteCarlo(ctx, registration.MCSettings{Trials: demoTrials, Seed: 1})
		if err != nil {
			return err
		}
		y, _, err := writeYield(o, a, res, 1, lu)
		if err != nil {
			return err
		}
		r := topologyRow{build: tj.build, nominal: a.Curves[0].Nominal, siteMC: y.SiteYieldMean, siteClosed: y.SiteYieldMeanClosed,
			partYield: y.PartYieldMean, goodMean: y.GoodPartsPerPanel.Mean, goodP05: y.GoodPartsPerPanel.P05, parts: y.Parts}
		if len(msum.Worst) > 0 {
			r.worst = msum.Worst[0]
		}
		if msum.Linearity != nil {
			r.linear, r.firstOrder = msum.Linearity.MaxModelErrorDB, msum.Linearity.MaxErrorDB
			r.warning = msum.Linearity.Warning
		}
		if cb := y.CouplingBudget; cb != nil && len(cb.Panel) > 0 {
			r.top, r.topShare = cb.Panel[0].Name, cb.Panel[0].Share
		}
		rows = append(rows, r)
	}
	printTopology(std.out, rows, demoTrials)
	return demoFoil(ctx, std, dir, filepath.Join(out, "topology-foil"), set, lu)
}

// printTopology writes the comparison table.
func printTopology(w io.Writer, rows []topologyRow, trials int) {
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  build\tnominal [dB]\tsite yield (closed form)\tgood parts per panel (5th pct)\tworst site drift: registration + variation [dB]\tprocess 1σ there [dB]\tlargest share of the coupling variance\tmodel error at ±3σ (first order) [dB]\n")
	for _, r := range rows {
		var reg, vari, sd float64
		if s := r.worst.DriftSources; s != nil {
			reg, vari, sd = s.RegistrationDB, s.VariationDB, s.VariationSDDB
		}
		fmt.Fprintf(tw, "  %s\t%.3f\t%.2f %% (%.2f %%)\t%.1f of %d (%d)\t%+.3f %+.3f\t%.3f\t%s (%.0f %%)\t%.3f (%.3f)\n", r.build, r.nominal,
			100*r.siteMC, 100*r.siteClosed, r.goodMean, r.parts, r.goodP05, reg, vari, sd, r.top, 100*r.topShare, r.linear, r.firstOrder)
	}
	tw.Flush()
	for _, r := range rows {
		if r.warning != "" {
			fmt.Fprintf(w, "  %s: %s\n", r.build, r.warning)
		}
	}
	best := slices.MaxFunc(rows, func(a, b topologyRow) int { return cmp.Compare(a.goodMean, b.goodMean) })
	fmt.Fprintf(w, "  most parts in spec: %s (%d panels each, the same seed)\n", best.build, trials)
}

// foilOffsets are the centre-to-centre spacings of the microstrip pair the
// foil study sweeps.
func foilOffsets(nom float64) []float64 {
	var offs []float64
	for d := -6.0; d <= 6.0; d += 1 {
		offs = append(offs, nom+d*unit.Mil)
	}
	return offs
}

// demoFoil compares the microstrip's coupling with its finished copper
// (foil plus plating, as built) and with the base foil taken as the trace
// height: two sweeps of the spacing, and what a design drawn from the foil
// sweep gives when built.
func demoFoil(ctx context.Context, std stdio, dir, out string, set *drift.Settings, lu lengthUnit) error {
	j, err := loadJob(filepath.Join(dir, "topology-microstrip.toml"), nil)
	if err != nil {
		return err
	}
	fin := j.Sections[0]
	foil, err := foilOnly(fin)
	if err != nil {
		return err
	}
	nom := fin.NominalOffset()
	offs := foilOffsets(nom)
	cf, _, err := drift.SolveAt(ctx, fin, offs, set)
	if err != nil {
		return err
	}
	cb, _, err := drift.SolveAt(ctx, foil, offs, set)
	if err != nil {
		return err
	}
	if _, err := writeAll(out,
		outFile{"sweep-finished.csv", func(w io.Writer) error { return drift.WriteSweepCSV(w, cf, lu.units()) }},
		outFile{"sweep-foil.csv", func(w io.Writer) error { return drift.WriteSweepCSV(w, cb, lu.units()) }},
		outFile{"sweep-foil.png", func(w io.Writer) error { return figure.Sweep(w, foil, cb, lu.units()) }}); err != nil {
		return err
	}
	l1 := traceLayer(fin)
	target := fin.Spec.Coupling
	// The spacing a designer who took the foil as the trace height would
	// draw for the nominal coupling, and what the finished copper gives there.
	drawn, ok := spacingFor(cb, target)
	fmt.Fprintf(std.out, "  foil   the microstrip with the base foil as its trace height (%.2f %s) against the finished copper (%.2f %s):\n",
		l1.Foil/lu.factor, lu.name, l1.Thickness/lu.factor, lu.name)
	tw := tabwriter.NewWriter(std.out, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  trace height\tcoupling at %.1f %s [dB]\tZ0 [ohm]\tspacing for %.1f dB [%s]\n", nom/lu.factor, lu.name, target, lu.name)
	for _, c := range []struct {
		name string
		cv   *section.Curve
		t    float64
	}{{"finished", cf, l1.Thickness}, {"foil only", cb, l1.Foil}} {
		p := pointAt(c.cv, nom)
		sp := "outside the sweep"
		if d, ok := spacingFor(c.cv, target); ok {
			sp = fmt.Sprintf("%.2f", d/lu.factor)
		}
		fmt.Fprintf(tw, "  %s %.2f %s\t%.3f\t%.2f\t%s\n", c.name, c.t/lu.factor, lu.name, p.CouplingDB, math.Sqrt(p.ZEven*p.ZOdd), sp)
	}
	tw.Flush()
	if ok {
		got := cf.Coupling(drawn)
		fmt.Fprintf(std.out, "  drawn from the foil sweep at %.2f %s, the finished part couples %.3f dB (%+.3f dB against %.1f ± %.1f dB) -> %s\n",
			drawn/lu.factor, lu.name, got, got-target, target, fin.Spec.Tolerance, filepath.Join(out, "sweep-foil.png"))
	}
	return nil
}

// foilOnly returns a copy of the microstrip section s with its trace
// layer's thickness the base foil alone (no plating).
func foilOnly(s *section.Section) (*section.Section, error) {
	c := *s
	c.Name = s.Name + " (foil only)"
	c.Stackup.Layers = slices.Clone(s.Stackup.Layers)
	for i := range c.Stackup.Layers {
		l := &c.Stackup.Layers[i]
		if l.Name == s.Traces[0].Layer {
			if l.Foil <= 0 {
				return nil, fmt.Errorf("section %q: layer %s gives no base foil", s.Name, l.Name)
			}
			l.Thickness, l.Plating = l.Foil, nil
		}
	}
	return &c, nil
}

// traceLayer returns the stackup layer of s's first trace.
func traceLayer(s *section.Section) section.Layer {
	for _, l := range s.Stackup.Layers {
		if l.Name == s.Traces[0].Layer {
			return l
		}
	}
	return section.Layer{}
}

// pointAt returns the solved point of c nearest to off.
func pointAt(c *section.Curve, off float64) section.Point {
	best := c.Points[0]
	for _, p := range c.Points {
		if math.Abs(p.Offset-off) < math.Abs(best.Offset-off) {
			best = p
		}
	}
	return best
}

// spacingFor returns the offset in c's range at which the coupling equals
// target (bisection on the curve's monotone interpolant; the coupling of
// an edge-coupled pair falls as the spacing grows), and whether the range
// holds one.
func spacingFor(c *section.Curve, target float64) (float64, bool) {
	lo, hi := c.Range()
	flo, fhi := c.Coupling(lo)-target, c.Coupling(hi)-target
	if flo*fhi > 0 {
		return 0, false
	}
	for range 100 {
		mid := (lo + hi) / 2
		fm := c.Coupling(mid) - target
		if fm*flo > 0 {
			lo, flo = mid, fm
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2, true
}
