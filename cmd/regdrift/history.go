package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/history"
	"github.com/regdrift/regdrift/samples"
)

// defaultHistoryDB is the history file without --db or REGDRIFT_DB.
const defaultHistoryDB = "regdrift-history.db"

// historyFlags is the history command: one flag set for its subcommands,
// each of which accepts only its own flags (see historyUses).
type historyFlags struct {
	fs           *pflag.FlagSet
	db           string
	out          string
	lot          string
	date         string
	construction string
	applied      string
	replace      bool
	model        string
	robust       bool
	weight       string
	datum        string
	role         string
	layer        string
	term         string
	width        int
	json         bool
}

// historyUses lists the flags each subcommand takes besides --db.
var historyUses = map[string][]string{
	"add":    {"lot", "date", "construction", "applied", "replace", "model", "robust", "weight", "datum"},
	"trend":  {"out", "construction", "role", "layer", "term", "width", "json"},
	"table":  {"out", "construction", "role"},
	"export": {},
	"import": {"replace"},
}

func (f *historyFlags) flags(fs *pflag.FlagSet) {
	f.fs = fs
	fs.StringVar(&f.db, "db", "", "history database (default $REGDRIFT_DB, else "+defaultHistoryDB+" in the working directory)")
	addOutDir(fs, &f.out)
	fs.StringVar(&f.lot, "lot", "", "add: the lot's name (unique in the history)")
	fs.StringVar(&f.date, "date", "", "add: the lot's build date, YYYY-MM-DD (default today)")
	fs.StringVar(&f.construction, "construction", "", "add: a constructions file (CSV: layer, construction, role) or one construction key for every layer; trend, table: only this construction")
	fs.StringVar(&f.applied, "applied", "", "add: the artwork scale each layer was built with: a CSV file (layer, scale_x [ppm], scale_y [ppm]) or LAYER:x=SCALE,y=SCALE; layers not named were built at CAD size")
	fs.BoolVar(&f.replace, "replace", false, "add, import: store a lot again that is already stored")
	fs.StringVar(&f.model, "model", "affine", "add: terms fitted: affine (6), similarity (4) or translation (2)")
	fs.BoolVar(&f.robust, "robust", false, "add: reweight iteratively and reject mis-measured targets")
	fs.StringVar(&f.weight, "weight", "tukey", "add: robust weight function: tukey (after huber) or huber")
	fs.StringVar(&f.datum, "datum", "0in,0in", "add: point that rotation and scale act about, panel frame")
	fs.StringVar(&f.role, "role", "", "trend, table: only this layer role")
	fs.StringVar(&f.layer, "layer", "", "trend: one layer instead of each construction's roles")
	fs.StringVar(&f.term, "term", "scale_x", "trend: the term charted: offset_x, offset_y, rotation, scale_x, scale_y or skew")
	fs.IntVar(&f.width, "width", 2400, "trend: width of the charts in pixels")
	fs.BoolVar(&f.json, "json", false, "trend: print the charts' numbers as JSON (SI) instead of the table")
}

func (f *historyFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) == 0 {
		return usageErr("history needs a subcommand: add, trend, table, export or import")
	}
	sub, args := args[0], args[1:]
	uses, ok := historyUses[sub]
	if !ok {
		return usageErr("unknown history subcommand %q (want add, trend, table, export or import)", sub)
	}
	var bad []string
	f.fs.Visit(func(fl *pflag.Flag) {
		if fl.Name != "db" && !slices.Contains(uses, fl.Name) {
			bad = append(bad, "--"+fl.Name)
		}
	})
	if len(bad) > 0 {
		return usageErr("history %s does not take %s", sub, strings.Join(bad, ", "))
	}
	path := f.db
	if path == "" {
		path = os.Getenv("REGDRIFT_DB")
	}
	if path == "" {
		path = defaultHistoryDB
	}
	switch sub {
	case "add":
		return f.add(ctx, std, path, args)
	case "trend":
		return f.trend(ctx, std, path, args)
	case "table":
		return f.table(ctx, std, path, args)
	case "export":
		if len(args) != 0 {
			return usageErr("history export takes no arguments (it writes to standard output)")
		}
		d, err := openHistory(ctx, path, false)
		if err != nil {
			return err
		}
		defer d.Close()
		return d.Export(ctx, std.out)
	default: // import
		if len(args) != 1 {
			return usageErr("history import takes one export file (CSV, - for standard input)")
		}
		data, name, err := readFile(args[0], std.in)
		if err != nil {
			return badInput(fmt.Errorf("export file: %w", err))
		}
		// Read the whole file before the database is opened, so that bad
		// input leaves a new database path without a file.
		lots, err := history.ReadExport(strings.NewReader(string(data)), name)
		if err != nil {
			return badInput(err)
		}
		d, err := openHistory(ctx, path, true)
		if err != nil {
			return err
		}
		defer d.Close()
		if err := d.AddLots(ctx, lots, f.replace); err != nil {
			return historyErr(err)
		}
		fmt.Fprintf(std.out, "imported %d lots from %s into %s\n", len(lots), name, path)
		return nil
	}
}

