package main

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/job"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/render"
)

type fitFlags struct {
	outputFlags
	model        string
	robust       bool
	weight       string
	datum        string
	panelSize    string
	contributors string
	grid         int
	width        int
}

// flags declares the command's flags on fs.
func (f *fitFlags) flags(fs *pflag.FlagSet) {
	f.outputFlags.add(fs)
	fs.StringVar(&f.model, "model", "affine", "terms fitted: affine (6), similarity (4) or translation (2)")
	fs.BoolVar(&f.robust, "robust", false, "reweight iteratively and reject mis-measured targets")
	fs.StringVar(&f.weight, "weight", "tukey", "robust weight function: tukey (after huber) or huber")
	fs.StringVar(&f.datum, "datum", "0in,0in", "point that rotation and scale act about, panel frame (use the job's datum)")
	fs.StringVar(&f.panelSize, "panel", "", "panel size for fit.png, e.g. 18in,24in (default: the targets' extent)")
	fs.StringVar(&f.contributors, "contributors", "", "write the lot as TOML [[contributor]] blocks to FILE")
	fs.IntVar(&f.grid, "grid", 5, "nodes per axis of the pooled residual grid")
	fs.IntVar(&f.width, "width", 2400, "width of fit.png in pixels")
}

// parseVecFlag reads "X,Y" with a length unit on each value.
func parseVecFlag(name, s string) (panel.Vec, error) {
	parts := strings.Split(s, ",")
	if len(parts) != 2 {
		return panel.Vec{}, usageErr("--%s: want two lengths X,Y such as 0in,0in, not %q", name, s)
	}
	var v [2]float64
	for i, p := range parts {
		x, err := unit.Parse(p, unit.Length)
		if err != nil {
			return panel.Vec{}, usageErr("--%s: %v", name, err)
		}
		v[i] = x
	}
	return panel.Vec{X: v[0], Y: v[1]}, nil
}

// fitRun is a finished fit of a measurement file.
type fitRun struct {
	file  string
	set   registration.FitSettings
	fits  []registration.Fit
	lots  []registration.Lot
	grids map[string]*registration.Grid
}

// runFitFile reads and fits a measurement file; bad input is marked.
func runFitFile(path string, stdin io.Reader, set registration.FitSettings, grid int) (*fitRun, error) {
	data, name, err := readFile(path, stdin)
	if err != nil {
		return nil, badInput(fmt.Errorf("measurement file: %w", err))
	}
	ts, err := registration.ReadTargets(strings.NewReader(string(data)), name)
	if err != nil {
		return nil, badInput(err)
	}
	for _, t := range ts {
		if _, lower, rel := registration.SplitLayer(t.Layer); rel && lower == "" {
			return nil, badInput(&registration.CSVError{File: name, Row: t.Row, Column: "layer", Err: fmt.Errorf("%q: bad layer pair", t.Layer)})
		}
	}
	fits, err := registration.FitAll(ts, &set)
	if err != nil {
		return nil, badInput(fmt.Errorf("%s: %w", name, err))
	}
	r := &fitRun{file: name, set: set, fits: fits, lots: registration.LotStats(fits), grids: map[string]*registration.Grid{}}
	for _, l := range r.lots {
		r.grids[l.Layer] = registration.PooledResiduals(fits, l.Layer, grid, grid)
	}
	return r, nil
}

// isFitOutput reports whether path names one of the files fit writes into dir.
func isFitOutput(path, dir string) bool {
	pd, _ := filepath.Abs(filepath.Dir(path))
	od, _ := filepath.Abs(dir)
	if pd != od {
		return false
	}
	name := filepath.Base(path)
	switch {
	case name == "fit.csv", name == "residuals.csv", name == "fit.png":
		return true
	case strings.HasPrefix(name, "residual-grid-") && strings.HasSuffix(name, ".csv"):
		return true
	}
	return false
}

