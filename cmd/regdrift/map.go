package main

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"text/tabwriter"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/render"
)

type mapFlags struct {
	outputFlags
	show   string
	width  int
	strict bool
	solver solverFlags
}

// flags declares the command's flags on fs.
func (f *mapFlags) flags(fs *pflag.FlagSet) {
	f.outputFlags.add(fs)
	fs.StringVar(&f.show, "show", "drift", "quantity drawn: drift (at the mean offset), worst (worst drift within ±3σ), offset, sigma or margin")
	fs.IntVar(&f.width, "width", 2400, "width of map.png in pixels")
	addStrict(fs, &f.strict, "any site is out of spec")
	f.solver.add(fs)
}

func (f *mapFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) != 1 {
		return usageErr("map takes one job file")
	}
	lu, err := parseUnits(f.units)
	if err != nil {
		return err
	}
	switch f.show {
	case "drift", "worst", "offset", "sigma", "margin":
	default:
		return usageErr("--show: want drift, worst, offset, sigma or margin, not %q", f.show)
	}
	if f.width < 300 || f.width > 20000 {
		return usageErr("--width: want 300 to 20000 pixels, not %d", f.width)
	}
	j, err := loadJob(args[0], std.in)
	if err != nil {
		return err
	}
	a, err := analyse(ctx, j, &f.solver)
	if err != nil {
		return err
	}
	sum, paths, err := a.writeMap(f.out, f.show, f.width, lu)
	if err != nil {
		return err
	}
	if err := report(std, f.json, sum, func() { a.printTable(std.out, sum, lu, paths) }); err != nil {
		return err
	}
	if f.strict && sum.InSpec < sum.Sites {
		return fmt.Errorf("%w: %d of %d sites outside the coupling spec", errOutOfSpec, sum.Sites-sum.InSpec, sum.Sites)
	}
	return nil
}

// writeMap writes the map's files (sites.csv, summary.json, map.png) into dir.
func (a *analysis) writeMap(dir, show string, width int, lu lengthUnit) (*mapSummary, []string, error) {
	sum := a.summary(10)
	paths, err := writeAll(dir,
		outFile{"sites.csv", func(w io.Writer) error { return a.writeSitesCSV(w, lu) }},
		outFile{"summary.json", func(w io.Writer) error { return writeJSON(w, sum) }},
		outFile{"map.png", func(w io.Writer) error { return a.drawMap(w, sum, show, width, lu) }})
	return sum, paths, err
}

func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// minMaxRMS is a JSON range summary.
type minMaxRMS struct {
	Min float64 `json:"min"`
	Max float64 `json:"max"`
	RMS float64 `json:"rms"`
}

func summarize(v []float64) minMaxRMS {
	if len(v) == 0 {
		return minMaxRMS{}
	}
	s := minMaxRMS{Min: math.Inf(1), Max: math.Inf(-1)}
	var ss float64
	for _, x := range v {
		s.Min, s.Max = math.Min(s.Min, x), math.Max(s.Max, x)
		ss += x * x
	}
	s.RMS = math.Sqrt(ss / float64(len(v)))
	return s
}

type worstSite struct {
	Rank        int     `json:"rank"`
	Name        string  `json:"name"`
	Section     string  `json:"section"`
	XM          float64 `json:"x_m"`
	YM          float64 `json:"y_m"`
	AngleRad    float64 `json:"angle_rad"`
	OffsetM     float64 `json:"offset_m"`
	SigmaM      float64 `json:"sigma_m"`
	CouplingDB  float64 `json:"coupling_db"`
	DriftDB     float64 `json:"drift_db"`
	MarginDB    float64 `json:"margin_db"`
	InSpec      bool    `json:"in_spec"`
	AlongM      float64 `json:"along_m"`
	Coupling3Lo float64 `json:"coupling_minus3sigma_db"`
	Coupling3Hi float64 `json:"coupling_plus3sigma_db"`
}

