package main

import (
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/job"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/render"
)

type compFlags struct {
	outputFlags
	targets   string
	objective string
	drill     string
	max       string
	step      string
	model     string
	robust    bool
	weight    string
	keep      bool
	width     int
	strict    bool
	solver    solverFlags
}

// flags declares the command's flags on fs.
func (f *compFlags) flags(fs *pflag.FlagSet) {
	f.outputFlags.add(fs)
	fs.StringVar(&f.targets, "targets", "", "measurement file (CSV) whose fitted lot joins the model")
	fs.StringVar(&f.objective, "objective", "worst", "minimise the worst offset (worst, linear programme) or the rms offset (rms)")
	fs.StringVar(&f.drill, "drill-budget", "", "keep each trace layer's registration to the drilled holes within this, per axis (e.g. 2mil)")
	fs.StringVar(&f.max, "max", "1000ppm", "largest artwork scale change per layer and axis")
	fs.StringVar(&f.step, "step", "", "increment the imaging equipment accepts (e.g. 5ppm; default continuous)")
	fs.StringVar(&f.model, "model", "affine", "fit model for --targets: affine, similarity or translation")
	fs.BoolVar(&f.robust, "robust", true, "fit --targets robustly (reject mis-measured targets)")
	fs.StringVar(&f.weight, "weight", "tukey", "robust weight function for --targets: tukey or huber")
	fs.BoolVar(&f.keep, "keep-job-terms", false, "add the measured movement to the job's contributors instead of replacing them for the measured layers")
	fs.IntVar(&f.width, "width", 2400, "width of comp.png in pixels")
	addStrict(fs, &f.strict, "a site is out of spec after compensation")
	f.solver.add(fs)
}

// measuredModel returns a copy of m with the fitted lots joined: each lot
// becomes a contributor; unless keep, the layers a lot measures (both of a
// relative pair) are taken out of the job's contributors first, and a
// contributor left with no layer is dropped. notes says what changed.
func measuredModel(m *registration.Model, lots []registration.Lot, file string, keep bool) (*registration.Model, []string) {
	out := &registration.Model{Datum: m.Datum}
	measured := map[string]bool{}
	for _, l := range lots {
		u, lo, rel := registration.SplitLayer(l.Layer)
		measured[u] = true
		if rel {
			measured[lo] = true
		}
	}
	var notes []string
	for _, c := range m.Contributors {
		c.Layers = slices.Clone(c.Layers)
		if !keep {
			var kept, gone []string
			for _, l := range c.Layers {
				if measured[l] {
					gone = append(gone, l)
				} else {
					kept = append(kept, l)
				}
			}
			switch {
			case len(kept) == 0:
				notes = append(notes, fmt.Sprintf("contributor %q left out: the measurement holds %s", c.Name, strings.Join(gone, ", ")))
				continue
			case len(gone) > 0:
				notes = append(notes, fmt.Sprintf("contributor %q now moves %s only: the measurement holds %s", c.Name, strings.Join(kept, ", "), strings.Join(gone, ", ")))
			}
			c.Layers = kept
		}
		out.Contributors = append(out.Contributors, c)
	}
	for _, l := range lots {
		out.Contributors = append(out.Contributors, l.Contributor(fmt.Sprintf("measured %s (lot of %d panels, %s)", l.Layer, l.Panels, file)))
	}
	return out, notes
}

// compState is the model before and after compensation with what each does.
type compState struct {
	job      *Job // the job with the model before compensation
	after    *Job // the same with the compensation added
	res      *registration.CompResult
	ysBefore *yieldSetup
	ysAfter  *yieldSetup
	notes    []string // model changes, warnings
	fitted   []string // measured layers
}

// compSigmas is how far the solved curves reach: the largest |mean| plus
// compSigmas standard deviations of any site before or after compensation. A
// site's offset falls beyond 5σ with probability 5.7e-7, far below the yields
// reported, and the curve is not solved farther out than the map needs.
const compSigmas = 5

