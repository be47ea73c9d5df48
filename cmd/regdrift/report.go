package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
	"github.com/regdrift/regdrift/render/figure"
	rep "github.com/regdrift/regdrift/render/report"
)

type reportFlags struct {
	outputFlags
	targets string
	trials  int
	seed    uint64
	width   int
	solver  solverFlags
}

// flags declares the command's flags on fs.
func (f *reportFlags) flags(fs *pflag.FlagSet) {
	f.outputFlags.add(fs)
	fs.StringVar(&f.targets, "targets", "", "measurement file (CSV): add the fit of its targets and the compensation it recommends")
	addTrials(fs, &f.trials, "number of panels drawn in the Monte Carlo yield")
	fs.Uint64Var(&f.seed, "seed", 1, "seed of the Monte Carlo's random streams")
	fs.IntVar(&f.width, "width", 1600, "width of the report's panel maps in pixels")
	f.solver.add(fs)
}

// reportWidthMax bounds --width: a panel map's PNG grows with its area,
// and a report of a 10,000-site panel must stay small enough to send.
const reportWidthMax = 3000

func (f *reportFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("report takes one job file")
	}
	if f.trials <= 0 {
		return usageErr("--trials: want a positive number of panels, not %d", f.trials)
	}
	if f.width < 300 || f.width > reportWidthMax {
		return usageErr("--width: want 300 to %d pixels, not %d", reportWidthMax, f.width)
	}
	if f.targets == "-" && args[0] == "-" {
		return usageErr("the job and --targets cannot both be standard input")
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	set, err := f.solver.settings(std)
	if err != nil {
		return err
	}
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	r := &reportRun{std: progressStd(std, f.json), job: j, lu: lu, set: set, trials: f.trials, seed: f.seed, width: f.width,
		targets: f.targets, date: time.Now().UTC()}
	paths, err := r.write(ctx, f.out)
	if err != nil {
		return err
	}
	return report(std, f.json, r.sum, func() { printReport(std.out, r.sum, paths) })
}

// write builds the report and writes report.html into dir.
func (r *reportRun) write(ctx context.Context, dir string) ([]string, error) {
	doc, err := r.build(ctx)
	if err != nil {
		return nil, err
	}
	return writeAll(dir, outFile{"report.html", doc.Write})
}

// demoReport writes the report of the demo job at path (with the targets
// file, if not "") into out, and says so.
func demoReport(ctx context.Context, std stdio, path, targets, out string, set *drift.Settings, width int) error {
	j, err := loadJob(path, nil)
	if err != nil {
		return err
	}
	lu, _ := parseUnits("mil")
	r := &reportRun{std: std, job: j, lu: lu, set: set, trials: demoTrials, seed: 1, width: min(max(width, 300), reportWidthMax),
		targets: targets, date: time.Now().UTC()}
	paths, err := r.write(ctx, out)
	if err != nil {
		return err
	}
	fmt.Fprintf(std.out, "  report %s\n", paths[0])
	return nil
}

// reportRun is one report being built: the job, the options, and the
// library results every section reads.
type reportRun struct {
	std     stdio
	job     *Job
	lu      lengthUnit
	set     *drift.Settings
	trials  int
	seed    uint64
	width   int
	targets string
	date    time.Time

	a      *drift.Analysis
	mapSum *drift.MapSummary
	mc     *registration.MCResult
	yield  *drift.YieldSummary
	tol    *drift.TolSummary
	fit    *fitRun
	cmp    *drift.Comparison
	cmpSum *drift.CompSummary
	sum    *reportSummary
}

// reportSummary is what report prints (the JSON form with --json); the
// headline of report.html shows the same numbers.
type reportSummary struct {
	Title   string `json:"title"`
	Job     string `json:"job"`
	Date    string `json:"date"`
	Version string `json:"version"` // with the module version and VCS revision the binary was built from
	// Accuracy is the solver's target relative error in C.
	Accuracy float64 `json:"solver_accuracy"`
	Sites    int     `json:"sites"`
	InSpec   int     `json:"in_spec"`
	InSpecAt string  `json:"in_spec_at"` // what InSpec judges a site at (drift.MapSummary.InSpecAt)
	// ExpectedInSpec is the sum over sites of P(in spec), the map's headline.
	ExpectedInSpec float64 `json:"expected_in_spec"`
	Parts          int     `json:"parts_per_panel"`
	// GoodParts is the Monte Carlo's expected number of parts in spec per panel.
	GoodParts     float64 `json:"good_parts_per_panel"`
	PartYield     float64 `json:"part_yield_mean"`
	SiteYield     float64 `json:"site_yield_mean"`
	Trials        int     `json:"trials"`
	Seed          uint64  `json:"seed"`
	WorstSection  string  `json:"worst_section"`
	WorstSecYield float64 `json:"worst_section_site_yield"`
	WorstSite     string  `json:"worst_site"`
	WorstMarginDB float64 `json:"worst_site_margin_db"`
	// WorstSiteP is the worst site's probability of being in spec: the map
	// ranks sites by it.
	WorstSiteP float64 `json:"worst_site_p_in_spec"`
	Sections   int     `json:"report_sections"`
}