func (f *fitFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("fit takes one measurement file (CSV)")
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	if f.contributors != "" && isFitOutput(f.contributors, f.out) {
		return usageErr("--contributors: %s is one of fit's own outputs in -o %s", f.contributors, f.out)
	}
	m, err := registration.ParseFitModel(f.model)
	if err != nil {
		return usageErr("--model: %v", err)
	}
	set := registration.FitSettings{Model: m}
	if f.robust {
		if set.Robust, err = registration.ParseRobust(f.weight); err != nil || set.Robust == registration.NoRobust {
			return usageErr("--weight: want tukey or huber, not %q", f.weight)
		}
	}
	if set.Datum, err = parseVecFlag("datum", f.datum); err != nil {
		return err
	}
	var size panel.Vec
	if f.panelSize != "" {
		if size, err = parseVecFlag("panel", f.panelSize); err != nil {
			return err
		}
		if !(size.X > 0 && size.Y > 0) {
			return usageErr("--panel: the sizes must be positive")
		}
	}
	if f.grid < 2 || f.grid > 200 {
		return usageErr("--grid: want 2 to 200 nodes per axis, not %d", f.grid)
	}
	if f.width < 300 || f.width > 20000 {
		return usageErr("--width: want 300 to 20000 pixels, not %d", f.width)
	}
	r, err := runFitFile(args[0], std.in, set, f.grid)
	if err != nil {
		return err
	}
	o, err := newOutputs(f.out)
	if err != nil {
		return err
	}
	defer o.abort()
	if f.contributors != "" {
		if err := os.MkdirAll(filepath.Dir(f.contributors), 0o755); err != nil {
			return err
		}
		if err := o.fileAt(f.contributors, func(w io.Writer) error { return r.writeContributors(w, lu) }); err != nil {
			return err
		}
	}
	if err := o.file("fit.csv", func(w io.Writer) error { return r.writeFitCSV(w, lu) }); err != nil {
		return err
	}
	if err := o.file("residuals.csv", func(w io.Writer) error { return r.writeResidualsCSV(w, lu) }); err != nil {
		return err
	}
	for _, l := range r.lots {
		g := r.grids[l.Layer]
		if g == nil {
			continue
		}
		if err := o.file("residual-grid-"+l.Layer+".csv", func(w io.Writer) error { return writeGridCSV(w, g, lu) }); err != nil {
			return err
		}
	}
	if err := o.file("fit.png", func(w io.Writer) error { return r.drawFit(w, size, f.width, lu) }); err != nil {
		return err
	}
	if err := o.commit(); err != nil {
		return err
	}
	if f.json {
		return writeJSON(std.out, r.summary())
	}
	r.printTable(std.out, lu)
	for _, p := range o.paths() {
		fmt.Fprintf(std.out, "wrote %s\n", p)
	}
	return nil
}

// termsJSON holds the terms, keyed in JSON by the term table with their SI
// unit ("offset_x_m", "rotation_rad", "scale_x"), in term order; nil is a
// term that was not estimated (or a standard error without redundancy).
type termsJSON [registration.NumTerms]*float64

func (t termsJSON) MarshalJSON() ([]byte, error) {
	b := []byte{'{'}
	for k, v := range t {
		if k > 0 {
			b = append(b, ',')
		}
		key, _ := json.Marshal(registration.TermKind(k).JSONKey())
		val, err := json.Marshal(v)
		if err != nil {
			return nil, err
		}
		b = append(append(append(b, key...), ':'), val...)
	}
	return append(b, '}'), nil
}

func (t *termsJSON) UnmarshalJSON(data []byte) error {
	var m map[string]*float64
	if err := json.Unmarshal(data, &m); err != nil {
		return err
	}
	for k := range t {
		t[k] = m[registration.TermKind(k).JSONKey()]
	}
	return nil
}

func newTermsJSON(v [registration.NumTerms]float64, m registration.FitModel, zeroUnfitted bool) termsJSON {
	var p [registration.NumTerms]*float64
	for k := range v {
		x := v[k]
		if !m.Estimates(registration.TermKind(k)) {
			if !zeroUnfitted {
				continue
			}
			x = 0
		}
		if math.IsNaN(x) || math.IsInf(x, 0) {
			continue
		}
		p[k] = &x
	}
	return termsJSON(p)
}

type fitJSON struct {
	Panel    string    `json:"panel"`
	Layer    string    `json:"layer"`
	Targets  int       `json:"targets"`
	DOF      int       `json:"dof"`
	Terms    termsJSON `json:"terms"`
	StdErr   termsJSON `json:"stderr"`
	Sigma0M  *float64  `json:"sigma0_m"`
	RMSM     float64   `json:"rms_m"`
	MaxM     float64   `json:"max_m"`
	Outliers []string  `json:"outliers"`
}

type lotJSON struct {
	Layer  string    `json:"layer"`
	Panels int       `json:"panels"`
	Mean   termsJSON `json:"mean"`
	Sigma  termsJSON `json:"sigma"`
}

type fitSummary struct {
	File   string     `json:"file"`
	Model  string     `json:"model"`
	Robust string     `json:"robust"`
	DatumM [2]float64 `json:"datum_m"`
	Fits   []fitJSON  `json:"fits"`
	Lot    []lotJSON  `json:"lot"`
}

