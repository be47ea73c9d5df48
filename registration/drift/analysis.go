package drift

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sort"
	"sync"
	"sync/atomic"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// Site is one evaluated coupler site.
type Site struct {
	Site    panel.Site
	Section int // index into Input.Sections
	Eval
}

// Analysis is the evaluation of every site of an Input under one model. New
// prepares the registration side (rows, statistics, no field solve);
// Evaluate joins it to the sections' curves.
type Analysis struct {
	In    *Input
	Model *registration.Model
	// Yield holds the sites' sensitivity rows, layer pairs and allowed
	// intervals; its closed form and Monte Carlo are the yield study's.
	Yield *registration.Yield
	// Curves holds one curve per section, nil for a section no site uses;
	// nil until Evaluate.
	Curves []*Curve
	Sites  []Site
	used   []bool
	// proc holds per section the process side of its evaluator (nil
	// without process terms); set by Evaluate (variation.go).
	proc []*Proc
	// linearity is the report of CheckLinearity (variation_lin.go).
	linearity *Linearity
}

// New prepares the analysis of in under model (in.Model when nil): each
// site's sensitivity row and offset statistics. Every site must name a
// section of in; a site that does not is a programming error and panics.
func New(in *Input, model *registration.Model) *Analysis {
	if model == nil {
		model = in.Model
	}
	a := &Analysis{In: in, Model: model, Sites: make([]Site, len(in.Sites)), used: make([]bool, len(in.Sections))}
	index := make(map[string]int, len(in.Sections))
	for i, s := range in.Sections {
		index[s.Name] = i
	}
	ys := make([]registration.YieldSite, len(in.Sites))
	for k, s := range in.Sites {
		si, ok := index[s.Section]
		if !ok {
			panic(fmt.Sprintf("drift: site %q names no section of the input (%q)", s.Name, s.Section))
		}
		sec := in.Sections[si]
		ys[k] = registration.YieldSite{Pos: s.Pos, U: s.U, Upper: sec.Traces[0].Layer, Lower: sec.Traces[1].Layer,
			Nominal: sec.NominalOffset(), Part: s.Instance, Allowed: registration.EmptyInterval()}
		a.Sites[k].Site, a.Sites[k].Section = s, si
		a.used[si] = true
	}
	a.Yield = registration.NewYield(model, ys, len(in.Instances))
	for k := range in.Instances {
		if in.Instances[k].Coupon {
			a.Yield.Coupons = append(a.Yield.Coupons, k)
		}
	}
	for k := range a.Sites {
		r := &a.Sites[k]
		r.Row = a.Yield.Rows[k]
		r.Stats = a.Yield.Stats(k)
		r.Offset = ys[k].Nominal + r.Stats.MeanAcross
		r.Along = r.Stats.MeanAlong
	}
	return a
}

// Used reports whether any site uses section i.
func (a *Analysis) Used(i int) bool { return a.used[i] }

// Relative returns the relative displacement of section i's trace layers
// under the analysis's model.
func (a *Analysis) Relative(i int) *registration.Relative {
	s := a.In.Sections[i]
	for p, r := range a.Yield.Pairs {
		if r.Upper == s.Traces[0].Layer && r.Lower == s.Traces[1].Layer {
			return a.Yield.Pairs[p]
		}
	}
	return a.Model.Relative(s.Traces[0].Layer, s.Traces[1].Layer)
}

// Evaluator returns the evaluator of section i under the analysis's model;
// Evaluate must have run.
func (a *Analysis) Evaluator(i int) Evaluator {
	return Evaluator{Curve: a.Curves[i], Rel: a.Relative(i), Proc: a.procOf(i)}
}

// Reach returns, per section, the largest SiteReach of the sites that use it
// in any of the analyses (0 for a section none uses). The analyses must share
// one Input's sections.
func Reach(as ...*Analysis) []float64 {
	out := make([]float64, len(as[0].In.Sections))
	for _, a := range as {
		for k := range a.Sites {
			si := a.Sites[k].Section
			out[si] = math.Max(out[si], SiteReach(a.Sites[k].Stats))
		}
	}
	return out
}