// reportSections are the report's sections in the order a reader asks;
// each returns false when it has nothing to show for this job. A new
// section of the report is one more function here.
var reportSections = []func(*reportRun) (rep.Section, bool, error){
	(*reportRun).summarySection,
	(*reportRun).curveSection,
	(*reportRun).mapSection,
	(*reportRun).yieldSection,
	(*reportRun).budgetSection,
	(*reportRun).tolSection,
	(*reportRun).fitSection,
	(*reportRun).compSection,
	(*reportRun).assumptionSection,
	(*reportRun).jobSection,
}

// build runs the analyses (the library's, as the commands do) and lays out
// the document.
func (r *reportRun) build(ctx context.Context) (*rep.Document, error) {
	j := r.job
	in := input(j)
	var a *drift.Analysis
	err := step(r.std, "field solves", func() (err error) {
		a, err = drift.Analyse(ctx, in, r.set)
		return err
	})
	if err != nil {
		return nil, solveErr(j, err)
	}
	r.a = a
	for _, w := range a.Warnings() {
		fmt.Fprintf(r.std.err, "regdrift report: warning: %s\n", w)
	}
	r.mapSum = a.Summary(10)
	pb := newProgress(r.std, "Monte Carlo", "panels")
	r.mc, err = a.Yield.MonteCarlo(ctx, registration.MCSettings{Trials: r.trials, Seed: r.seed, Progress: pb.update})
	pb.finish()
	if err != nil {
		return nil, err
	}
	r.yield = a.YieldSummary(r.mc, r.seed)
	if err = step(r.std, "tolerance search", func() (err error) {
		r.tol, err = drift.Tol(ctx, in, drift.TolStudy{}, r.set)
		return err
	}); err != nil {
		return nil, solveErr(j, err)
	}
	if r.targets != "" {
		if err := r.compensate(ctx); err != nil {
			return nil, err
		}
	}
	r.sum = r.summary()
	doc := &rep.Document{
		Title:     j.Title,
		Subtitle:  fmt.Sprintf("%s — %s — %s", j.File, r.date.Format("2006-01-02 15:04 UTC"), versionString()),
		Generator: versionString(),
	}
	if strings.TrimSpace(doc.Title) == "" {
		doc.Title = j.File
	}
	for _, f := range reportSections {
		s, ok, err := f(r)
		if err != nil {
			return nil, err
		}
		if ok {
			doc.Sections = append(doc.Sections, s)
		}
	}
	r.sum.Sections = len(doc.Sections)
	return doc, nil
}

// compensate fits the measurement file and recommends compensation, as
// comp --targets does with its default settings.
func (r *reportRun) compensate(ctx context.Context) error {
	j := r.job
	fset := registration.FitSettings{Model: registration.Affine, Robust: registration.Tukey, Datum: j.Layout.Panel.Datum}
	fr, err := runFitFile(r.targets, r.std.in, fset, 5)
	if err != nil {
		return err
	}
	r.fit = fr
	lots, fitted := measuredLots(r.std, "report", j, fr)
	model, notes := drift.MeasuredModel(j.Model, fr.Fits, lots, fr.File, false)
	cs := registration.CompSettings{Max: 1000e-6}
	cmp, err := drift.Compensate(ctx, input(j), model, &cs, r.set)
	var ce *drift.CompError
	switch {
	case errors.As(err, &ce):
		return badInput(fmt.Errorf("%s: %w", j.File, err))
	case err != nil:
		return solveErr(j, err)
	}
	r.cmp = cmp
	r.cmpSum = cmp.Summary(fitted, append(notes, cmp.Notes...))
	return nil
}

