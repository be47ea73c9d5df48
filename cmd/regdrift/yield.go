package main

import (
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/render"
)

type yieldFlags struct {
	outputFlags
	trials  int
	seed    uint64
	workers int
	strict  bool
	solver  solverFlags
}

// flags declares the command's flags on fs.
func (f *yieldFlags) flags(fs *pflag.FlagSet) {
	fs.IntVar(&f.trials, "trials", 10000, "number of panels drawn in the Monte Carlo")
	fs.Uint64Var(&f.seed, "seed", 1, "seed of the random streams")
	fs.IntVar(&f.workers, "workers", 0, "parallel workers (0: one per CPU); results do not depend on it")
	f.outputFlags.add(fs)
	addStrict(fs, &f.strict, "the expected part yield is below 100 %")
	f.solver.add(fs)
}

// yieldSigmas is how far beyond the sites' mean offsets, in standard
// deviations, an allowed interval cut by the end of the solved offsets draws
// a warning: beyond 8σ a normal tail holds 6e-16, below anything a yield can
// show.
const yieldSigmas = 8

// yieldSetup is a job prepared for yield: solved curves, allowed intervals and
// the registration yield problem.
type yieldSetup struct {
	job      *Job
	secIndex map[string]int
	curves   []*section.Curve
	allowed  []registration.Interval
	limits   []registration.SpecLimits
	outSpec  []bool // per section: the design itself is out of spec
	used     []bool
	y        *registration.Yield
	warnings []string
}

// newYieldSetup prepares the registration side of a yield study of j: the
// sites, their rows and parts. The allowed intervals are left empty.
func newYieldSetup(j *Job) *yieldSetup {
	n := len(j.Sections)
	ys := &yieldSetup{job: j, secIndex: map[string]int{}, curves: make([]*section.Curve, n),
		allowed: make([]registration.Interval, n), limits: make([]registration.SpecLimits, n),
		outSpec: make([]bool, n), used: make([]bool, n)}
	for i, s := range j.Sections {
		ys.secIndex[s.Name] = i
	}
	sites := make([]registration.YieldSite, len(j.Sites))
	for k, s := range j.Sites {
		sec := j.Sections[ys.secIndex[s.Section]]
		sites[k] = registration.YieldSite{Pos: s.Pos, U: s.U, Upper: sec.Traces[0].Layer, Lower: sec.Traces[1].Layer,
			Nominal: sec.NominalOffset(), Part: s.Instance, Allowed: registration.EmptyInterval()}
		ys.used[ys.secIndex[s.Section]] = true
	}
	ys.y = registration.NewYield(j.Model, sites, len(j.Instances))
	return ys
}

// setAllowed gives every site the allowed interval of its section.
func (ys *yieldSetup) setAllowed() {
	for k, s := range ys.job.Sites {
		ys.y.Sites[k].Allowed = ys.allowed[ys.secIndex[s.Section]]
	}
}

// setupYield solves (or reads from the cache) each used section's curve over
// the offsets its sites can reach and inverts it against the spec.
func setupYield(ctx context.Context, j *Job, sf *solverFlags) (*yieldSetup, error) {
	set, err := sf.settings()
	if err != nil {
		return nil, err
	}
	n := len(j.Sections)
	ys := newYieldSetup(j)
	reach := make([][2]float64, n) // per section, the lowest and highest mean ± yieldSigmas·σ of its sites
	for i := range reach {
		reach[i] = [2]float64{math.Inf(1), math.Inf(-1)}
	}
	for k, s := range j.Sites {
		si := ys.secIndex[s.Section]
		p := ys.y.Prob(k)
		w := yieldSigmas*p.SD + p.Uniform
		reach[si][0] = math.Min(reach[si][0], p.Mean-w)
		reach[si][1] = math.Max(reach[si][1], p.Mean+w)
	}
	for i, s := range j.Sections {
		if !ys.used[i] {
			continue
		}
		c, iv, lim, err := tolCurve(ctx, s, set, sf, s.Spec.Coupling, s.Spec.Tolerance)
		switch {
		case errors.Is(err, registration.ErrNominalOutOfSpec):
			ys.outSpec[i] = true
			ys.warnings = append(ys.warnings, fmt.Sprintf("section %q: the design is outside its spec: coupling %.3f dB at the design offset %.3f mil, spec %.2f ± %.2f dB; its sites yield 0",
				s.Name, c.Coupling(s.NominalOffset()), s.NominalOffset()/milM, s.Spec.Coupling, s.Spec.Tolerance))
		case err != nil:
			return nil, err
		}
		ys.curves[i] = c
		if (lim.Clipped[0] && reach[i][0] < iv.Lo) || (lim.Clipped[1] && reach[i][1] > iv.Hi) {
			ys.warnings = append(ys.warnings, fmt.Sprintf("section %q: the coupling is still in spec at the end of the solved offsets (%.3f to %.3f mil), within %d sigma of some sites; offsets beyond count as out of spec",
				s.Name, iv.Lo/milM, iv.Hi/milM, yieldSigmas))
		}
		ys.allowed[i], ys.limits[i] = iv, lim
	}
	ys.setAllowed()
	return ys, nil
}