func (r *fitRun) summary() *fitSummary {
	s := &fitSummary{File: r.file, Model: r.set.Model.String(), Robust: r.set.Robust.String(),
		DatumM: [2]float64{r.set.Datum.X, r.set.Datum.Y}}
	for _, f := range r.fits {
		fj := fitJSON{Panel: f.Panel, Layer: f.Layer, Targets: f.N, DOF: f.DOF,
			Terms: newTermsJSON(f.Terms, f.Model, true), StdErr: newTermsJSON(f.StdErr, f.Model, false),
			RMSM: f.RMS, MaxM: f.Max, Outliers: f.Outliers}
		if f.Outliers == nil {
			fj.Outliers = []string{}
		}
		if f.DOF > 0 {
			s0 := f.Sigma0
			fj.Sigma0M = &s0
		}
		s.Fits = append(s.Fits, fj)
	}
	for _, l := range r.lots {
		s.Lot = append(s.Lot, lotJSON{Layer: l.Layer, Panels: l.Panels,
			Mean: newTermsJSON(l.Mean, l.Model, true), Sigma: newTermsJSON(l.SD, l.Model, false)})
	}
	return s
}

// termUnit returns the output unit name and kind of term k (the term table of
// package registration).
func termUnit(k registration.TermKind, lu lengthUnit) (string, unit.Kind) {
	return k.Unit(lu.Output), k.Info().Kind
}

// termHeader returns the table header cells of the terms, "offset_x [mil]\t...".
func termHeader(lu lengthUnit) string {
	var b strings.Builder
	for k := registration.TermKind(0); k < registration.NumTerms; k++ {
		u, _ := termUnit(k, lu)
		fmt.Fprintf(&b, "%s [%s]\t", k, u)
	}
	return b.String()
}

func fmtG(v float64, digits int) string {
	if math.IsNaN(v) {
		return ""
	}
	return strconv.FormatFloat(v, 'f', digits, 64)
}