func (r *reportRun) summary() *reportSummary {
	s := &reportSummary{Title: r.job.Title, Job: r.job.File, Date: r.date.Format(time.RFC3339), Version: versionString(),
		Accuracy: r.set.Accuracy, Sites: r.mapSum.Sites, InSpec: r.mapSum.InSpec, InSpecAt: r.mapSum.InSpecAt, Parts: r.yield.Parts,
		GoodParts: r.yield.GoodPartsPerPanel.Mean, PartYield: r.yield.PartYieldMean, SiteYield: r.yield.SiteYieldMean,
		Trials: r.yield.Trials, Seed: r.yield.Seed}
	if s.Accuracy == 0 {
		s.Accuracy = section.DefaultAccuracy
	}
	s.WorstSecYield = math.Inf(1)
	for _, ys := range r.yield.Sections {
		if ys.Sites > 0 && ys.SiteYieldMean < s.WorstSecYield {
			s.WorstSection, s.WorstSecYield = ys.Name, ys.SiteYieldMean
		}
	}
	if len(r.mapSum.Worst) > 0 {
		s.WorstSite, s.WorstMarginDB, s.WorstSiteP = r.mapSum.Worst[0].Name, r.mapSum.Worst[0].MarginDB, r.mapSum.Worst[0].PInSpec
	}
	s.ExpectedInSpec = r.mapSum.ExpectedInSpec
	return s
}

func printReport(w io.Writer, s *reportSummary, paths []string) {
	fmt.Fprintf(w, "%s\n", s.Title)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "expected sites in spec\t%.1f of %d (%s)\n", s.ExpectedInSpec, s.Sites, (&drift.MapSummary{InSpec: s.InSpec, InSpecAt: s.InSpecAt}).InSpecPhrase())
	fmt.Fprintf(tw, "good parts per panel\t%.2f of %d (%d panels, seed %d)\n", s.GoodParts, s.Parts, s.Trials, s.Seed)
	fmt.Fprintf(tw, "worst section\t%s (site yield %.4f %%)\n", s.WorstSection, 100*s.WorstSecYield)
	fmt.Fprintf(tw, "least likely site\t%s (P(in spec) %.4f, margin %.4f dB)\n", s.WorstSite, s.WorstSiteP, s.WorstMarginDB)
	tw.Flush()
	for _, p := range paths {
		fmt.Fprintf(w, "wrote %s\n", p)
	}
}

// png draws a figure into memory.
func png(draw func(io.Writer) error) ([]byte, error) {
	var b bytes.Buffer
	err := draw(&b)
	return b.Bytes(), err
}

// pct formats a fraction as a percentage with d decimals.
func pct(v float64, d int) string { return strconv.FormatFloat(100*v, 'f', d, 64) }

func fixed(v float64, d int) string { return strconv.FormatFloat(v, 'f', d, 64) }

func (r *reportRun) summarySection() (rep.Section, bool, error) {
	s := r.sum
	items := []rep.Item{
		{Label: "date", Value: r.date.Format("2006-01-02 15:04"), Unit: "UTC", Key: "date"},
		{Label: "regdrift version", Value: s.Version, Key: "version"},
		{Label: "solver accuracy (target error in C)", Value: fixed(100*s.Accuracy, 3), Unit: "%", Key: "solver_accuracy"},
		{Label: "expected parts in spec per panel", Value: fixed(s.GoodParts, 2), Unit: "of " + strconv.Itoa(s.Parts) + " parts",
			Note: fmt.Sprintf("part yield %s %%, Monte Carlo of %d panels", pct(s.PartYield, 3), s.Trials), Key: "good_parts_per_panel"},
		{Label: "expected sites in spec", Value: fixed(s.ExpectedInSpec, 1), Unit: "of " + strconv.Itoa(s.Sites) + " sites",
			Note: "the sum of each site's probability of being in spec", Key: "expected_in_spec"},
		{Label: "sites in spec (mean offset)", Value: strconv.Itoa(s.InSpec), Unit: "of " + strconv.Itoa(s.Sites) + " sites", Key: "in_spec"},
		{Label: "worst section", Value: s.WorstSection, Note: "site yield " + pct(s.WorstSecYield, 3) + " %", Key: "worst_section"},
		{Label: "least likely site", Value: s.WorstSite, Note: "P(in spec) " + fixed(s.WorstSiteP, 4) + ", margin " + fixed(s.WorstMarginDB, 4) + " dB", Key: "worst_site"},
	}
	cols := []rep.Column{{Label: "section"}, {Label: "sites", Unit: "sites", Numeric: true}, {Label: "in spec", Unit: "sites", Numeric: true},
		{Label: "design coupling", Unit: "dB", Numeric: true}, {Label: "spec", Unit: "dB", Numeric: true}, {Label: "mean site yield", Unit: "%", Numeric: true}}
	var rows [][]string
	for i, ss := range r.mapSum.Sections {
		y := ""
		if i < len(r.yield.Sections) {
			y = pct(r.yield.Sections[i].SiteYieldMean, 4)
		}
		rows = append(rows, []string{ss.Name, strconv.Itoa(ss.Sites), strconv.Itoa(ss.InSpec), fixed(ss.NominalCoupling, 3),
			fixed(ss.SpecCouplingDB, 2) + " ± " + fixed(ss.SpecToleranceDB, 2), y})
	}
	return rep.Section{ID: "summary", Title: "Summary", Blocks: []rep.Block{
		&rep.Headline{Items: items},
		&rep.Table{Caption: "Sections", Columns: cols, Rows: rows, RowHeaders: true},
	}}, true, nil
}