const milM = 25.4e-6 // one mil in metres, for messages

// yieldJSON is the machine-readable summary of a yield run (INTERFACE.md).
type yieldJSON struct {
	Job                 string          `json:"job"`
	Trials              int             `json:"trials"`
	Seed                uint64          `json:"seed"`
	Sites               int             `json:"sites"`
	Parts               int             `json:"parts"`
	SiteYieldMean       float64         `json:"site_yield_mean"`
	SiteYieldMeanClosed float64         `json:"site_yield_mean_closed"`
	PartYieldMean       float64         `json:"part_yield_mean"`
	GoodPartsPerPanel   goodPartsJSON   `json:"good_parts_per_panel"`
	WorstParts          []worstPartJSON `json:"worst_parts"`
	WorstSites          []worstSiteJSON `json:"worst_sites"`
	Sections            []yieldSecJSON  `json:"sections"`
	Budget              budgetJSON      `json:"budget"`
	Orientation         []orientJSON    `json:"orientation,omitempty"`
	Warnings            []string        `json:"warnings,omitempty"`
}

type goodPartsJSON struct {
	Mean float64 `json:"mean"`
	SD   float64 `json:"sd"`
	Min  int     `json:"min"`
	P05  int     `json:"p05"`
	P50  int     `json:"p50"`
	P95  int     `json:"p95"`
	Max  int     `json:"max"`
}

type worstPartJSON struct {
	Name           string  `json:"name"`
	PartYield      float64 `json:"part_yield"`
	PartYieldSE    float64 `json:"part_yield_se"`
	WorstSite      string  `json:"worst_site"`
	WorstSiteYield float64 `json:"worst_site_yield"`
}

type worstSiteJSON struct {
	Name     string  `json:"name"`
	XM       float64 `json:"x_m"`
	YM       float64 `json:"y_m"`
	PClosed  float64 `json:"p_closed"`
	PMC      float64 `json:"p_mc"`
	PMCSE    float64 `json:"p_mc_se"`
	OffsetM  float64 `json:"offset_mean_m"`
	OffsetSD float64 `json:"offset_sd_m"`
}

type yieldSecJSON struct {
	Name            string   `json:"name"`
	Sites           int      `json:"sites"`
	NominalCoupling float64  `json:"nominal_coupling_db"`
	DesignOffsetM   float64  `json:"design_offset_m"`
	AllowedLowM     *float64 `json:"allowed_low_m"`  // null when the design is out of spec
	AllowedHighM    *float64 `json:"allowed_high_m"` // null when the design is out of spec
	LowClipped      bool     `json:"allowed_low_at_curve_end,omitempty"`
	HighClipped     bool     `json:"allowed_high_at_curve_end,omitempty"`
	DesignInSpec    bool     `json:"design_in_spec"`
	SiteYieldMean   float64  `json:"site_yield_mean"`
}

type budgetJSON struct {
	WorstSite string          `json:"worst_site"`
	AtWorst   []budgetRowJSON `json:"worst_site_terms"`
	Panel     []budgetRowJSON `json:"panel_terms"`
}

type budgetRowJSON struct {
	Contributor string  `json:"contributor"`
	Term        string  `json:"term"`
	Share       float64 `json:"share"`
	SDM         float64 `json:"sd_m"`
}