// openHistory opens the database; refusals are bad input. Without create a
// missing file is bad input too (nothing to read).
func openHistory(ctx context.Context, path string, create bool) (*history.DB, error) {
	if !create {
		if _, err := os.Stat(path); errors.Is(err, os.ErrNotExist) {
			return nil, badInput(fmt.Errorf("%s: no such history (add a lot first, or give --db)", path))
		}
	}
	if st, err := os.Stat(filepath.Dir(path)); err != nil || !st.IsDir() {
		return nil, badInput(fmt.Errorf("%s: the directory %s does not exist", path, filepath.Dir(path)))
	}
	d, err := history.Open(ctx, path)
	if err != nil {
		if errors.Is(err, history.ErrNotHistory) || errors.Is(err, history.ErrNewerSchema) || errors.Is(err, history.ErrIsDirectory) {
			return nil, badInput(err)
		}
		return nil, err
	}
	return d, nil
}

// historyErr marks the store's refusals of bad input.
func historyErr(err error) error {
	if errors.Is(err, history.ErrLotExists) || errors.Is(err, history.ErrInvalidLot) {
		return badInput(err)
	}
	return err
}

func (f *historyFlags) add(ctx context.Context, std stdio, path string, args []string) error {
	if len(args) != 1 {
		return usageErr("history add takes one measurement file (CSV)")
	}
	if f.lot == "" {
		return usageErr("history add needs --lot")
	}
	if f.construction == "" {
		return usageErr("history add needs --construction FILE or KEY")
	}
	date := f.date
	if date == "" {
		date = time.Now().UTC().Format(history.DateLayout)
	} else if _, err := time.Parse(history.DateLayout, date); err != nil {
		return usageErr("--date: %q: want YYYY-MM-DD", date)
	}
	set, err := parseFitSettings(f.model, f.robust, f.weight)
	if err != nil {
		return err
	}
	if set.Datum, err = parseVecFlag("datum", f.datum); err != nil {
		return err
	}
	// Everything is read and fitted before the database is opened: bad
	// input leaves it untouched (and a new path without a file).
	var builder history.Builder = history.OneConstruction(f.construction)
	if isFilePath(f.construction) {
		data, name, err := readFile(f.construction, nil)
		if err != nil {
			return badInput(fmt.Errorf("--construction: %w", err))
		}
		c, err := history.ReadConstructions(strings.NewReader(string(data)), name)
		if err != nil {
			return badInput(err)
		}
		builder = namedBuilder{c, name}
	}
	applied := registration.AppliedSet{}
	appliedName := ""
	if f.applied != "" {
		// Standard input is the targets' ("-"), never the artwork's.
		noStdin := std
		noStdin.in = nil
		var src map[string]string
		if applied, src, err = parseApplied([]string{f.applied}, noStdin); err != nil {
			return err
		}
		for _, n := range src {
			appliedName = n
		}
	}
	r, err := runFitFile(args[0], std.in, set, 2)
	if err != nil {
		return err
	}
	l, err := history.NewLot(f.lot, date, r.Fits, builder, applied, appliedName)
	if err != nil {
		return badInput(fmt.Errorf("%s: %w", r.File, err))
	}
	d, err := openHistory(ctx, path, true)
	if err != nil {
		return err
	}
	defer d.Close()
	if err := d.Add(ctx, l, f.replace); err != nil {
		return historyErr(fmt.Errorf("%s: %w", path, err))
	}
	layers := map[string]bool{}
	for _, fr := range l.Fits {
		layers[fr.Layer] = true
	}
	fmt.Fprintf(std.out, "stored lot %s (%s): %d fits, %d layers, into %s\n", l.Name, l.Date, len(l.Fits), len(layers), path)
	return nil
}

// isFilePath reports whether a --construction value names a file rather
// than a construction key: it ends in .csv or holds a path separator.
func isFilePath(s string) bool {
	return strings.HasSuffix(strings.ToLower(s), ".csv") || strings.ContainsRune(s, os.PathSeparator) || s == "-"
}