// curveSection plots coupling against offset for each section a site uses,
// with its spec band (the picture sweep draws).
func (r *reportRun) curveSection() (rep.Section, bool, error) {
	u := r.lu.units()
	var blocks []rep.Block
	for i, c := range r.a.Curves {
		if c == nil {
			continue
		}
		s := r.job.Sections[i]
		b, err := png(func(w io.Writer) error { return figure.Sweep(w, s, c.Curve, u) })
		if err != nil {
			return rep.Section{}, false, err
		}
		lo, hi := c.Curve.Range()
		blocks = append(blocks, rep.Subheading("Section "+s.Name), &rep.Figure{PNG: b,
			Alt: fmt.Sprintf("Coupling, directivity and impedances of section %s against the lateral offset from %s to %s %s, with the spec band %s ± %s dB",
				s.Name, fixed(lo/r.lu.factor, 2), fixed(hi/r.lu.factor, 2), r.lu.name, fixed(s.Spec.Coupling, 2), fixed(s.Spec.Tolerance, 2)),
			Caption: fmt.Sprintf("Section %s: coupling against %s, design offset included; the band is the spec, %s ± %s dB; coupling at the design offset %s dB.",
				s.Name, map[bool]string{false: "the offset of the upper trace across the lines", true: "the centre-to-centre spacing of its two traces on " + s.Traces[0].Layer}[drift.OffsetKind(s) == "spacing"],
				fixed(s.Spec.Coupling, 2), fixed(s.Spec.Tolerance, 2), fixed(c.Nominal, 3))})
	}
	return rep.Section{ID: "coupling", Title: "Coupling against offset", Blocks: blocks}, len(blocks) > 0, nil
}

// siteFields are the values the panel map's look-up shows for a site, read
// from the rows of sites.csv (so that they read exactly as there) and the
// closed-form probability of being in spec.
func (r *reportRun) siteFields() []rep.Field {
	return []rep.Field{
		{Label: "section"},
		{Label: "position x, y", Unit: r.lu.panel},
		{Label: "offset ± σ", Unit: r.lu.name},
		{Label: "coupling", Unit: "dB"},
		{Label: "drift", Unit: "dB"},
		{Label: "margin", Unit: "dB"},
		{Label: "in spec (mean offset)"},
		{Label: "probability in spec", Unit: "%"},
	}
}

// sitesTable returns the rows of sites.csv as the map command writes them.
func (r *reportRun) sitesTable() ([]string, [][]string, error) {
	var b bytes.Buffer
	if err := r.a.WriteSitesCSV(&b, r.lu.units()); err != nil {
		return nil, nil, err
	}
	rows, err := csv.NewReader(&b).ReadAll()
	if err != nil || len(rows) == 0 {
		return nil, nil, fmt.Errorf("sites.csv: %v", err)
	}
	return rows[0], rows[1:], nil
}