type orientJSON struct {
	Array           int     `json:"array"`
	Part            string  `json:"part"`
	Rotate          int     `json:"rotate_deg"`
	MeanYield       float64 `json:"site_yield_mean"`
	MeanYieldTurned float64 `json:"site_yield_mean_turned"`
	WorstYield      float64 `json:"site_yield_worst"`
	WorstTurned     float64 `json:"site_yield_worst_turned"`
	RMSOffsetM      float64 `json:"rms_offset_m"`
	RMSOffsetTurned float64 `json:"rms_offset_turned_m"`
	TurnHelps       bool    `json:"turn_helps"`
}

func (f *yieldFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("yield takes one job file")
	}
	if f.trials <= 0 {
		return usageErr("--trials: want a positive number of panels, not %d", f.trials)
	}
	if f.workers < 0 {
		return usageErr("--workers: want 0 (one per CPU) or more, not %d", f.workers)
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	ys, err := setupYield(ctx, j, &f.solver)
	if err != nil {
		return err
	}
	for _, w := range ys.warnings {
		fmt.Fprintf(std.err, "regdrift yield: warning: %s\n", w)
	}
	pb := newProgress(std, "Monte Carlo", "panels")
	res, err := ys.y.MonteCarlo(ctx, registration.MCSettings{Trials: f.trials, Seed: f.seed, Workers: f.workers, Progress: pb.update})
	pb.finish()
	if err != nil {
		return err
	}
	sum := ys.summary(res, f.seed)
	paths, err := writeAll(f.out,
		outFile{"yield.csv", func(w io.Writer) error { return ys.writeCSV(w, res, lu) }},
		outFile{"budget.csv", func(w io.Writer) error { return ys.writeBudgetCSV(w, sum, lu) }},
		outFile{"yield.json", func(w io.Writer) error { return writeJSON(w, sum) }},
		outFile{"yield.png", func(w io.Writer) error { return ys.drawYield(w, res, sum, lu) }},
		outFile{"parts.png", func(w io.Writer) error { return drawParts(w, res, sum, j) }},
		outFile{"budget.png", func(w io.Writer) error { return drawBudget(w, sum, lu) }})
	if err != nil {
		return err
	}
	if err := report(std, f.json, sum, func() { ys.printTable(std.out, sum, lu, paths) }); err != nil {
		return err
	}
	if f.strict && sum.PartYieldMean < 1 {
		return fmt.Errorf("%w: expected part yield %.4f %%", errOutOfSpec, 100*sum.PartYieldMean)
	}
	return nil
}

// worstSite returns the site with the lowest closed-form yield (the largest
// offset sigma breaking ties).
func (ys *yieldSetup) worstSite() int {
	w, wp, wsd := 0, math.Inf(1), 0.0
	for i := range ys.y.Sites {
		p := ys.y.ClosedForm(i)
		sd := ys.y.Stats(i).SDAcross
		if p < wp || (p == wp && sd > wsd) {
			w, wp, wsd = i, p, sd
		}
	}
	return w
}

func (ys *yieldSetup) budgetRows(shares []registration.Share, total float64) []budgetRowJSON {
	var out []budgetRowJSON
	for _, s := range shares {
		term := "site_sigma"
		if s.Term >= 0 {
			term = s.Term.String()
		}
		out = append(out, budgetRowJSON{Contributor: ys.job.Model.Contributors[s.Contributor].Name, Term: term,
			Share: s.Variance / total, SDM: math.Sqrt(s.Variance)})
	}
	return out
}