// compYield prepares the yield of each job (the same sections, different
// models) from one set of solved curves covering all of them.
func compYield(ctx context.Context, jobs []*Job, sf *solverFlags) ([]*yieldSetup, []string, error) {
	set, err := sf.settings()
	if err != nil {
		return nil, nil, err
	}
	var yss []*yieldSetup
	for _, j := range jobs {
		yss = append(yss, newYieldSetup(j))
	}
	secs := jobs[0].Sections
	span := make([]float64, len(secs))
	for _, ys := range yss {
		for k, s := range ys.job.Sites {
			si := ys.secIndex[s.Section]
			st := ys.y.Stats(k)
			span[si] = math.Max(span[si], math.Abs(st.MeanAcross)+compSigmas*st.SDAcross)
		}
	}
	var warns []string
	for i, s := range secs {
		if !yss[0].used[i] {
			continue
		}
		c, _, err := section.CachedSweep(ctx, s, section.DefaultOffsets(s, span[i]), set, sf.cacheDir, sf.noCache)
		if err != nil {
			return nil, nil, fmt.Errorf("section %q: %w", s.Name, err)
		}
		lo, hi := c.Range()
		iv, lim, err := registration.SpecInterval(c.Coupling, lo, hi, s.NominalOffset(), s.Spec.Coupling, s.Spec.Tolerance)
		switch {
		case errors.Is(err, registration.ErrNominalOutOfSpec):
			warns = append(warns, fmt.Sprintf("section %q: the design is outside its spec at the design offset; its sites yield 0", s.Name))
		case err != nil:
			return nil, nil, badInput(fmt.Errorf("section %q: %w", s.Name, err))
		}
		for _, ys := range yss {
			ys.curves[i], ys.allowed[i], ys.limits[i] = c, iv, lim
			ys.outSpec[i] = errors.Is(err, registration.ErrNominalOutOfSpec)
		}
	}
	for _, ys := range yss {
		ys.setAllowed()
	}
	return yss, warns, nil
}

// siteOK reports whether site k of ys is in spec at its mean offset.
func siteOK(ys *yieldSetup, k int) bool {
	st := ys.y.Stats(k)
	s := &ys.y.Sites[k]
	return s.Allowed.Contains(s.Nominal + st.MeanAcross)
}

func (cs *compState) tally(ys *yieldSetup) (inSpec int, yield float64) {
	for k := range ys.y.Sites {
		if siteOK(ys, k) {
			inSpec++
		}
		yield += ys.y.ClosedForm(k)
	}
	if n := len(ys.y.Sites); n > 0 {
		yield /= float64(n)
	}
	return inSpec, yield
}

func (f *compFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("comp takes one job file")
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	set := registration.CompSettings{}
	if set.Objective, err = registration.ParseObjective(f.objective); err != nil {
		return usageErr("--objective: %v", err)
	}
	if f.drill != "" {
		if set.DrillBudget, err = unit.Parse(f.drill, unit.Length); err != nil {
			return usageErr("--drill-budget: %v", err)
		}
		if !(set.DrillBudget > 0) {
			return usageErr("--drill-budget: the budget must be positive")
		}
	}
	if set.Max, err = unit.Parse(f.max, unit.Strain); err != nil {
		return usageErr("--max: %v", err)
	}
	if !(set.Max > 0 && set.Max < 0.1) {
		return usageErr("--max: want a positive scale below 10 %%, such as 600ppm")
	}
	if f.step != "" {
		if set.Step, err = unit.Parse(f.step, unit.Strain); err != nil {
			return usageErr("--step: %v", err)
		}
		if !(set.Step > 0 && set.Step <= set.Max) {
			return usageErr("--step: want a positive step not above --max")
		}
	}
	if f.width < 300 || f.width > 20000 {
		return usageErr("--width: want 300 to 20000 pixels, not %d", f.width)
	}
	fm, err := registration.ParseFitModel(f.model)
	if err != nil {
		return usageErr("--model: %v", err)
	}
	fset := registration.FitSettings{Model: fm}
	if f.robust {
		if fset.Robust, err = registration.ParseRobust(f.weight); err != nil || fset.Robust == registration.NoRobust {
			return usageErr("--weight: want tukey or huber, not %q", f.weight)
		}
	}
	if f.targets == "-" && args[0] == "-" {
		return usageErr("the job and --targets cannot both be standard input")
	}
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	cs := &compState{}
	model := j.Model
	if f.targets != "" {
		fset.Datum = j.Layout.Panel.Datum
		fr, err := runFitFile(f.targets, std.in, fset, 5)
		if err != nil {
			return err
		}
		copper := map[string]bool{}
		for _, l := range j.Stackup.Layers {
			if l.Kind == section.Copper {
				copper[l.Name] = true
			}
		}
		var lots []registration.Lot
		for _, l := range fr.lots {
			u, lo, rel := registration.SplitLayer(l.Layer)
			if !copper[u] || (rel && !copper[lo]) {
				fmt.Fprintf(std.err, "regdrift comp: warning: %s: layer %q is not a copper layer of %s; its targets are skipped\n", fr.file, l.Layer, j.File)
				continue
			}
			lots = append(lots, l)
			cs.fitted = append(cs.fitted, l.Layer)
		}
		var notes []string
		model, notes = measuredModel(j.Model, lots, fr.file, f.keep)
		cs.notes = append(cs.notes, notes...)
	}
	before := *j
	before.Model = model
	cs.job = &before
	sites := make([]registration.CompSite, len(j.Sites))
	for k, s := range j.Sites {
		sec := j.Section(s.Section)
		sites[k] = registration.CompSite{Pos: s.Pos, U: s.U, Upper: sec.Traces[0].Layer, Lower: sec.Traces[1].Layer}
	}
	res, err := registration.Compensate(model, sites, &set)
	if err != nil {
		return badInput(fmt.Errorf("%s: %w", j.File, err))
	}
	cs.res = res
	am := &registration.Model{Datum: model.Datum, Contributors: append(slices.Clone(model.Contributors), res.Contributors()...)}
	after := *j
	after.Model = am
	cs.after = &after
	yss, warns, err := compYield(ctx, []*Job{cs.job, cs.after}, &f.solver)
	if err != nil {
		return err
	}
	cs.ysBefore, cs.ysAfter = yss[0], yss[1]
	cs.notes = append(cs.notes, warns...)
	sum := cs.summary()
	paths, err := writeAll(f.out,
		outFile{"comp.csv", func(w io.Writer) error { return cs.writeCSV(w, lu) }},
		outFile{"comp.json", func(w io.Writer) error { return writeJSON(w, sum) }},
		outFile{"compensation.toml", func(w io.Writer) error { return cs.writeTOML(w) }},
		outFile{"comp.png", func(w io.Writer) error { return cs.draw(w, sum, f.width, lu) }})
	if err != nil {
		return err
	}
	for _, n := range cs.notes {
		fmt.Fprintf(std.err, "regdrift comp: %s\n", n)
	}
	if err := report(std, f.json, sum, func() { cs.printTable(std.out, sum, lu, paths) }); err != nil {
		return err
	}
	if f.strict && sum.After.InSpec < sum.After.Sites {
		return fmt.Errorf("%w: %d of %d sites outside the coupling spec after compensation", errOutOfSpec, sum.After.Sites-sum.After.InSpec, sum.After.Sites)
	}
	return nil
}