func (r *reportRun) mapSection() (rep.Section, bool, error) {
	header, rows, err := r.sitesTable()
	if err != nil {
		return rep.Section{}, false, err
	}
	col := map[string]int{}
	for i, h := range header {
		col[h] = i
	}
	L, P := "["+r.lu.name+"]", "["+r.lu.panel+"]"
	cell := func(row []string, name string) string { return row[col[name]] }
	var b bytes.Buffer
	v, err := figure.MapView(&b, r.a, r.mapSum, figure.MapOptions{Width: r.width, Units: r.lu.units()})
	if err != nil {
		return rep.Section{}, false, err
	}
	// What the map draws: the drift for one section; with several, whose
	// drifts do not compare, the window share or the probability in spec
	// (figure.DefaultShow).
	what := map[string][2]string{
		"drift":  {"the coupling drift at the mean offset", "Coupling drift at each site's mean offset"},
		"window": {"the share of its section's allowed offsets that mean ± 3σ reaches", "The share of its section's allowed offsets that each site's mean offset ± 3σ reaches (1 at the window's edge)"},
		"p":      {"the probability of being in spec, every source counted", "Each site's probability of being in spec, registration and process together"},
	}[figure.DefaultShow(r.a)]
	pm := &rep.PanelMap{PNG: b.Bytes(), Transform: rep.ViewTransform(v), Fields: r.siteFields(),
		Alt: fmt.Sprintf("Panel map of %s of each of %d sites, with the ten sites least likely to be in spec ringed and numbered", what[0], len(rows)),
		Caption: what[1] + " (the field: over each array its most common coupler direction); each site is a bar along its lines; " +
			"the ten sites least likely to be in spec are ringed and numbered as in the table below. Point at a site to see its values, click to mark it, or find it by name."}
	for k, row := range rows {
		s := &r.a.Sites[k]
		pm.Sites = append(pm.Sites, rep.Site{Name: cell(row, "site"), At: render.Point{X: s.Site.Pos.X, Y: s.Site.Pos.Y}, Values: []string{
			cell(row, "section"),
			cell(row, "x "+P) + ", " + cell(row, "y "+P),
			cell(row, "offset_across "+L) + " ± " + cell(row, "sigma_across "+L),
			cell(row, "coupling [dB]"), cell(row, "drift [dB]"), cell(row, "margin [dB]"),
			map[string]string{"true": "yes", "false": "no"}[cell(row, "in_spec")],
			pct(s.PInSpec, 4),
		}})
	}
	cols := []rep.Column{{Label: "rank", Unit: "#", Numeric: true}, {Label: "site"}, {Label: "section"},
		{Label: "x", Unit: r.lu.panel, Numeric: true}, {Label: "y", Unit: r.lu.panel, Numeric: true},
		{Label: "offset", Unit: r.lu.name, Numeric: true}, {Label: "σ", Unit: r.lu.name, Numeric: true},
		{Label: "coupling", Unit: "dB", Numeric: true}, {Label: "drift", Unit: "dB", Numeric: true}, {Label: "margin", Unit: "dB", Numeric: true},
		{Label: "probability in spec", Unit: "%", Numeric: true}}
	index := map[string]int{}
	for k := range r.a.Sites {
		index[r.a.Sites[k].Site.Name] = k
	}
	var worst [][]string
	for _, ws := range r.mapSum.Worst {
		k := index[ws.Name]
		row := rows[k]
		worst = append(worst, []string{strconv.Itoa(ws.Rank), ws.Name, ws.Section, cell(row, "x "+P), cell(row, "y "+P),
			cell(row, "offset_across "+L), cell(row, "sigma_across "+L), cell(row, "coupling [dB]"), cell(row, "drift [dB]"),
			cell(row, "margin [dB]"), pct(r.a.Sites[k].PInSpec, 4)})
	}
	return rep.Section{ID: "panel-map", Title: "Panel map", Blocks: []rep.Block{pm,
		&rep.Table{Caption: "The ten sites least likely to be in spec (numbered on the map)", Columns: cols, Rows: worst},
		rep.Paragraph(fmt.Sprintf("Offsets are the mean offset of the upper trace across the lines (for an edge-coupled pair its spacing), design offset included, ± one standard deviation; expected in spec %.1f of %d sites (%s).", r.mapSum.ExpectedInSpec, r.mapSum.Sites, r.mapSum.InSpecPhrase())),
	}}, true, nil
}