type sectionSummary struct {
	Name             string  `json:"name"`
	Sites            int     `json:"sites"`
	InSpec           int     `json:"in_spec"`
	FrequencyHz      float64 `json:"frequency_hz"`
	LengthM          float64 `json:"length_m"`
	SpecCouplingDB   float64 `json:"spec_coupling_db"`
	SpecToleranceDB  float64 `json:"spec_tolerance_db"`
	DesignOffsetM    float64 `json:"design_offset_m"`
	NominalCoupling  float64 `json:"nominal_coupling_db"`
	CurveFromCache   bool    `json:"curve_from_cache"`
	CurveOffsetLowM  float64 `json:"curve_offset_low_m"`
	CurveOffsetHighM float64 `json:"curve_offset_high_m"`
}

type mapSummary struct {
	Title    string           `json:"title"`
	Job      string           `json:"job"`
	Sites    int              `json:"sites"`
	InSpec   int              `json:"in_spec"`
	OffsetM  minMaxRMS        `json:"offset_m"`
	DriftDB  minMaxRMS        `json:"drift_db"`
	Sections []sectionSummary `json:"sections"`
	Worst    []worstSite      `json:"worst"`
}

func (a *analysis) summary(n int) *mapSummary {
	s := &mapSummary{Title: a.job.Title, Job: a.job.File, Sites: len(a.sites), InSpec: a.inSpec()}
	off := make([]float64, len(a.sites))
	drift := make([]float64, len(a.sites))
	for i := range a.sites {
		off[i], drift[i] = a.sites[i].Offset, a.sites[i].Drift
	}
	s.OffsetM, s.DriftDB = summarize(off), summarize(drift)
	for i, sec := range a.job.Sections {
		c := a.curves[i]
		if c == nil {
			continue
		}
		ss := sectionSummary{Name: sec.Name, FrequencyHz: sec.Frequency, LengthM: c.Length,
			SpecCouplingDB: sec.Spec.Coupling, SpecToleranceDB: sec.Spec.Tolerance,
			DesignOffsetM: sec.NominalOffset(), NominalCoupling: a.nominal[i], CurveFromCache: a.cacheHit[i]}
		ss.CurveOffsetLowM, ss.CurveOffsetHighM = c.Range()
		for k := range a.sites {
			if a.sites[k].Section == i {
				ss.Sites++
				if a.sites[k].InSpec {
					ss.InSpec++
				}
			}
		}
		s.Sections = append(s.Sections, ss)
	}
	for rank, k := range a.worst(n) {
		r := &a.sites[k]
		s.Worst = append(s.Worst, worstSite{Rank: rank + 1, Name: r.Site.Name, Section: a.job.Sections[r.Section].Name,
			XM: r.Site.Pos.X, YM: r.Site.Pos.Y, AngleRad: r.Site.Angle, OffsetM: r.Offset, SigmaM: r.Stats.SDAcross,
			CouplingDB: r.Coupling, DriftDB: r.Drift, MarginDB: r.Margin, InSpec: r.InSpec, AlongM: r.Along,
			Coupling3Lo: r.CouplingLo, Coupling3Hi: r.CouplingHi})
	}
	return s
}