type compLayerJSON struct {
	Layer        string   `json:"layer"`
	ScaleXPPM    float64  `json:"scale_x_ppm"`
	ScaleYPPM    float64  `json:"scale_y_ppm"`
	FactorX      float64  `json:"factor_x"`
	FactorY      float64  `json:"factor_y"`
	NetXPPM      float64  `json:"net_x_ppm"`
	NetYPPM      float64  `json:"net_y_ppm"`
	MeanScaleX   float64  `json:"mean_scale_x_ppm"`
	MeanScaleY   float64  `json:"mean_scale_y_ppm"`
	FreeX, FreeY bool     `json:"-"`
	Free         []string `json:"free_axes"`
}

type compPairJSON struct {
	Upper    string  `json:"upper"`
	Lower    string  `json:"lower"`
	DiffXPPM float64 `json:"diff_x_ppm"`
	DiffYPPM float64 `json:"diff_y_ppm"`
}

type compStateJSON struct {
	Sites        int     `json:"sites"`
	WorstOffsetM float64 `json:"worst_offset_m"`
	RMSOffsetM   float64 `json:"rms_offset_m"`
	InSpec       int     `json:"in_spec"`
	SiteYield    float64 `json:"site_yield"`
	DrillWorstM  float64 `json:"drill_worst_m"`
}

type compSummary struct {
	Job         string          `json:"job"`
	Objective   string          `json:"objective"`
	DrillBudget float64         `json:"drill_budget_m,omitempty"`
	Measured    []string        `json:"measured_layers,omitempty"`
	Layers      []compLayerJSON `json:"layers"`
	Pairs       []compPairJSON  `json:"pairs"`
	Common      string          `json:"common_part"`
	Notes       []string        `json:"notes"`
	Before      compStateJSON   `json:"before"`
	After       compStateJSON   `json:"after"`
}