// namedBuilder names the constructions file in its errors.
type namedBuilder struct {
	c    history.Constructions
	file string
}

func (b namedBuilder) Of(layer string) (history.LayerBuild, error) {
	lb, err := b.c.Of(layer)
	if err != nil {
		return lb, fmt.Errorf("constructions file %s: %w (add a row for it)", b.file, err)
	}
	return lb, nil
}

// historySeries reads the series a trend or table shows; a construction,
// role or layer the history lacks is bad input naming what it has.
func (f *historyFlags) historySeries(ctx context.Context, d *history.DB, terms ...registration.TermKind) ([]history.Series, error) {
	filter := history.Filter{Construction: f.construction, Role: f.role, Layer: f.layer}
	ss, err := d.Series(ctx, filter, terms...)
	if err != nil {
		return nil, err
	}
	if len(ss) == 0 {
		all, err := d.Series(ctx, history.Filter{}, registration.ScaleX)
		if err != nil {
			return nil, err
		}
		var have []string
		for _, s := range all {
			have = append(have, fmt.Sprintf("%q/%q (%s)", s.Construction, s.Role, strings.Join(s.Layers, " ")))
		}
		if len(have) == 0 {
			return nil, badInput(fmt.Errorf("%s holds no lots", d.Path()))
		}
		return nil, badInput(fmt.Errorf("%s: no lots of construction %q, role %q, layer %q (it holds %s)", d.Path(), f.construction, f.role, f.layer, strings.Join(have, ", ")))
	}
	return ss, nil
}

func parseHistoryTerm(s string) (registration.TermKind, error) {
	for k := range registration.NumTerms {
		if registration.TermKind(k).String() == s {
			return registration.TermKind(k), nil
		}
	}
	return 0, usageErr("--term: unknown term %q (want offset_x, offset_y, rotation, scale_x, scale_y or skew)", s)
}

// fileSafe turns a construction or role into a file name part.
func fileSafe(s string) string {
	return strings.Map(func(r rune) rune {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '-', r == '.':
			return r
		}
		return '_'
	}, s)
}

func (f *historyFlags) trend(ctx context.Context, std stdio, path string, args []string) error {
	if len(args) != 0 {
		return usageErr("history trend takes no arguments")
	}
	k, err := parseHistoryTerm(f.term)
	if err != nil {
		return err
	}
	if f.width < 300 || f.width > 20000 {
		return usageErr("--width: want 300 to 20000 pixels, not %d", f.width)
	}
	d, err := openHistory(ctx, path, false)
	if err != nil {
		return err
	}
	defer d.Close()
	ss, err := f.historySeries(ctx, d, k)
	if err != nil {
		return err
	}
	o, err := newOutputs(f.out)
	if err != nil {
		return err
	}
	defer o.abort()
	kind, u := history.TermUnit(k)
	var js []any
	tw := tabwriter.NewWriter(std.out, 0, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "construction\trole\tlots\tlast lot\tcentre [%s]\tσ [%s]\tlatest [%s]\tEWMA [%s]\tsignals in the last %d\n", u, u, u, u, history.ShiftWindow)
	for i := range ss {
		s := &ss[i]
		tr := history.NewTrend(s, k)
		js = append(js, tr.JSON())
		base := fmt.Sprintf("trend-%s-%s-%s", fileSafe(s.Construction), fileSafe(s.Role), k)
		if f.layer != "" {
			base = fmt.Sprintf("trend-%s-%s-%s", fileSafe(s.Construction), fileSafe(f.layer), k)
		}
		if err := o.file(base+".csv", tr.WriteCSV); err != nil {
			return err
		}
		if err := o.file(base+".png", func(w io.Writer) error { return tr.WritePNG(w, f.width, f.width*5/8) }); err != nil {
			return err
		}
		n := len(tr.Values)
		var recent []string
		for _, sg := range tr.Signals {
			if sg.Index >= n-history.ShiftWindow && !slices.Contains(recent, sg.Rule.Short()) {
				recent = append(recent, sg.Rule.Short())
			}
		}
		fmt.Fprintf(tw, "%s\t%s\t%d\t%s\t%s\t%s\t%s\t%s\t%s\n", s.Construction, s.Role, n, s.Points[n-1].Lot,
			unit.Format(tr.Chart.Centre, kind, u, 2), unit.Format(tr.Chart.Sigma, kind, u, 2),
			unit.Format(tr.Values[n-1], kind, u, 2), unit.Format(tr.EWMA.Z[n-1], kind, u, 2), strings.Join(recent, " "))
	}
	if err := o.commit(); err != nil {
		return err
	}
	if f.json {
		return writeJSON(std.out, map[string]any{"trends": js})
	}
	tw.Flush()
	for _, p := range o.paths() {
		fmt.Fprintf(std.out, "wrote %s\n", p)
	}
	return nil
}