// SolveCurves solves every section that a site of any of the analyses uses,
// over Reach(as...), and returns the curves per section (nil where unused),
// with process terms fitted with their second-order term (FitSecondOrder).
// With process terms the span doubles by SolveSection's rule also while the
// end of the solved offsets cuts a section's offset domain (the spec window
// widened by the process reach, bindProc) within reach of its sites
// (domainCut), the term refitted at each span: offsets beyond the solved
// ones count as out of spec, so the range must hold every offset a process
// excursion could keep in spec.
func SolveCurves(ctx context.Context, set *Settings, as ...*Analysis) ([]*Curve, error) {
	reach := Reach(as...)
	secs := as[0].In.Sections
	curves := make([]*Curve, len(secs))
	for i, s := range secs {
		used := false
		for _, a := range as {
			used = used || a.used[i]
		}
		if !used {
			continue
		}
		c, err := solveFor(ctx, set, s, i, reach[i], as)
		if err != nil {
			return nil, err
		}
		curves[i] = c
	}
	if err := FitSecondOrder(ctx, set, curves, as...); err != nil {
		return nil, err
	}
	return curves, nil
}

// SolveCurve solves section i alone by SolveCurves's rule, for the sites of
// the analyses (every one of them, whether or not a site uses section i):
// the curve every command reads, for a command that shows one section.
func SolveCurve(ctx context.Context, set *Settings, i int, as ...*Analysis) (*Curve, error) {
	return solveFor(ctx, set, as[0].In.Sections[i], i, Reach(as...)[i], as)
}

// solveFor solves section s, index i, for the sites of the analyses over
// reach as SolveCurves does: with process terms (and their sensitivities)
// the span also doubles while processCut finds the domain cut. Tol solves
// its sections by it too.
func solveFor(ctx context.Context, set *Settings, s *section.Section, i int, reach float64, as []*Analysis) (*Curve, error) {
	in := as[0].In
	var wider func(*Curve) (bool, error)
	if !in.Process.Empty() {
		wider = func(c *Curve) (bool, error) { return processCut(ctx, set, i, c, as) }
	}
	return solveSection(ctx, s, reach, withSensitivities(set, in), wider)
}

// processCut fits the second-order term of curve c of section i for the
// sites of the analyses (FitSecondOrder) and reports whether, for the sites
// of any of them, the end of the solved offsets cuts the section's offset
// domain within their reach (domainCut).
func processCut(ctx context.Context, set *Settings, i int, c *Curve, as []*Analysis) (bool, error) {
	one := make([]*Curve, len(as[0].In.Sections))
	one[i] = c
	if err := FitSecondOrder(ctx, set, one, as...); err != nil {
		return false, err
	}
	for _, a := range as {
		var pos []panel.Vec
		for k := range a.Sites {
			if a.Sites[k].Section == i {
				pos = append(pos, a.Sites[k].Site.Pos)
			}
		}
		if pr := bindProc(a.In.Process, c, pos); pr != nil && a.domainCut(i, pr) {
			return true, nil
		}
	}
	return false, nil
}

// domainCut reports whether the end of the solved offsets cuts pr's offset
// domain of section i within procRangeSigmas standard deviations of the mean
// offset of one of its sites: the offsets the closed form integrates over
// reach past a cut end, where a process excursion could keep the coupling in
// spec but the rule counts it out.
func (a *Analysis) domainCut(i int, pr *Proc) bool {
	if !(pr.Clipped[0] || pr.Clipped[1]) {
		return false
	}
	for k := range a.Sites {
		r := &a.Sites[k]
		if r.Section != i {
			continue
		}
		w := procRangeSigmas * r.Stats.SDAcross
		if (pr.Clipped[0] && r.Offset-w < pr.Domain.Lo) || (pr.Clipped[1] && r.Offset+w > pr.Domain.Hi) {
			return true
		}
	}
	return false
}

// Evaluate joins the analysis to curves (per section; every used section
// needs one): each site's allowed interval and every quantity of its Eval.
func (a *Analysis) Evaluate(curves []*Curve) {
	a.Curves = curves
	a.bindProcess()
	ev := make([]Evaluator, len(curves))
	for i := range curves {
		if a.used[i] {
			ev[i] = a.Evaluator(i)
		}
	}
	// The sites are independent (each writes only its own entries), so
	// they are shared among GOMAXPROCS workers by blocks of evalBlock:
	// the results do not depend on the split.
	eval := func(lo, hi int) {
		for k := lo; k < hi; k++ {
			r := &a.Sites[k]
			a.Yield.Sites[k].Allowed = curves[r.Section].Allowed
			r.Eval = ev[r.Section].EvalSite(a.Yield.Rows[k], r.Site.Pos)
		}
	}
	n := len(a.Sites)
	workers := min(runtime.GOMAXPROCS(0), (n+evalBlock-1)/evalBlock)
	if workers <= 1 {
		eval(0, n)
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				lo := int(next.Add(evalBlock)) - evalBlock
				if lo >= n {
					return
				}
				eval(lo, min(lo+evalBlock, n))
			}
		}()
	}
	wg.Wait()
}