func (cs *compState) summary() *compSummary {
	r := cs.res
	s := &compSummary{Job: cs.job.File, Objective: r.Objective.String(), Measured: cs.fitted, Common: r.Common,
		Notes: append(slices.Clone(r.Notes), cs.notes...)}
	for _, l := range r.Layers {
		lj := compLayerJSON{Layer: l.Layer, ScaleXPPM: l.X.Scale / 1e-6, ScaleYPPM: l.Y.Scale / 1e-6,
			FactorX: l.X.Factor, FactorY: l.Y.Factor, NetXPPM: l.X.Net / 1e-6, NetYPPM: l.Y.Net / 1e-6,
			MeanScaleX: l.MeanScale[0] / 1e-6, MeanScaleY: l.MeanScale[1] / 1e-6, FreeX: l.X.Free, FreeY: l.Y.Free, Free: []string{}}
		if l.X.Free {
			lj.Free = append(lj.Free, "x")
		}
		if l.Y.Free {
			lj.Free = append(lj.Free, "y")
		}
		s.Layers = append(s.Layers, lj)
	}
	for _, p := range r.Pairs {
		s.Pairs = append(s.Pairs, compPairJSON{p.Upper, p.Lower, p.Net[0] / 1e-6, p.Net[1] / 1e-6})
	}
	ib, yb := cs.tally(cs.ysBefore)
	ia, ya := cs.tally(cs.ysAfter)
	n := len(cs.job.Sites)
	s.Before = compStateJSON{n, r.WorstBefore, r.RMSBefore, ib, yb, r.DrillBefore}
	s.After = compStateJSON{n, r.WorstAfter, r.RMSAfter, ia, ya, r.DrillAfter}
	return s
}

func (cs *compState) writeCSV(w io.Writer, lu lengthUnit) error {
	cw := csv.NewWriter(w)
	L, P := "["+lu.name+"]", "["+lu.panel+"]"
	header := []string{"site", "section", "x " + P, "y " + P, "angle [deg]",
		"offset_before " + L, "offset_after " + L, "sigma " + L, "in_spec_before", "in_spec_after", "p_before", "p_after"}
	if err := cw.Write(header); err != nil {
		return err
	}
	g := func(v float64, d int) string { return strconv.FormatFloat(v, 'f', d, 64) }
	for k, s := range cs.job.Sites {
		sb, sa := cs.ysBefore.y.Stats(k), cs.ysAfter.y.Stats(k)
		nom := cs.ysBefore.y.Sites[k].Nominal
		rec := []string{s.Name, s.Section, g(s.Pos.X/lu.pfac, 4), g(s.Pos.Y/lu.pfac, 4), g(s.Angle*180/math.Pi, 2),
			g((nom+sb.MeanAcross)/lu.factor, 4), g((nom+sa.MeanAcross)/lu.factor, 4), g(sa.SDAcross/lu.factor, 4),
			strconv.FormatBool(siteOK(cs.ysBefore, k)), strconv.FormatBool(siteOK(cs.ysAfter, k)),
			g(cs.ysBefore.y.ClosedForm(k), 6), g(cs.ysAfter.y.ClosedForm(k), 6)}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// writeTOML writes the recommendation as fixed contributors: the net scale
// change of each layer, which is what the job's model needs to map the
// compensated build.
func (cs *compState) writeTOML(w io.Writer) error {
	return job.WriteCompensation(w, cs.job.File, cs.res)
}

func (cs *compState) printTable(w io.Writer, s *compSummary, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "%s\nartwork scale compensation (objective: %s)\n", cs.job.Title, s.Objective)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "layer\tmovement X [ppm]\tmovement Y [ppm]\tartwork X [ppm]\tfactor X\tartwork Y [ppm]\tfactor Y\tfree\n")
	for _, l := range s.Layers {
		fmt.Fprintf(tw, "%s\t%+.1f\t%+.1f\t%+.2f\t%.9f\t%+.2f\t%.9f\t%s\n", l.Layer, l.MeanScaleX, l.MeanScaleY,
			l.ScaleXPPM, l.FactorX, l.ScaleYPPM, l.FactorY, strings.Join(l.Free, ", "))
	}
	tw.Flush()
	for _, p := range s.Pairs {
		fmt.Fprintf(w, "difference %s − %s: X %+.2f ppm, Y %+.2f ppm (this is what moves the offsets)\n", p.Upper, p.Lower, p.DiffXPPM, p.DiffYPPM)
	}
	fmt.Fprintf(w, "common part: %s\n", s.Common)
	for _, n := range cs.res.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "\tworst offset [%s]\trms offset [%s]\tin spec\tsite yield\tdrill worst [%s]\t\n", lu.name, lu.name, lu.name)
	for _, r := range []struct {
		name string
		v    compStateJSON
	}{{"before", s.Before}, {"after", s.After}} {
		fmt.Fprintf(tw, "%s\t%.3f\t%.3f\t%d/%d\t%.4f %%\t%.3f\t\n", r.name, r.v.WorstOffsetM/lu.factor, r.v.RMSOffsetM/lu.factor,
			r.v.InSpec, r.v.Sites, 100*r.v.SiteYield, r.v.DrillWorstM/lu.factor)
	}
	tw.Flush()
	fmt.Fprintf(w, "offsets are the mean misregistration across the lines (design offset excluded); in spec and yield use the coupling curve\n")
	for _, p := range paths {
		fmt.Fprintf(w, "wrote %s\n", p)
	}
}