func (r *reportRun) yieldSection() (rep.Section, bool, error) {
	u := r.lu.units()
	y := r.yield
	ymap, err := png(func(w io.Writer) error { return figure.Yield(w, r.a, r.mc, y, u) })
	if err != nil {
		return rep.Section{}, false, err
	}
	parts, err := png(func(w io.Writer) error { return figure.Parts(w, r.mc, y, r.job.Title) })
	if err != nil {
		return rep.Section{}, false, err
	}
	gp := y.GoodPartsPerPanel
	cols := []rep.Column{{Label: "part"}, {Label: "part yield", Unit: "%", Numeric: true}, {Label: "± (1 s.e.)", Unit: "%", Numeric: true},
		{Label: "worst site"}, {Label: "its yield", Unit: "%", Numeric: true}}
	var rows [][]string
	for _, p := range y.WorstParts[:min(10, len(y.WorstParts))] {
		rows = append(rows, []string{p.Name, pct(p.PartYield, 3), pct(p.PartYieldSE, 3), p.WorstSite, pct(p.WorstSiteYield, 3)})
	}
	return rep.Section{ID: "yield", Title: "Yield", Blocks: []rep.Block{
		rep.Paragraph(fmt.Sprintf("Monte Carlo of %d panels (seed %d): site yield %s %% (closed form %s %%), part yield %s %%; good parts per panel: expected %s of %d, 5th percentile %d, median %d, fewest %d.",
			y.Trials, y.Seed, pct(y.SiteYieldMean, 4), pct(y.SiteYieldMeanClosed, 4), pct(y.PartYieldMean, 4), fixed(gp.Mean, 2), y.Parts, gp.P05, gp.P50, gp.Min)),
		&rep.Figure{PNG: ymap, Alt: "Panel map of each site's probability of being in spec", Caption: yieldMapCaption(r.a)},
		&rep.Figure{PNG: parts, Alt: "Histogram of the number of good parts per panel over the Monte Carlo trials, and the parts of lowest yield", Caption: "Good parts per panel over the trials."},
		&rep.Table{Caption: "Parts of lowest yield", Columns: cols, Rows: rows, RowHeaders: true},
	}}, true, nil
}

func (r *reportRun) budgetSection() (rep.Section, bool, error) {
	y := r.yield
	b, err := png(func(w io.Writer) error { return figure.Budget(w, y) })
	if err != nil {
		return rep.Section{}, false, err
	}
	at := map[string]float64{}
	for _, row := range y.Budget.AtWorst {
		at[row.Contributor+"\x00"+row.Term] = row.Share
	}
	cols := []rep.Column{{Label: "contributor"}, {Label: "term"}, {Label: "share over the panel", Unit: "%", Numeric: true},
		{Label: "σ", Unit: r.lu.name, Numeric: true}, {Label: "share at " + y.Budget.WorstSite, Unit: "%", Numeric: true}}
	var rows [][]string
	for _, row := range y.Budget.Panel {
		rows = append(rows, []string{row.Contributor, row.Term, pct(row.Share, 1), fixed(row.SDM/r.lu.factor, 3), pct(at[row.Contributor+"\x00"+row.Term], 1)})
	}
	blocks := []rep.Block{
		&rep.Figure{PNG: b, Alt: "Bar chart of each contributor term's share of the variance of the offset across the lines", Caption: "Share of the across-offset variance by contributor and term, over the panel and at the worst site (" + y.Budget.WorstSite + ")."},
		&rep.Table{Caption: "Error budget of the offset", Columns: cols, Rows: rows},
	}
	if cb := y.CouplingBudget; cb != nil && len(cb.Panel) > 0 {
		// With process terms the figure is the coupling budget (figure.Budget),
		// registration and variation terms together; the offset's table
		// follows it.
		blocks[0] = &rep.Figure{PNG: b, Alt: "Bar chart of each registration and variation term's share of the coupling variance",
			Caption: "Share of the coupling variance by term, registration and variation together, over the panel and at the worst site (" + cb.WorstSite + ")."}
		at := map[string]float64{}
		for _, c := range cb.AtWorst {
			at[c.Source+"\x00"+c.Name] = c.Share
		}
		var crows [][]string
		for _, c := range cb.Panel {
			crows = append(crows, []string{c.Source, c.Name, pct(c.Share, 1), fixed(c.SDDB, 4), pct(at[c.Source+"\x00"+c.Name], 1)})
		}
		ccols := []rep.Column{{Label: "source"}, {Label: "term"}, {Label: "share over the panel", Unit: "%", Numeric: true},
			{Label: "σ", Unit: "dB", Numeric: true}, {Label: "share at " + cb.WorstSite, Unit: "%", Numeric: true}}
		blocks = []rep.Block{blocks[0], &rep.Table{Caption: "Coupling budget", Columns: ccols, Rows: crows}, blocks[1]}
	}
	return rep.Section{ID: "budget", Title: "Error budget", Blocks: blocks}, true, nil
}

// yieldMapCaption says what the yield map's field is: the probability of
// being in spec, of the offset alone or with the process terms.
func yieldMapCaption(a *drift.Analysis) string {
	if a.In.Process.Empty() {
		return "Probability that each site's offset lies in its allowed interval (closed form)."
	}
	return "Probability that each site is in spec, registration and the variation terms together (closed form)."
}