func (ys *yieldSetup) summary(res *registration.MCResult, seed uint64) *yieldJSON {
	j, y := ys.job, ys.y
	sum := &yieldJSON{Job: j.File, Trials: res.Trials, Seed: seed, Sites: len(j.Sites), Parts: len(j.Instances),
		Warnings: ys.warnings}
	for i := range y.Sites {
		sum.SiteYieldMean += res.SiteYield(i) / float64(len(y.Sites))
		sum.SiteYieldMeanClosed += y.ClosedForm(i) / float64(len(y.Sites))
	}
	mean := res.MeanGoodParts()
	if len(j.Instances) > 0 {
		sum.PartYieldMean = mean / float64(len(j.Instances))
	}
	var v float64
	for k, c := range res.GoodParts {
		v += float64(c) * (float64(k) - mean) * (float64(k) - mean)
	}
	sum.GoodPartsPerPanel = goodPartsJSON{Mean: mean, SD: math.Sqrt(v / float64(res.Trials)),
		Min: res.GoodPartsQuantile(0), P05: res.GoodPartsQuantile(0.05), P50: res.GoodPartsQuantile(0.5),
		P95: res.GoodPartsQuantile(0.95), Max: res.GoodPartsQuantile(1)}

	// Worst parts by Monte Carlo part yield, then by name for a stable order.
	sitesOf := make([][]int, len(j.Instances))
	for i, s := range j.Sites {
		sitesOf[s.Instance] = append(sitesOf[s.Instance], i)
	}
	parts := make([]int, len(j.Instances))
	for i := range parts {
		parts[i] = i
	}
	sort.SliceStable(parts, func(a, b int) bool { return res.PartGood[parts[a]] < res.PartGood[parts[b]] })
	for _, p := range parts[:min(10, len(parts))] {
		wp := worstPartJSON{Name: j.Instances[p].Name, PartYield: res.PartYield(p), WorstSiteYield: 1}
		q := wp.PartYield
		wp.PartYieldSE = math.Sqrt(q * (1 - q) / float64(res.Trials))
		for _, i := range sitesOf[p] {
			if py := res.SiteYield(i); py <= wp.WorstSiteYield {
				wp.WorstSite, wp.WorstSiteYield = j.Sites[i].Name, py
			}
		}
		sum.WorstParts = append(sum.WorstParts, wp)
	}
	idx := make([]int, len(j.Sites))
	for i := range idx {
		idx[i] = i
	}
	pc := make([]float64, len(j.Sites))
	for i := range pc {
		pc[i] = y.ClosedForm(i)
	}
	sort.SliceStable(idx, func(a, b int) bool { return pc[idx[a]] < pc[idx[b]] })
	for _, i := range idx[:min(10, len(idx))] {
		p := y.Prob(i)
		st := y.Stats(i)
		sum.WorstSites = append(sum.WorstSites, worstSiteJSON{Name: j.Sites[i].Name, XM: j.Sites[i].Pos.X, YM: j.Sites[i].Pos.Y,
			PClosed: pc[i], PMC: res.SiteYield(i), PMCSE: res.SiteSE(i), OffsetM: p.Mean, OffsetSD: st.SDAcross})
	}
	for si, s := range j.Sections {
		if !ys.used[si] {
			continue
		}
		ysj := yieldSecJSON{Name: s.Name, NominalCoupling: ys.curves[si].Coupling(s.NominalOffset()),
			DesignOffsetM: s.NominalOffset(), DesignInSpec: !ys.outSpec[si]}
		if !ys.outSpec[si] {
			lo, hi := ys.allowed[si].Lo, ys.allowed[si].Hi
			ysj.AllowedLowM, ysj.AllowedHighM = &lo, &hi
			ysj.LowClipped, ysj.HighClipped = ys.limits[si].Clipped[0], ys.limits[si].Clipped[1]
		}
		for i, st := range j.Sites {
			if st.Section == s.Name {
				ysj.Sites++
				ysj.SiteYieldMean += res.SiteYield(i)
			}
		}
		ysj.SiteYieldMean /= float64(ysj.Sites)
		sum.Sections = append(sum.Sections, ysj)
	}
	w := ys.worstSite()
	shares := y.Budget(nil, w)
	sh := make([]registration.Share, len(shares))
	copy(sh, shares)
	registration.SortShares(sh)
	sd := y.Stats(w).SDAcross
	sum.Budget.WorstSite = j.Sites[w].Name
	sum.Budget.AtWorst = ys.budgetRows(sh, sd*sd)
	panelShares := y.PanelBudget()
	var tot float64
	for _, s := range panelShares {
		tot += s.Variance
	}
	sum.Budget.Panel = ys.budgetRows(panelShares, tot)
	sum.Orientation = ys.orientation()
	return sum
}

// orientation runs the quarter-turn study for every array.
func (ys *yieldSetup) orientation() []orientJSON {
	j := ys.job
	var out []orientJSON
	for ai, a := range j.Layout.Arrays {
		var sites []int
		for i, s := range j.Sites {
			if s.Array == ai {
				sites = append(sites, i)
			}
		}
		if len(sites) == 0 {
			continue
		}
		o := ys.y.Orient(sites)
		out = append(out, orientJSON{Array: ai + 1, Part: a.Part, Rotate: a.Rotate,
			MeanYield: o.AsPlaced.Mean, MeanYieldTurned: o.Turned.Mean,
			WorstYield: o.AsPlaced.Worst, WorstTurned: o.Turned.Worst,
			RMSOffsetM: o.AsPlaced.RMSAcross, RMSOffsetTurned: o.Turned.RMSAcross, TurnHelps: o.Better()})
	}
	return out
}