func (r *fitRun) writeFitCSV(w io.Writer, lu lengthUnit) error {
	cw := csv.NewWriter(w)
	header := []string{"panel", "layer", "model", "targets", "dof"}
	for k := registration.TermKind(0); k < registration.NumTerms; k++ {
		u, _ := termUnit(k, lu)
		header = append(header, fmt.Sprintf("%s [%s]", k, u))
	}
	for k := registration.TermKind(0); k < registration.NumTerms; k++ {
		u, _ := termUnit(k, lu)
		header = append(header, fmt.Sprintf("%s_se [%s]", k, u))
	}
	header = append(header, "sigma0 ["+lu.name+"]", "rms ["+lu.name+"]", "max ["+lu.name+"]", "outliers")
	if err := cw.Write(header); err != nil {
		return err
	}
	for _, f := range r.fits {
		rec := []string{f.Panel, f.Layer, f.Model.String(), strconv.Itoa(f.N), strconv.Itoa(f.DOF)}
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			u, kind := termUnit(k, lu)
			rec = append(rec, fmtG(unit.In(f.Terms[k], kind, u), 4))
		}
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			u, kind := termUnit(k, lu)
			v := unit.In(f.StdErr[k], kind, u)
			if !f.Model.Estimates(k) {
				v = math.NaN()
			}
			rec = append(rec, fmtG(v, 4))
		}
		s0 := f.Sigma0
		if f.DOF <= 0 {
			s0 = math.NaN()
		}
		rec = append(rec, fmtG(s0/lu.factor, 4), fmtG(f.RMS/lu.factor, 4), fmtG(f.Max/lu.factor, 4), strings.Join(f.Outliers, ";"))
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func (r *fitRun) writeResidualsCSV(w io.Writer, lu lengthUnit) error {
	cw := csv.NewWriter(w)
	L, P := "["+lu.name+"]", "["+lu.panel+"]"
	header := []string{"panel", "layer", "target", "x " + P, "y " + P, "dx " + L, "dy " + L,
		"fit_dx " + L, "fit_dy " + L, "res_dx " + L, "res_dy " + L, "outlier"}
	if err := cw.Write(header); err != nil {
		return err
	}
	for _, f := range r.fits {
		for i, t := range f.Targets {
			out := f.Weights[i] == 0 && len(f.Outliers) > 0
			rec := []string{f.Panel, f.Layer, t.Name, fmtG(t.Pos.X/lu.pfac, 4), fmtG(t.Pos.Y/lu.pfac, 4),
				fmtG(t.D.X/lu.factor, 4), fmtG(t.D.Y/lu.factor, 4),
				fmtG(f.Fitted[i].X/lu.factor, 4), fmtG(f.Fitted[i].Y/lu.factor, 4),
				fmtG(f.Residuals[i].X/lu.factor, 4), fmtG(f.Residuals[i].Y/lu.factor, 4), strconv.FormatBool(out)}
			if err := cw.Write(rec); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}

// writeGridCSV writes a residual grid in the format registration.ReadGrid reads.
func writeGridCSV(w io.Writer, g *registration.Grid, lu lengthUnit) error {
	cw := csv.NewWriter(w)
	L, P := "["+lu.name+"]", "["+lu.panel+"]"
	if err := cw.Write([]string{"x " + P, "y " + P, "dx " + L, "dy " + L}); err != nil {
		return err
	}
	for j, y := range g.Y {
		for i, x := range g.X {
			if err := cw.Write([]string{fmtG(x/lu.pfac, 6), fmtG(y/lu.pfac, 6), fmtG(g.DX[j][i]/lu.factor, 5), fmtG(g.DY[j][i]/lu.factor, 5)}); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}

// writeContributors writes the lot as [[contributor]] blocks with units on
// every value (job.WriteContributors).
func (r *fitRun) writeContributors(w io.Writer, lu lengthUnit) error {
	return job.WriteContributors(w, r.file, &r.set, r.fits, r.lots, lu.Output)
}

func (r *fitRun) printTable(w io.Writer, lu lengthUnit) {
	fmt.Fprintf(w, "%s: %d fits (%s model", r.file, len(r.fits), r.set.Model)
	if r.set.Robust != registration.NoRobust {
		fmt.Fprintf(w, ", robust %s", r.set.Robust)
	}
	fmt.Fprintf(w, ")\n")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "panel\tlayer\tn\t%srms [%s]\tmax [%s]\toutliers\t\n", termHeader(lu), lu.name, lu.name)
	for _, f := range r.fits {
		fmt.Fprintf(tw, "%s\t%s\t%d\t", f.Panel, f.Layer, f.N)
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			u, kind := termUnit(k, lu)
			if !f.Model.Estimates(k) {
				fmt.Fprintf(tw, "-\t")
				continue
			}
			se := unit.In(f.StdErr[k], kind, u)
			if math.IsNaN(se) {
				fmt.Fprintf(tw, "%.2f\t", unit.In(f.Terms[k], kind, u))
			} else {
				fmt.Fprintf(tw, "%.2f ± %.2f\t", unit.In(f.Terms[k], kind, u), se)
			}
		}
		fmt.Fprintf(tw, "%.3f\t%.3f\t%s\t\n", f.RMS/lu.factor, f.Max/lu.factor, strings.Join(f.Outliers, " "))
	}
	tw.Flush()
	fmt.Fprintf(w, "\nlot (mean ± panel-to-panel sigma):\n")
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "layer\tpanels\t%s\n", termHeader(lu))
	for _, l := range r.lots {
		fmt.Fprintf(tw, "%s\t%d\t", l.Layer, l.Panels)
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			u, kind := termUnit(k, lu)
			if !l.Model.Estimates(k) {
				fmt.Fprintf(tw, "-\t")
				continue
			}
			fmt.Fprintf(tw, "%.2f ± %.2f\t", unit.In(l.Mean[k], kind, u), unit.In(l.SD[k], kind, u))
		}
		fmt.Fprintf(tw, "\n")
	}
	tw.Flush()
	n := 0
	for _, f := range r.fits {
		n += len(f.Outliers)
	}
	if n > 0 {
		fmt.Fprintf(w, "%d target(s) rejected as mis-measured (beyond %.0f sigma of a robust fit); see residuals.csv\n", n, registration.DefaultOutlierLimit)
	}
}