func (r *reportRun) tolSection() (rep.Section, bool, error) {
	t := r.tol
	b, err := png(func(w io.Writer) error { return figure.Tol(w, t, r.lu.units()) })
	if err != nil {
		return rep.Section{}, false, err
	}
	L := r.lu.name
	cols := []rep.Column{{Label: "section"}, {Label: "design offset", Unit: L, Numeric: true}, {Label: "coupling there", Unit: "dB", Numeric: true},
		{Label: "spec", Unit: "dB", Numeric: true}, {Label: "low limit at", Unit: L, Numeric: true}, {Label: "high limit at", Unit: L, Numeric: true},
		{Label: "drawing tolerance", Unit: L, Numeric: true}}
	opt := func(p *float64) string {
		if p == nil {
			return "none"
		}
		return fixed(*p/r.lu.factor, 3)
	}
	var rows [][]string
	for _, s := range t.Sections {
		rows = append(rows, []string{s.Name, fixed(s.DesignOffsetM/r.lu.factor, 3), fixed(s.CouplingDB, 3),
			fixed(s.SpecCouplingDB, 2) + " ± " + fixed(s.SpecTolDB, 2), opt(s.OffsetLowM), opt(s.OffsetHighM), "± " + fixed(s.ToleranceM/r.lu.factor, 3)})
	}
	blocks := []rep.Block{
		&rep.Figure{PNG: b, Alt: "Coupling against offset for each section with the spec band and the offsets where the coupling meets the spec limits", Caption: "The offsets at which each section's coupling meets the spec limits; the drawing tolerance is the smaller of the two distances from the design offset."},
		&rep.Table{Caption: "Offset tolerance for the fabrication drawing", Columns: cols, Rows: rows, RowHeaders: true},
	}
	return rep.Section{ID: "tolerance", Title: "Drawing tolerance", Blocks: blocks}, true, nil
}

// termShown converts term k's SI value to the unit tables show it in
// (k.Unit): the output length unit, µrad or ppm.
func (r *reportRun) termShown(k registration.TermKind, v float64) float64 {
	if k.Info().Kind == unit.Length {
		return v / r.lu.factor
	}
	return v / 1e-6 // µrad and ppm
}

func (r *reportRun) fitSection() (rep.Section, bool, error) {
	if r.fit == nil {
		return rep.Section{}, false, nil
	}
	fr := r.fit
	b, err := png(func(w io.Writer) error {
		return figure.Fit(w, fr.File, fr.Settings, fr.Fits, fr.Lots, r.job.Layout.Panel.Size, r.width, r.lu.units())
	})
	if err != nil {
		return rep.Section{}, false, err
	}
	cols := []rep.Column{{Label: "layer"}, {Label: "panels", Unit: "panels", Numeric: true}}
	for k := range registration.NumTerms {
		t := registration.TermKind(k)
		cols = append(cols, rep.Column{Label: t.String() + " mean ± sd", Unit: t.Unit(r.lu.units()), Numeric: true})
	}
	var rows [][]string
	for _, l := range fr.Lots {
		row := []string{l.Layer, strconv.Itoa(l.Panels)}
		for k := range registration.NumTerms {
			t := registration.TermKind(k)
			row = append(row, fixed(r.termShown(t, l.Mean[k]), 3)+" ± "+fixed(r.termShown(t, l.SD[k]), 3))
		}
		rows = append(rows, row)
	}
	return rep.Section{ID: "fit", Title: "Fit of the measured targets", Blocks: []rep.Block{
		rep.Paragraph(fmt.Sprintf("%s: %d fits (panel and layer), %s model, robust weights; each layer's lot mean and standard deviation over the panels.", fr.File, len(fr.Fits), fr.Settings.Model)),
		&rep.Figure{PNG: b, Alt: "Measured displacement and fit residuals of the registration targets per layer", Caption: "Measured target displacements and the residuals of the fit, per layer."},
		&rep.Table{Caption: "Layer movement over the lot", Columns: cols, Rows: rows, RowHeaders: true},
	}}, true, nil
}