// verdict says what the orientation study recommends.
func (o orientJSON) verdict() string {
	switch {
	case o.TurnHelps:
		return "turn"
	case o.MeanYieldTurned-o.MeanYield > -registration.OrientMinGain:
		return "either"
	}
	return "keep"
}

func (ys *yieldSetup) writeCSV(w io.Writer, res *registration.MCResult, lu lengthUnit) error {
	cw := csv.NewWriter(w)
	pu, u := "["+lu.panel+"]", "["+lu.name+"]"
	if err := cw.Write([]string{"site", "name", "section", "part", "x " + pu, "y " + pu, "angle [deg]",
		"offset_mean " + u, "offset_sd " + u, "allowed_low " + u, "allowed_high " + u,
		"p_closed", "p_mc", "p_mc_se"}); err != nil {
		return err
	}
	g := func(v float64, prec int) string { return strconv.FormatFloat(v, 'f', prec, 64) }
	for i, s := range ys.job.Sites {
		p := ys.y.Prob(i)
		st := ys.y.Stats(i)
		iv := ys.y.Sites[i].Allowed
		lo, hi := "", ""
		if !iv.Empty() {
			lo, hi = g(iv.Lo/lu.factor, 4), g(iv.Hi/lu.factor, 4)
		}
		if err := cw.Write([]string{strconv.Itoa(i + 1), s.Name, s.Section, ys.job.Instances[s.Instance].Name,
			g(s.Pos.X/lu.pfac, 4), g(s.Pos.Y/lu.pfac, 4), g(s.Angle*180/math.Pi, 2),
			g(p.Mean/lu.factor, 4), g(st.SDAcross/lu.factor, 4), lo, hi,
			g(ys.y.ClosedForm(i), 6), g(res.SiteYield(i), 6), g(res.SiteSE(i), 6)}); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func (ys *yieldSetup) writeBudgetCSV(w io.Writer, sum *yieldJSON, lu lengthUnit) error {
	cw := csv.NewWriter(w)
	u := "[" + lu.name + "]"
	if err := cw.Write([]string{"scope", "rank", "contributor", "term", "share", "sd " + u}); err != nil {
		return err
	}
	for _, part := range []struct {
		scope string
		rows  []budgetRowJSON
	}{{"worst site: " + sum.Budget.WorstSite, sum.Budget.AtWorst}, {"panel", sum.Budget.Panel}} {
		for k, r := range part.rows {
			if err := cw.Write([]string{part.scope, strconv.Itoa(k + 1), r.Contributor, r.Term,
				strconv.FormatFloat(r.Share, 'f', 5, 64), strconv.FormatFloat(r.SDM/lu.factor, 'f', 4, 64)}); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}

func (ys *yieldSetup) printTable(w io.Writer, sum *yieldJSON, lu lengthUnit, paths []string) {
	j := ys.job
	fmt.Fprintf(w, "%s\n", j.Title)
	fmt.Fprintf(w, "%d panels (seed %d), %d sites, %d parts\n\n", sum.Trials, sum.Seed, sum.Sites, sum.Parts)
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "section\tsites\tdesign offset [%s]\tcoupling [dB]\tallowed offsets [%s]\tsite yield\n", lu.name, lu.name)
	for _, s := range sum.Sections {
		allowed := "none: design out of spec"
		if s.AllowedLowM != nil {
			allowed = fmt.Sprintf("%+.3f to %+.3f", *s.AllowedLowM/lu.factor, *s.AllowedHighM/lu.factor)
		}
		fmt.Fprintf(tw, "%s\t%d\t%+.3f\t%.3f\t%s\t%.4f %%\n", s.Name, s.Sites, s.DesignOffsetM/lu.factor, s.NominalCoupling, allowed, 100*s.SiteYieldMean)
	}
	tw.Flush()
	gp := sum.GoodPartsPerPanel
	fmt.Fprintf(w, "\nsite yield   %.4f %% (closed form %.4f %%)\n", 100*sum.SiteYieldMean, 100*sum.SiteYieldMeanClosed)
	fmt.Fprintf(w, "part yield   %.4f %%\n", 100*sum.PartYieldMean)
	fmt.Fprintf(w, "good parts per panel: expected %.2f of %d, 5th percentile %d, median %d, min %d\n\n", gp.Mean, sum.Parts, gp.P05, gp.P50, gp.Min)
	fmt.Fprintf(w, "worst parts:\n")
	tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  part\tpart yield\tworst site\tits yield\n")
	for _, p := range sum.WorstParts[:min(5, len(sum.WorstParts))] {
		fmt.Fprintf(tw, "  %s\t%.4f %%\t%s\t%.4f %%\n", p.Name, 100*p.PartYield, p.WorstSite, 100*p.WorstSiteYield)
	}
	tw.Flush()
	fmt.Fprintf(w, "\nerror budget (share of the across-offset variance):\n")
	tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  contributor\tterm\tpanel\tsd [%s]\tat %s\n", lu.name, sum.Budget.WorstSite)
	atWorst := map[string]float64{}
	for _, r := range sum.Budget.AtWorst {
		atWorst[r.Contributor+"\x00"+r.Term] = r.Share
	}
	for _, r := range sum.Budget.Panel[:min(8, len(sum.Budget.Panel))] {
		fmt.Fprintf(tw, "  %s\t%s\t%.1f %%\t%.3f\t%.1f %%\n", r.Contributor, r.Term, 100*r.Share, r.SDM/lu.factor, 100*atWorst[r.Contributor+"\x00"+r.Term])
	}
	tw.Flush()
	if len(sum.Orientation) > 0 {
		fmt.Fprintf(w, "\norientation (parts kept in place, lines turned 90 deg):\n")
		tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
		fmt.Fprintf(tw, "  array\tpart\tsite yield\tturned\trms offset [%s]\tturned\t\n", lu.name)
		for _, o := range sum.Orientation {
			fmt.Fprintf(tw, "  %d\t%s\t%.4f %%\t%.4f %%\t%.3f\t%.3f\t%s\n", o.Array, o.Part, 100*o.MeanYield, 100*o.MeanYieldTurned,
				o.RMSOffsetM/lu.factor, o.RMSOffsetTurned/lu.factor, o.verdict())
		}
		tw.Flush()
	}
	if len(paths) > 0 {
		fmt.Fprintf(w, "\nwrote %s\n", strings.Join(paths, ", "))
	}
}

// dominantSite returns a site of the most common (section, line direction)
// among sites (all sites when nil), half turns counting as one direction.
func (ys *yieldSetup) dominantSite(sites []int) int {
	if sites == nil {
		sites = make([]int, len(ys.job.Sites))
		for i := range sites {
			sites[i] = i
		}
	}
	type key struct {
		sec string
		deg int
	}
	count := map[key]int{}
	first := map[key]int{}
	for _, i := range sites {
		s := ys.job.Sites[i]
		k := key{s.Section, int(math.Round(s.Angle*180/math.Pi)) % 180}
		if _, ok := first[k]; !ok {
			first[k] = i
		}
		count[k]++
	}
	best, bn := 0, -1
	for k, n := range count {
		if n > bn || (n == bn && first[k] < best) {
			best, bn = first[k], n
		}
	}
	return best
}

// fieldKind is one section and line direction drawn in the yield field.
type fieldKind struct {
	sec *section.Section
	iv  registration.Interval
	rel *registration.Relative
	u   panel.Vec
}

// fieldZone is a region of the yield map: an array's extent, or the whole
// panel, with the coupler kinds whose lowest yield it shows.
type fieldZone struct {
	r     panel.Rect
	kinds []fieldKind
}

func (z fieldZone) bounds() panel.Rect { return z.r }

// zones returns a zone per array over the extent of its parts, holding every
// distinct (section, line direction) of its couplers (half turns count as
// one), then a zone for the rest of the panel with the job's most common kind.
func (ys *yieldSetup) zones() []fieldZone {
	j := ys.job
	kindOf := func(site int) fieldKind {
		st := j.Sites[site]
		si := ys.secIndex[st.Section]
		s := j.Sections[si]
		return fieldKind{sec: s, iv: ys.allowed[si], rel: j.Model.Relative(s.Traces[0].Layer, s.Traces[1].Layer), u: st.U}
	}
	type key struct {
		sec string
		deg int
	}
	var out []fieldZone
	for ai, ext := range j.ArrayExtents() {
		z := fieldZone{r: ext}
		seen := map[key]bool{}
		for i, st := range j.Sites {
			if st.Array != ai {
				continue
			}
			k := key{st.Section, int(math.Round(st.Angle*180/math.Pi)) % 180}
			if !seen[k] {
				seen[k] = true
				z.kinds = append(z.kinds, kindOf(i))
			}
		}
		if len(z.kinds) > 0 {
			out = append(out, z)
		}
	}
	return append(out, fieldZone{r: j.Layout.Panel.Outline(), kinds: []fieldKind{kindOf(ys.dominantSite(nil))}})
}

// drawYield draws the closed-form site yield field over the panel (over each
// array the lowest of its couplers' section and line direction), with 99 %
// and 95 % contours, part outlines and each site's Monte Carlo yield.
func (ys *yieldSetup) drawYield(w io.Writer, res *registration.MCResult, sum *yieldJSON, lu lengthUnit) error {
	j := ys.job
	zones := ys.zones()
	field := func(x, y float64) float64 {
		p := panel.Vec{X: x, Y: y}
		z := zoneAt(zones, p)
		v := 1.0
		for _, f := range z.kinds {
			row := f.rel.Row(p, f.u)
			v = math.Min(v, f.rel.Prob(&row, f.sec.NominalOffset()).Prob(f.iv))
		}
		return 100 * v
	}
	ur := toRect(j.Layout.Panel.Usable())
	ext := toRect(j.Layout.Panel.Outline())
	const width = 2400
	nx := width / 6
	ny := max(int(float64(nx)*ur.Dy()/ur.Dx()), 40)
	grid := render.NewGrid(ur, nx, ny, field)
	lo, _ := grid.Range()
	for i := range j.Sites {
		lo = math.Min(lo, 100*res.SiteYield(i))
	}
	hi := 100.0
	if hi-lo < 0.1 {
		lo = hi - 0.1
	}
	ru := render.Inch
	if lu.panel == "mm" {
		ru = render.Millimetre
	}
	gp := sum.GoodPartsPerPanel
	title := []string{
		j.Title,
		fmt.Sprintf("site yield: %d panels, seed %d; site yield %.3f %%, part yield %.3f %%, good parts per panel %.1f of %d (5th percentile %d)",
			sum.Trials, sum.Seed, 100*sum.SiteYieldMean, 100*sum.PartYieldMean, gp.Mean, sum.Parts, gp.P05),
		"field: closed-form site yield, over each array the lowest of its couplers' line directions; contours at 99.9, 99 and 95 %; bars: each site's Monte Carlo yield",
	}
	m := render.NewMap(render.MapSpec{Width: width, Extent: ext, Title: title, Unit: ru})
	v := m.Views[0]
	pal := render.Sequential
	v.FieldGrid(grid, pal, lo, hi)
	v.StrokeRect(ur, render.LineStyle{Color: render.Frame, Dash: []float64{6, 4}})
	v.StrokeRect(ext, render.LineStyle{Color: render.Ink, Width: 2})
	var parts []render.Rect
	for _, in := range j.Instances {
		if in.Array >= 0 {
			parts = append(parts, toRect(in.Bounds))
		}
	}
	v.StrokeRects(parts, render.LineStyle{Color: render.Frame})
	// Contours in ink or white, whichever stands out on the field at that
	// level; 99.9 % shows where a high-yield panel loses its last tenth.
	for _, c := range []struct {
		level float64
		dash  []float64
	}{{99.9, []float64{3, 3}}, {99, nil}, {95, []float64{8, 5}}} {
		var col color.Color = render.Ink
		if render.Luma(pal.Map(c.level, lo, hi)) < 0.45 {
			col = color.White
		}
		v.Contour(grid, c.level, render.LineStyle{Color: col, Width: 2.5, Dash: c.dash}, strconv.FormatFloat(c.level, 'f', -1, 64)+" %")
	}
	bars := make([]render.Bar, len(j.Sites))
	bl := barLen(j)
	for i, st := range j.Sites {
		bars[i] = render.Bar{At: render.Point{X: st.Pos.X, Y: st.Pos.Y}, Length: bl, Angle: st.Angle,
			Color: pal.Map(100*res.SiteYield(i), lo, hi)}
	}
	v.Bars(bars, render.BarStyle{})
	m.ColorBar(pal, lo, hi, "site yield [%]")
	return m.EncodePNG(w)
}

// barLen is the drawn length of a site bar: 60 % of the smallest array pitch,
// at most a fortieth of the panel's smaller side.
func barLen(j *Job) float64 {
	p := j.Layout.Panel.Size
	l := math.Min(p.X, p.Y) / 40
	for _, a := range j.Layout.Arrays {
		for _, d := range []float64{a.Pitch.X, a.Pitch.Y} {
			if d > 0 {
				l = math.Min(l, 0.6*d)
			}
		}
	}
	return l
}

// drawParts draws the histogram of good parts per panel with its mean and 5th
// percentile.
func drawParts(w io.Writer, res *registration.MCResult, sum *yieldJSON, j *Job) error {
	gp := sum.GoodPartsPerPanel
	h := render.Hist{Label: "panels"}
	for k := gp.Min; k <= gp.Max; k++ {
		h.Edges = append(h.Edges, float64(k)-0.5)
		h.Counts = append(h.Counts, float64(res.GoodParts[k]))
	}
	h.Edges = append(h.Edges, float64(gp.Max)+0.5)
	p := render.Plot{
		Title:  fmt.Sprintf("Good parts per panel: %d panels, %d parts per panel (%s)", sum.Trials, sum.Parts, j.Title),
		XLabel: "good parts per panel",
		Axes: []*render.Axes{{
			YLabel: "panels",
			Hists:  []render.Hist{h},
			VLines: []render.VLine{
				{X: gp.Mean, Label: fmt.Sprintf("mean %.1f", gp.Mean)},
				{X: float64(gp.P05), Label: fmt.Sprintf("5th percentile %d", gp.P05), Dash: []float64{3, 3}},
			},
		}},
	}
	if gp.Min == gp.Max {
		p.XMin, p.XMax = float64(gp.Min)-2, float64(gp.Max)+2
	}
	return p.Render(1600, 1000).EncodePNG(w)
}

// drawBudget draws the panel's error budget as horizontal bars, with the
// share at the worst site beside each.
func drawBudget(w io.Writer, sum *yieldJSON, lu lengthUnit) error {
	atWorst := map[string]float64{}
	for _, r := range sum.Budget.AtWorst {
		atWorst[r.Contributor+"\x00"+r.Term] = r.Share
	}
	b := render.BarChart{
		Title:  fmt.Sprintf("Error budget over the panel; in brackets: at the worst site, %s", sum.Budget.WorstSite),
		XLabel: "share of variance over the panel [%]",
	}
	for _, r := range sum.Budget.Panel[:min(12, len(sum.Budget.Panel))] {
		b.Labels = append(b.Labels, r.Contributor+": "+r.Term)
		b.Values = append(b.Values, 100*r.Share)
		b.Texts = append(b.Texts, fmt.Sprintf("%.1f %% (%.1f %%)", 100*r.Share, 100*atWorst[r.Contributor+"\x00"+r.Term]))
	}
	return b.Render(2000, 0).EncodePNG(w)
}

// progress draws a bar on stderr when it is a terminal and the run has taken
// over a second.
type progress struct {
	std         stdio
	what, units string
	start       time.Time
	shown       bool
	last        time.Time
}

func newProgress(std stdio, what, units string) *progress {
	return &progress{std: std, what: what, units: units, start: time.Now()}
}

func (p *progress) update(done, total int) {
	if !p.std.tty {
		return
	}
	now := time.Now()
	if now.Sub(p.start) < time.Second || (p.shown && now.Sub(p.last) < 100*time.Millisecond && done < total) {
		return
	}
	p.shown, p.last = true, now
	const width = 30
	n := width * done / total
	fmt.Fprintf(p.std.err, "\r%s [%s%s] %3d%% %d/%d %s", p.what, strings.Repeat("#", n), strings.Repeat(".", width-n),
		100*done/total, done, total, p.units)
}

func (p *progress) finish() {
	if p.shown {
		fmt.Fprintln(p.std.err)
	}
}