// draw renders the mean offset (design offset excluded) before and after,
// side by side on one diverging colour scale.
func (cs *compState) draw(w io.Writer, s *compSummary, width int, lu lengthUnit) error {
	j := cs.job
	aB, aA := newAnalysis(cs.job), newAnalysis(cs.after)
	zones := aB.zones()
	global := zones[len(zones)-1]
	sec, u := global.sec, global.u
	outline := j.Layout.Panel.Outline()
	ext := toRect(outline)
	ur := toRect(j.Layout.Panel.Usable())
	nx := max(width/12, 40)
	ny := max(int(float64(nx)*ur.Dy()/ur.Dx()), 40)
	field := func(a *analysis) func(x, y float64) float64 {
		return func(x, y float64) float64 {
			p := panel.Vec{X: x, Y: y}
			z := zoneAt(zones, p)
			rel := a.rel[z.sec]
			return rel.Stats(rel.Row(p, z.u)).MeanAcross / lu.factor
		}
	}
	grids := []*render.Grid{render.NewGrid(ur, nx, ny, field(aB)), render.NewGrid(ur, nx, ny, field(aA))}
	var lim float64
	for _, g := range grids {
		lo, hi := g.Range()
		lim = math.Max(lim, math.Max(-lo, hi))
	}
	for _, a := range []*analysis{aB, aA} {
		for i := range a.sites {
			lim = math.Max(lim, math.Abs(a.sites[i].Stats.MeanAcross/lu.factor))
		}
	}
	if !(lim > 0) {
		lim = 1e-3
	}
	ru := render.Inch
	if lu.panel == "mm" {
		ru = render.Millimetre
	}
	var comp []string
	for _, l := range s.Layers {
		comp = append(comp, fmt.Sprintf("%s X %+.1f Y %+.1f ppm", l.Layer, l.ScaleXPPM, l.ScaleYPPM))
	}
	title := []string{
		j.Title,
		fmt.Sprintf("artwork scale compensation (%s objective): %s", s.Objective, strings.Join(comp, "; ")),
		fmt.Sprintf("field: over each array its most common coupler (elsewhere %s, lines at %.0f deg); bars: each site; common part: %s",
			j.Sections[sec].Name, math.Atan2(u.Y, u.X)*180/math.Pi, strings.SplitN(s.Common, ":", 2)[0]),
	}
	caption := func(name string, v compStateJSON) string {
		return fmt.Sprintf("%s: worst %.2f %s, rms %.2f %s, %d/%d in spec, site yield %.3f %%",
			name, v.WorstOffsetM/lu.factor, lu.name, v.RMSOffsetM/lu.factor, lu.name, v.InSpec, v.Sites, 100*v.SiteYield)
	}
	m := render.NewMap(render.MapSpec{Width: width, Extent: ext, Views: 2, Title: title, Unit: ru,
		Captions: []string{caption("before", s.Before), caption("after", s.After)}})
	barL := barLen(j)
	for vi, a := range []*analysis{aB, aA} {
		v := m.Views[vi]
		v.FieldGrid(grids[vi], render.Diverging, -lim, lim)
		v.StrokeRect(ur, render.LineStyle{Color: render.Frame, Dash: []float64{6, 4}})
		v.StrokeRect(ext, render.LineStyle{Color: render.Ink, Width: 2})
		bars := make([]render.Bar, len(a.sites))
		for i := range a.sites {
			r := &a.sites[i]
			bars[i] = render.Bar{At: render.Point{X: r.Site.Pos.X, Y: r.Site.Pos.Y}, Length: barL, Angle: r.Site.Angle,
				Color: render.Diverging.Map(r.Stats.MeanAcross/lu.factor, -lim, lim)}
		}
		v.Bars(bars, render.BarStyle{})
	}
	m.ColorBar(render.Diverging, -lim, lim, "mean broadside offset across the lines, design offset excluded ["+lu.name+"]")
	return m.EncodePNG(w)
}