func (a *analysis) writeSitesCSV(w io.Writer, lu lengthUnit) error {
	cw := csv.NewWriter(w)
	L := "[" + lu.name + "]"
	P := "[" + lu.panel + "]"
	header := []string{"site", "part", "array", "i", "j", "coupler", "section",
		"x " + P, "y " + P, "angle [deg]",
		"offset_across " + L, "sigma_across " + L, "offset_along " + L, "sigma_along " + L,
		"coupling [dB]", "drift [dB]", "margin [dB]", "in_spec",
		"coupling_minus3sigma [dB]", "coupling_plus3sigma [dB]"}
	if err := cw.Write(header); err != nil {
		return err
	}
	g := func(v float64, d int) string { return strconv.FormatFloat(v, 'f', d, 64) }
	rec := make([]string, len(header))
	for i := range a.sites {
		r := &a.sites[i]
		s := r.Site
		part := ""
		if s.Instance >= 0 && s.Instance < len(a.job.Instances) {
			part = a.job.Instances[s.Instance].Name
		}
		rec = rec[:0]
		rec = append(rec, s.Name, part, strconv.Itoa(s.Array+1), strconv.Itoa(s.I+1), strconv.Itoa(s.J+1), s.Coupler,
			a.job.Sections[r.Section].Name,
			g(s.Pos.X/lu.pfac, 4), g(s.Pos.Y/lu.pfac, 4), g(s.Angle*180/math.Pi, 2),
			g(r.Offset/lu.factor, 4), g(r.Stats.SDAcross/lu.factor, 4), g(r.Along/lu.factor, 4), g(r.Stats.SDAlong/lu.factor, 4),
			g(r.Coupling, 4), g(r.Drift, 4), g(r.Margin, 4), strconv.FormatBool(r.InSpec),
			g(r.CouplingLo, 4), g(r.CouplingHi, 4))
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func (a *analysis) printTable(w io.Writer, s *mapSummary, lu lengthUnit, paths []string) {
	fmt.Fprintf(w, "%s\n", s.Title)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "section\tsites\tin spec\tnominal [dB]\tspec [dB]\tworst offset [%s]\tworst drift [dB]\n", lu.name)
	for i, ss := range s.Sections {
		var wo, wd float64
		for k := range a.sites {
			r := &a.sites[k]
			if a.job.Sections[r.Section].Name != ss.Name {
				continue
			}
			if d := math.Abs(r.Offset - ss.DesignOffsetM); d > math.Abs(wo) {
				wo = r.Offset - ss.DesignOffsetM
			}
			if math.Abs(r.Drift) > math.Abs(wd) {
				wd = r.Drift
			}
		}
		_ = i
		fmt.Fprintf(tw, "%s\t%d\t%d (%.1f %%)\t%.3f\t%.2f ± %.2f\t%+.3f\t%+.4f\n", ss.Name, ss.Sites, ss.InSpec,
			100*float64(ss.InSpec)/float64(max(ss.Sites, 1)), ss.NominalCoupling, ss.SpecCouplingDB, ss.SpecToleranceDB,
			wo/lu.factor, wd)
	}
	tw.Flush()
	if len(s.Worst) > 0 {
		ws := s.Worst[0]
		fmt.Fprintf(w, "worst site: %s at (%.2f, %.2f) %s: offset %+.3f %s ± %.3f (1σ), coupling %.3f dB, drift %+.4f dB, margin %.3f dB\n",
			ws.Name, ws.XM/lu.pfac, ws.YM/lu.pfac, lu.panel, ws.OffsetM/lu.factor, lu.name, ws.SigmaM/lu.factor, ws.CouplingDB, ws.DriftDB, ws.MarginDB)
	}
	for _, p := range paths {
		fmt.Fprintf(w, "wrote %s\n", p)
	}
}

// dominant returns the most common (section, line direction) among the sites
// that keep accepts (all sites when keep is nil). Directions a half turn apart
// are told apart: the across offset changes sign between them.
func (a *analysis) dominant(keep func(*siteResult) bool) (sec int, u panel.Vec, ok bool) {
	type key struct{ sec, deg int }
	count := map[key]int{}
	first := map[key]panel.Vec{}
	for i := range a.sites {
		r := &a.sites[i]
		if keep != nil && !keep(r) {
			continue
		}
		d := int(math.Round(r.Site.Angle*180/math.Pi)) % 360
		k := key{r.Section, d}
		count[k]++
		if _, ok := first[k]; !ok {
			first[k] = r.Site.U
		}
	}
	if len(count) == 0 {
		return 0, panel.Vec{}, false
	}
	var keys []key
	for k := range count {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(p, q int) bool {
		if count[keys[p]] != count[keys[q]] {
			return count[keys[p]] > count[keys[q]]
		}
		if keys[p].sec != keys[q].sec {
			return keys[p].sec < keys[q].sec
		}
		return keys[p].deg < keys[q].deg
	})
	return keys[0].sec, first[keys[0]], true
}

// mapZone is a region of the map whose field is drawn for one section and
// line direction: an array's extent and its most common coupler, or the whole
// panel and the most common coupler of the job.
type mapZone struct {
	r   panel.Rect
	sec int
	u   panel.Vec
}

func (z mapZone) bounds() panel.Rect { return z.r }

// zones returns one zone per array, then the whole usable area.
func (a *analysis) zones() []mapZone {
	var zs []mapZone
	for ai, ext := range a.job.ArrayExtents() {
		if sec, u, ok := a.dominant(func(r *siteResult) bool { return r.Site.Array == ai }); ok {
			zs = append(zs, mapZone{ext, sec, u})
		}
	}
	sec, u, _ := a.dominant(nil)
	return append(zs, mapZone{a.job.Layout.Panel.Usable(), sec, u})
}

// shown returns the value drawn for a site.
func (a *analysis) shown(show string, r *siteResult, lu lengthUnit) float64 {
	switch show {
	case "offset":
		return r.Offset / lu.factor
	case "sigma":
		return r.Stats.SDAcross / lu.factor
	case "margin":
		return r.Margin
	case "worst":
		return r.WorstDrift
	}
	return r.Drift
}

// shownRange returns the smallest and largest value drawn for the sites.
func (a *analysis) shownRange(show string, lu lengthUnit) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for i := range a.sites {
		v := a.shown(show, &a.sites[i], lu)
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	return lo, hi
}

// reversedSequential runs the sequential palette from dark to light, for
// quantities whose bad end is the low one (negative drift, small margin).
var reversedSequential = render.NewPalette("sequential, reversed", func(t float64) render.LCh {
	return render.LabOf(render.Sequential.At(1 - t)).LCh()
})

// scaleFor picks the palette and range for values in [lo, hi]: diverging and
// symmetric about zero when they take both signs, otherwise sequential with
// its dark end at the worse side (badLow: low values are worse).
func scaleFor(lo, hi float64, badLow bool) (*render.Palette, float64, float64) {
	if !(hi > lo) {
		d := math.Max(math.Abs(hi), 1e-6) * 0.01
		lo, hi = lo-d, hi+d
	}
	switch {
	case lo < 0 && hi > 0:
		lo, hi = render.Symmetric(lo, hi)
		return render.Diverging, lo, hi
	case badLow:
		return reversedSequential, lo, hi
	}
	return render.Sequential, lo, hi
}

func (a *analysis) drawMap(w io.Writer, sum *mapSummary, show string, width int, lu lengthUnit) error {
	j := a.job
	outline := j.Layout.Panel.Outline()
	ext := toRect(outline)
	zones := a.zones()
	field := func(x, y float64) float64 {
		p := panel.Vec{X: x, Y: y}
		z := zoneAt(zones, p)
		s, c, rel := j.Sections[z.sec], a.curves[z.sec], a.rel[z.sec]
		st := rel.Stats(rel.Row(p, z.u))
		off := s.NominalOffset() + st.MeanAcross
		switch show {
		case "offset":
			return off / lu.factor
		case "sigma":
			return st.SDAcross / lu.factor
		case "margin":
			return specMargin(s.Spec, c.Coupling(off))
		case "worst":
			return worstDrift(c, a.nominal[z.sec], off, st.SDAcross)
		}
		return c.Coupling(off) - a.nominal[z.sec]
	}
	global := zones[len(zones)-1]
	sec, u := global.sec, global.u
	s := j.Sections[sec]
	nom := s.NominalOffset()
	usable := j.Layout.Panel.Usable()
	ur := toRect(usable)
	nx := max(width/6, 40)
	ny := max(int(float64(nx)*ur.Dy()/ur.Dx()), 40)
	grid := render.NewGrid(ur, nx, ny, field)
	lo, hi := a.shownRange(show, lu)
	glo, ghi := grid.Range()
	lo, hi = math.Min(lo, glo), math.Max(hi, ghi)
	if a.scale != nil {
		lo, hi = a.scale[0], a.scale[1]
	}
	var label string
	badLow := true
	switch show {
	case "offset":
		label = "mean broadside offset across the lines, design offset included [" + lu.name + "]"
		badLow = false
	case "sigma":
		label = "standard deviation of the broadside offset [" + lu.name + "]"
		badLow = false
	case "margin":
		label = "margin from the coupling at the mean offset to the nearer spec limit [dB]"
	case "worst":
		label = "worst coupling drift within mean ± 3σ of the offset [dB]"
	default:
		label = "coupling drift at the mean offset, against the design offset [dB]"
	}
	pal, lo, hi := scaleFor(lo, hi, badLow)
	ws := sum.Worst[0]
	title := []string{
		j.Title,
		fmt.Sprintf("section %s: spec %.2f ± %.2f dB at %.4g GHz, design offset %.2f %s, coupling %.3f dB there",
			s.Name, s.Spec.Coupling, s.Spec.Tolerance, s.Frequency/1e9, nom/lu.factor, lu.name, a.nominal[sec]),
		fmt.Sprintf("%d of %d sites in spec; worst %s: offset %+.2f %s, drift %+.3f dB, margin %.3f dB",
			sum.InSpec, sum.Sites, ws.Name, ws.OffsetM/lu.factor, lu.name, ws.DriftDB, ws.MarginDB),
		fmt.Sprintf("field: over each array its most common coupler's line direction (elsewhere lines at %.0f deg, %s); bars: each site along its lines; rings: the ten worst sites",
			math.Atan2(u.Y, u.X)*180/math.Pi, s.Name),
	}
	ru := render.Inch
	if lu.panel == "mm" {
		ru = render.Millimetre
	}
	m := render.NewMap(render.MapSpec{Width: width, Extent: ext, Title: title, Unit: ru})
	v := m.Views[0]
	v.FieldGrid(grid, pal, lo, hi)
	v.StrokeRect(ur, render.LineStyle{Color: render.Frame, Dash: []float64{6, 4}})
	v.StrokeRect(ext, render.LineStyle{Color: render.Ink, Width: 2})
	// Part outlines, when a part is at least 12 pixels across.
	var parts []render.Rect
	for _, in := range j.Instances {
		if in.Array < 0 {
			continue
		}
		sz := in.Bounds.Size()
		if v.PixelLen(math.Min(sz.X, sz.Y)) < 12 {
			continue
		}
		parts = append(parts, toRect(in.Bounds))
	}
	v.StrokeRects(parts, render.LineStyle{Color: render.Frame})
	bars := make([]render.Bar, len(a.sites))
	barLen := a.barLength()
	for i := range a.sites {
		r := &a.sites[i]
		bars[i] = render.Bar{At: render.Point{X: r.Site.Pos.X, Y: r.Site.Pos.Y}, Length: barLen, Angle: r.Site.Angle,
			Color: pal.Map(a.shown(show, r, lu), lo, hi)}
	}
	v.Bars(bars, render.BarStyle{})
	var ms []render.Marker
	for _, ws := range sum.Worst {
		ms = append(ms, render.Marker{At: render.Point{X: ws.XM, Y: ws.YM}, Label: strconv.Itoa(ws.Rank)})
	}
	v.Markers(ms)
	m.ColorBar(pal, lo, hi, label)
	return m.EncodePNG(w)
}

// barLength returns the drawn length of a site bar: 60 % of the smallest
// distance between two sites of one part or array step, capped by the panel size.
func (a *analysis) barLength() float64 {
	p := a.job.Layout.Panel.Size
	l := math.Min(p.X, p.Y) / 40
	for _, ar := range a.job.Layout.Arrays {
		for _, d := range []float64{ar.Pitch.X, ar.Pitch.Y} {
			if d > 0 {
				l = math.Min(l, 0.6*d)
			}
		}
	}
	for _, pt := range a.job.Layout.Parts {
		for i := range pt.Couplers {
			for k := i + 1; k < len(pt.Couplers); k++ {
				d := pt.Couplers[i].At.Sub(pt.Couplers[k].At)
				if h := math.Hypot(d.X, d.Y); h > 0 {
					l = math.Min(l, 0.6*h)
				}
			}
		}
	}
	return l
}