func (r *reportRun) compSection() (rep.Section, bool, error) {
	if r.cmp == nil {
		return rep.Section{}, false, nil
	}
	s := r.cmpSum
	b, err := png(func(w io.Writer) error { return figure.Comp(w, r.cmp, s, r.width, r.lu.units()) })
	if err != nil {
		return rep.Section{}, false, err
	}
	cols := []rep.Column{{Label: "layer"}, {Label: "scale x", Unit: "ppm", Numeric: true}, {Label: "scale y", Unit: "ppm", Numeric: true},
		{Label: "artwork factor x", Unit: "1", Numeric: true}, {Label: "artwork factor y", Unit: "1", Numeric: true}}
	var rows [][]string
	for _, l := range s.Layers {
		rows = append(rows, []string{l.Layer, fixed(l.ScaleXPPM, 1), fixed(l.ScaleYPPM, 1), fixed(l.FactorX, 6), fixed(l.FactorY, 6)})
	}
	L := r.lu.name
	state := []rep.Column{{Label: "panel"}, {Label: "worst offset", Unit: L, Numeric: true}, {Label: "rms offset", Unit: L, Numeric: true},
		{Label: "sites in spec", Unit: "sites", Numeric: true}, {Label: "mean site yield", Unit: "%", Numeric: true}}
	st := func(name string, c drift.CompState) []string {
		return []string{name, fixed(c.WorstOffsetM/r.lu.factor, 3), fixed(c.RMSOffsetM/r.lu.factor, 3), strconv.Itoa(c.InSpec) + " of " + strconv.Itoa(c.Sites), pct(c.SiteYield, 4)}
	}
	blocks := []rep.Block{
		rep.Paragraph(fmt.Sprintf("Artwork scale compensation; objective: %s; the common part: %s.", objectiveText(s.Objective), s.Common)),
		&rep.Figure{PNG: b, Alt: "Panel maps of the offsets before and after the recommended compensation", Caption: "Offsets across the lines before (left) and after (right) compensation."},
		&rep.Table{Caption: "Recommended compensation per layer", Columns: cols, Rows: rows, RowHeaders: true},
		&rep.Table{Caption: "Before and after", Columns: state, Rows: [][]string{st("before", s.Before), st("after", s.After)}, RowHeaders: true},
	}
	if len(s.Notes) > 0 {
		blocks = append(blocks, rep.List(s.Notes))
	}
	return rep.Section{ID: "compensation", Title: "Compensation", Blocks: blocks}, true, nil
}

// reportAssumptions and reportCautions are the README's (a test keeps them
// the same).
var reportAssumptions = []string{
	"Quasi-static (TEM-like) fields, lossless lines, smooth copper, ideal infinite ground planes for stripline, vertical stacks of flat homogeneous dielectrics, traces as trapezoids standing on the core face they were etched on with the rest of their copper slab filled by the neighbouring prepreg's resin.",
	"Error terms are independent between contributors; layers measured together on the same panels are carried as weighted components of their joint movement.",
}

var reportCautions = []string{
	"Results are engineering estimates from an idealised quasi-static model and an assumed error budget.",
	"They do not replace coupon measurements, the fabricator's qualified process capability data, the applicable standards (IPC-6012, IPC-6018, IPC-A-600 and the like) or the customer's drawing — defer to those.",
	"No acceptance standard sets a broadside trace-to-trace limit: it is agreed between user and supplier and put on the drawing.",
	"Couplers that sample high-power amplifiers carry RF power: follow local safety rules for RF exposure and high-voltage test equipment.",
}

func (r *reportRun) assumptionSection() (rep.Section, bool, error) {
	blocks := []rep.Block{
		rep.Subheading("Assumptions"), rep.List(reportAssumptions),
		rep.Subheading("Cautions"), rep.List(reportCautions),
	}
	// What the library warned of for this job: designs out of spec,
	// curves cut short, tolerances at the end of the solved range.
	var notes []string
	notes = append(notes, r.a.Warnings()...)
	notes = append(notes, r.yield.Warnings...)
	notes = append(notes, r.tol.Warnings...)
	if r.cmpSum != nil {
		notes = append(notes, r.cmpSum.Notes...)
	}
	if notes = dedupe(notes); len(notes) > 0 {
		blocks = append(blocks, rep.Subheading("Notes on this job"), rep.List(notes))
	}
	return rep.Section{ID: "assumptions", Title: "Assumptions and cautions", Blocks: blocks}, true, nil
}

// dedupe returns ss without repeats, in order.
func dedupe(ss []string) []string {
	seen := map[string]bool{}
	var out []string
	for _, s := range ss {
		if !seen[s] {
			seen[s] = true
			out = append(out, s)
		}
	}
	return out
}

func (r *reportRun) jobSection() (rep.Section, bool, error) {
	var blocks []rep.Block
	for _, src := range r.job.Sources {
		blocks = append(blocks, &rep.Verbatim{Name: src.Name, Text: src.Data})
	}
	return rep.Section{ID: "job", Title: "Job file", Blocks: blocks}, len(blocks) > 0, nil
}

// demoTargets returns the path of a demo job's targets file in dir, or ""
// for a job without one.
func demoTargets(dir, name string) string {
	if name == "" {
		return ""
	}
	return filepath.Join(dir, name)
}