// drawFit draws one view per layer: every panel's targets with the measured
// displacement (grey) and the residual after the fit (coloured), exaggerated
// by one stated factor, outliers ringed.
func (r *fitRun) drawFit(w io.Writer, size panel.Vec, width int, lu lengthUnit) error {
	var ext render.Rect
	if size.X > 0 {
		ext = render.Centered(size.X, size.Y)
	} else {
		lo := panel.Vec{X: math.Inf(1), Y: math.Inf(1)}
		hi := panel.Vec{X: math.Inf(-1), Y: math.Inf(-1)}
		for _, f := range r.fits {
			for _, t := range f.Targets {
				lo = panel.Vec{X: math.Min(lo.X, t.Pos.X), Y: math.Min(lo.Y, t.Pos.Y)}
				hi = panel.Vec{X: math.Max(hi.X, t.Pos.X), Y: math.Max(hi.Y, t.Pos.Y)}
			}
		}
		pad := 0.1*math.Max(hi.X-lo.X, hi.Y-lo.Y) + 0.01
		ext = render.Rect{Min: render.Point{X: lo.X - pad, Y: lo.Y - pad}, Max: render.Point{X: hi.X + pad, Y: hi.Y + pad}}
	}
	// Two exaggerations: the measured displacements are mils, the residuals
	// a tenth of that; each gets the round factor that draws its largest
	// arrow (outliers aside) a tenth of the panel's shorter side long.
	var maxD, maxR float64
	for _, f := range r.fits {
		for i, t := range f.Targets {
			if f.Weights[i] == 0 && len(f.Outliers) > 0 {
				continue // an outlier must not shrink every other arrow
			}
			maxD = math.Max(maxD, math.Hypot(t.D.X, t.D.Y))
			maxR = math.Max(maxR, math.Hypot(f.Residuals[i].X, f.Residuals[i].Y))
		}
	}
	side := math.Min(ext.Dx(), ext.Dy())
	exg := niceLength(side / 10 / math.Max(maxD, 1e-9))
	exr := niceLength(side / 10 / math.Max(maxR, 1e-9))
	ru := render.Inch
	if lu.panel == "mm" {
		ru = render.Millimetre
	}
	var captions []string
	for _, l := range r.lots {
		captions = append(captions, fmt.Sprintf("layer %s, %d panels", l.Layer, l.Panels))
	}
	title := []string{
		"Registration targets of " + filepath.Base(r.file),
		fmt.Sprintf("%s fit per panel and layer about the datum (%.2f, %.2f) %s; robust: %s; all panels overlaid",
			r.set.Model, r.set.Datum.X/lu.pfac, r.set.Datum.Y/lu.pfac, lu.panel, r.set.Robust),
	}
	legend := []render.LegendItem{
		{Label: "measured displacement, × " + strconv.FormatFloat(exg, 'g', 6, 64), Kind: render.LegendArrow, Color: render.Frame},
		{Label: "residual after the fit, × " + strconv.FormatFloat(exr, 'g', 6, 64), Kind: render.LegendArrow, Color: render.Series(0)},
		{Label: "target rejected as mis-measured", Kind: render.LegendRing},
	}
	cols := min(len(r.lots), 4)
	m := render.NewMap(render.MapSpec{Width: width, Extent: ext, Views: len(r.lots), Columns: cols, Title: title,
		Captions: captions, Unit: ru, NoColorBar: true, Legend: legend})
	for li, l := range r.lots {
		v := m.Views[li]
		if size.X > 0 {
			v.StrokeRect(ext, render.LineStyle{Color: render.Ink, Width: 2})
		}
		var meas, res []render.Arrow
		var pts []render.Point
		var ms []render.Marker
		for _, f := range r.fits {
			if f.Layer != l.Layer {
				continue
			}
			for i, t := range f.Targets {
				at := render.Point{X: t.Pos.X, Y: t.Pos.Y}
				pts = append(pts, at)
				meas = append(meas, render.Arrow{At: at, D: render.Point{X: t.D.X, Y: t.D.Y}})
				if f.Weights[i] == 0 && len(f.Outliers) > 0 {
					ms = append(ms, render.Marker{At: at, Label: f.Panel + " " + t.Name})
					continue
				}
				res = append(res, render.Arrow{At: at, D: render.Point{X: f.Residuals[i].X, Y: f.Residuals[i].Y}})
			}
		}
		v.Arrows(meas, render.ArrowStyle{Color: render.Frame, Exaggeration: exg})
		v.Arrows(res, render.ArrowStyle{Color: render.Series(0), Exaggeration: exr, Width: 2 * m.Thin()})
		v.Dots(pts, 0.25*m.TextSize(), render.Ink)
		v.Markers(ms)
		bar := niceLength(maxD/2/lu.factor) * lu.factor
		v.ScaleArrow(bar, fmt.Sprintf("measured: %s %s (× %s); residual: %s %s",
			strconv.FormatFloat(bar/lu.factor, 'g', 3, 64), lu.name, strconv.FormatFloat(exg, 'g', 6, 64),
			strconv.FormatFloat(bar*exg/exr/lu.factor, 'g', 3, 64), lu.name),
			render.ArrowStyle{Color: render.Ink, Exaggeration: exg})
	}
	return m.EncodePNG(w)
}

// niceLength returns 1, 2 or 5 times a power of ten not above d, for a
// scale arrow.
func niceLength(d float64) float64 {
	if !(d > 0) {
		return 1
	}
	mag := math.Pow(10, math.Floor(math.Log10(d)))
	for _, m := range []float64{5, 2, 1} {
		if m*mag <= d {
			return m * mag
		}
	}
	return mag
}