func (f *historyFlags) table(ctx context.Context, std stdio, path string, args []string) error {
	if len(args) != 0 {
		return usageErr("history table takes no arguments")
	}
	d, err := openHistory(ctx, path, false)
	if err != nil {
		return err
	}
	defer d.Close()
	if _, err := f.historySeries(ctx, d, registration.ScaleX); err != nil {
		return err
	}
	rows, err := d.ScaleTable(ctx, history.Filter{Construction: f.construction, Role: f.role})
	if err != nil {
		return err
	}
	if _, err := writeAll(f.out,
		outFile{"scale-table.csv", func(w io.Writer) error { return history.WriteTableCSV(w, rows) }},
		outFile{"scale-contributors.toml", func(w io.Writer) error { return history.WriteContributors(w, rows, filepath.Base(path)) }},
	); err != nil {
		return err
	}
	tw := tabwriter.NewWriter(std.out, 0, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "construction\trole\taxis\tlots\tlast\tmovement\tnext artwork\tfactor\t± SE\tshift\n")
	for _, r := range rows {
		shift := ""
		if r.Shifted() {
			shift = "yes"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%s\t%+.1f ppm\t%+.1f ppm\t%.6f\t%.1f ppm\t%s\n", r.Construction, r.Role, r.Axis, r.Lots, r.LastDate,
			r.Movement/unit.PPM, r.Setting/unit.PPM, 1+r.Setting, r.SE/unit.PPM, shift)
	}
	tw.Flush()
	fmt.Fprintf(std.out, "next artwork = the scale setting that cancels the EWMA estimate (λ = %.1f) of the material movement; shift = a chart signal in the last %d lots\n",
		history.ControllerLambda, history.ShiftWindow)
	for _, p := range []string{"scale-table.csv", "scale-contributors.toml"} {
		fmt.Fprintf(std.out, "wrote %s\n", filepath.Join(f.out, p))
	}
	return nil
}

// demoHistory loads the invented demo history (samples.DemoHistory, 60 lots
// of two constructions) lot by lot through 'history add' into a temporary
// database, and writes its scale table and the trends of scale_x into
// out/history. It returns the lines the demo prints.
func demoHistory(ctx context.Context, out string) ([]string, error) {
	tmp, err := os.MkdirTemp("", "regdrift-demo-history-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(tmp)
	db := filepath.Join(tmp, "history.db")
	hist := &command{"history", func() options { return new(historyFlags) }}
	run := func(args ...string) ([]byte, error) {
		var o, e strings.Builder
		err := invoke(ctx, hist, stdio{out: &o, err: &e}, append(args, "--db", db))
		if err != nil {
			return nil, fmt.Errorf("history %s: %w", args[0], err)
		}
		return []byte(o.String()), nil
	}
	lots := samples.DemoHistory()
	for _, h := range lots {
		targets, applied := filepath.Join(tmp, h.Name+".csv"), filepath.Join(tmp, h.Name+"-applied.csv")
		if err := writeFileWith(targets, h.WriteTargets); err != nil {
			return nil, err
		}
		if err := writeFileWith(applied, h.WriteApplied); err != nil {
			return nil, err
		}
		if _, err := run("add", targets, "--lot", h.Name, "--date", h.Date, "--construction", h.Construction, "--applied", applied, "--robust"); err != nil {
			return nil, err
		}
	}
	dir := filepath.Join(out, "history")
	table, err := run("table", "-o", dir)
	if err != nil {
		return nil, err
	}
	if _, err := run("trend", "--term", "scale_x", "-o", dir); err != nil {
		return nil, err
	}
	lines := []string{fmt.Sprintf("history: %d invented lots of %s and %s (%s changes laminate at lot H036), loaded into a temporary database",
		len(lots), samples.HistoryCoreA, samples.HistoryCoreB, samples.HistoryCoreA)}
	for _, l := range strings.Split(strings.TrimRight(string(table), "\n"), "\n") {
		if !strings.HasPrefix(l, "wrote ") {
			lines = append(lines, "  "+l)
		}
	}
	lines = append(lines, "  images "+strings.Join(pngs(dir), ", "))
	return lines, nil
}

// writeFileWith writes a file with a writer function.
func writeFileWith(path string, write func(io.Writer) error) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := write(f); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}