// evalBlock is the number of sites a worker of Evaluate takes at a time:
// with process terms a few milliseconds of work, so that the workers
// finish together, and a job of fewer sites is evaluated on one.
const evalBlock = 256

// Analyse prepares in under its own model, solves the curves its sites need
// and evaluates every site.
func Analyse(ctx context.Context, in *Input, set *Settings) (*Analysis, error) {
	a := New(in, nil)
	curves, err := SolveCurves(ctx, set, a)
	if err != nil {
		return nil, err
	}
	a.Evaluate(curves)
	return a, nil
}

// InSpec counts the sites in spec.
func (a *Analysis) InSpec() int {
	n := 0
	for i := range a.Sites {
		if a.Sites[i].InSpec {
			n++
		}
	}
	return n
}

// MeanPInSpec returns the mean closed-form site yield: ExpectedInSpec over
// the number of sites, summed before dividing (adding 1/n n times overshoots
// 1 by rounding) and kept within [0, 1].
func (a *Analysis) MeanPInSpec() float64 {
	if len(a.Sites) == 0 {
		return 0
	}
	return Clamp01(a.ExpectedInSpec() / float64(len(a.Sites)))
}

// Clamp01 returns p kept within [0, 1], for means of probabilities.
func Clamp01(p float64) float64 { return math.Max(0, math.Min(1, p)) }

// Worst returns the indices of the n sites least likely to be in spec: the
// lowest PInSpec first, the largest |drift| breaking ties (sites at a
// probability of 1, or of 0, are ranked by how far their coupling has moved),
// then the index. It is the one ranking of the map's ringed sites, its
// "worst site" line and summary.json.
func (a *Analysis) Worst(n int) []int {
	idx := make([]int, len(a.Sites))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(p, q int) bool { return worseSite(&a.Sites[idx[p]], &a.Sites[idx[q]]) })
	return idx[:min(n, len(idx))]
}

// worseSite reports whether site p ranks before site q in Worst.
func worseSite(p, q *Site) bool {
	if p.PInSpec != q.PInSpec {
		return p.PInSpec < q.PInSpec
	}
	return math.Abs(p.Drift) > math.Abs(q.Drift)
}

// ExpectedInSpec returns the expected number of sites in spec, the sum of
// every site's PInSpec (the count InSpec judges only the mean offset).
func (a *Analysis) ExpectedInSpec() float64 {
	var s float64
	for i := range a.Sites {
		s += a.Sites[i].PInSpec
	}
	return s
}

// Warnings says, per used section, when its design is out of spec (its sites
// yield 0) and when the allowed interval is cut by the end of the solved
// offsets within the reach of some site.
func (a *Analysis) Warnings() []string {
	var out []string
	// Per section, the lowest and highest offset its sites reach.
	lo, hi := make([]float64, len(a.In.Sections)), make([]float64, len(a.In.Sections))
	for i := range lo {
		lo[i], hi[i] = math.Inf(1), math.Inf(-1)
	}
	for k := range a.Sites {
		p := a.Yield.Prob(k)
		w := YieldSigmas*p.SD + p.Uniform + p.Uniform2
		si := a.Sites[k].Section
		lo[si], hi[si] = math.Min(lo[si], p.Mean-w), math.Max(hi[si], p.Mean+w)
	}
	for i, c := range a.Curves {
		if c == nil || !a.used[i] {
			continue
		}
		s := c.Section
		nom := s.NominalOffset()
		if !c.DesignInSpec {
			out = append(out, fmt.Sprintf("section %q: the design is outside its spec: coupling %.3f dB at the design offset %.3f mil, spec %.2f ± %.2f dB; its sites yield 0",
				s.Name, c.Nominal, nom/unit.Mil, s.Spec.Coupling, s.Spec.Tolerance))
			continue
		}
		iv, lim := c.Allowed, c.Limits
		if (lim.Clipped[0] && lo[i] < iv.Lo) || (lim.Clipped[1] && hi[i] > iv.Hi) {
			out = append(out, fmt.Sprintf("section %q: the coupling is still in spec at the end of the solved offsets (%.3f to %.3f mil), within %d sigma of some sites; offsets beyond count as out of spec",
				s.Name, iv.Lo/unit.Mil, iv.Hi/unit.Mil, YieldSigmas))
		}
	}
	return append(out, a.processWarnings()...) // variation.go
}
