package drift

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
)

// MinMaxRMS is a JSON range summary.
type MinMaxRMS struct {
	Min float64 `json:"min"`
	Max float64 `json:"max"`
	RMS float64 `json:"rms"`
}

// Summarize returns the smallest, largest and root mean square value of v.
func Summarize(v []float64) MinMaxRMS {
	if len(v) == 0 {
		return MinMaxRMS{}
	}
	s := MinMaxRMS{Min: math.Inf(1), Max: math.Inf(-1)}
	var ss float64
	for _, x := range v {
		s.Min, s.Max = math.Min(s.Min, x), math.Max(s.Max, x)
		ss += x * x
	}
	s.RMS = math.Sqrt(ss / float64(len(v)))
	return s
}

// WorstSite is one of the sites least likely to be in spec (Analysis.Worst),
// in the map summary.
type WorstSite struct {
	Rank     int     `json:"rank"`
	Name     string  `json:"name"`
	Section  string  `json:"section"`
	XM       float64 `json:"x_m"`
	YM       float64 `json:"y_m"`
	AngleRad float64 `json:"angle_rad"`
	// OffsetM is the mean offset of the upper trace against the lower, the
	// section's design offset included; OffsetFromDesignM excludes it (the
	// misregistration alone).
	OffsetM           float64 `json:"offset_m"`
	OffsetFromDesignM float64 `json:"offset_from_design_m"`
	SigmaM            float64 `json:"sigma_m"`
	CouplingDB        float64 `json:"coupling_db"`
	DriftDB           float64 `json:"drift_db"`
	MarginDB          float64 `json:"margin_db"`
	InSpec            bool    `json:"in_spec"`
	PInSpec           float64 `json:"p_in_spec"`
	AlongM            float64 `json:"along_m"`
	Coupling3Lo       float64 `json:"coupling_minus3sigma_db"`
	Coupling3Hi       float64 `json:"coupling_plus3sigma_db"`
	// DriftSources splits DriftDB into registration and the variation
	// terms; set only when the job has process terms.
	DriftSources *DriftSources `json:"drift_sources,omitempty"`
}

// SectionSummary is one section's line of the map summary.
type SectionSummary struct {
	Name  string `json:"name"`
	Sites int    `json:"sites"`
	// InSpec counts the sites whose mean offset is in the allowed interval;
	// ExpectedInSpec is the sum of their probabilities of being in spec, and
	// LowestPInSpec the smallest of them.
	InSpec           int     `json:"in_spec"`
	ExpectedInSpec   float64 `json:"expected_in_spec"`
	LowestPInSpec    float64 `json:"lowest_p_in_spec"`
	FrequencyHz      float64 `json:"frequency_hz"`
	LengthM          float64 `json:"length_m"`
	SpecCouplingDB   float64 `json:"spec_coupling_db"`
	SpecToleranceDB  float64 `json:"spec_tolerance_db"`
	DesignOffsetM    float64 `json:"design_offset_m"`
	NominalCoupling  float64 `json:"nominal_coupling_db"`
	CurveFromCache   bool    `json:"curve_from_cache"`
	CurveOffsetLowM  float64 `json:"curve_offset_low_m"`
	CurveOffsetHighM float64 `json:"curve_offset_high_m"`
	// AllowedLowM and AllowedHighM are the allowed interval of offsets
	// (design offset included); null when the design is out of spec.
	AllowedLowM  *float64 `json:"allowed_low_m"`
	AllowedHighM *float64 `json:"allowed_high_m"`
	// WorstOffsetFromDesignM is the site mean offset farthest from the
	// design offset (design offset excluded, with its sign).
	WorstOffsetFromDesignM float64 `json:"worst_offset_from_design_m"`
	WorstDriftDB           float64 `json:"worst_drift_db"`
}

// MapSummary is the summary of a drift map (summary.json).
type MapSummary struct {
	Title string `json:"title"`
	Job   string `json:"job"`
	Sites int    `json:"sites"`
	// InSpec counts the sites in spec at their mean (the mean offset, and
	// with process terms every term at its mean at the site: InSpecAt
	// says which); ExpectedInSpec is the expected number in spec, the sum
	// of every site's probability.
	InSpec         int     `json:"in_spec"`
	InSpecAt       string  `json:"in_spec_at"`
	ExpectedInSpec float64 `json:"expected_in_spec"`
	// OffsetM ranges over the sites' mean offsets with each section's
	// design offset included; OffsetFromDesignM with it excluded.
	OffsetM           MinMaxRMS        `json:"offset_m"`
	OffsetFromDesignM MinMaxRMS        `json:"offset_from_design_m"`
	DriftDB           MinMaxRMS        `json:"drift_db"`
	Sections          []SectionSummary `json:"sections"`
	Worst             []WorstSite      `json:"worst"`
	Notes             []string         `json:"notes"`
	// Linearity checks the first-order process model at the worst sites
	// (Analysis.CheckLinearity); absent without process terms.
	Linearity *Linearity `json:"linearity,omitempty"`
}

// What MapSummary.InSpec judges a site at.
const (
	InSpecAtOffset        = "mean offset"
	InSpecAtOffsetProcess = "mean offset and mean process"
)

// InSpecPhrase is the count of sites in spec at their mean in words, for
// the headlines beside the expected count: "216 in spec at the mean
// offset".
func (s *MapSummary) InSpecPhrase() string {
	at := s.InSpecAt
	if at == "" {
		at = InSpecAtOffset
	}
	return fmt.Sprintf("%d in spec at the %s", s.InSpec, at)
}

// Summary notes, in summary.json and under the map's table.
const (
	NoteOffsets = "offset_m includes each section's design offset; offset_from_design_m excludes it"
	NoteWorst   = "worst: the sites least likely to be in spec (lowest p_in_spec, then largest |drift|)"
)

// Summary returns the map summary with the n sites least likely to be in
// spec (Worst).
func (a *Analysis) Summary(n int) *MapSummary {
	s := &MapSummary{Title: a.In.Title, Job: a.In.Source, Sites: len(a.Sites), InSpec: a.InSpec(), InSpecAt: InSpecAtOffset,
		ExpectedInSpec: a.ExpectedInSpec(), Notes: []string{NoteOffsets, NoteWorst}}
	if !a.In.Process.Empty() {
		s.InSpecAt = InSpecAtOffsetProcess
	}
	off := make([]float64, len(a.Sites))
	mis := make([]float64, len(a.Sites))
	drift := make([]float64, len(a.Sites))
	for i := range a.Sites {
		off[i], mis[i], drift[i] = a.Sites[i].Offset, a.Sites[i].Stats.MeanAcross, a.Sites[i].Drift
	}
	s.OffsetM, s.OffsetFromDesignM, s.DriftDB = Summarize(off), Summarize(mis), Summarize(drift)
	for i, sec := range a.In.Sections {
		c := a.Curves[i]
		if c == nil {
			continue
		}
		ss := SectionSummary{Name: sec.Name, FrequencyHz: sec.Frequency, LengthM: c.Curve.Length,
			SpecCouplingDB: sec.Spec.Coupling, SpecToleranceDB: sec.Spec.Tolerance,
			DesignOffsetM: sec.NominalOffset(), NominalCoupling: c.Nominal, CurveFromCache: c.FromCache,
			LowestPInSpec: 1}
		ss.CurveOffsetLowM, ss.CurveOffsetHighM = c.Curve.Range()
		if !c.Allowed.Empty() {
			lo, hi := c.Allowed.Lo, c.Allowed.Hi
			ss.AllowedLowM, ss.AllowedHighM = &lo, &hi
		}
		for k := range a.Sites {
			r := &a.Sites[k]
			if r.Section != i {
				continue
			}
			ss.Sites++
			if r.InSpec {
				ss.InSpec++
			}
			ss.ExpectedInSpec += r.PInSpec
			ss.LowestPInSpec = math.Min(ss.LowestPInSpec, r.PInSpec)
			if m := r.Stats.MeanAcross; math.Abs(m) > math.Abs(ss.WorstOffsetFromDesignM) {
				ss.WorstOffsetFromDesignM = m
			}
			if math.Abs(r.Drift) > math.Abs(ss.WorstDriftDB) {
				ss.WorstDriftDB = r.Drift
			}
		}
		s.Sections = append(s.Sections, ss)
	}
	for rank, k := range a.Worst(n) {
		r := &a.Sites[k]
		s.Worst = append(s.Worst, WorstSite{Rank: rank + 1, Name: r.Site.Name, Section: a.In.Sections[r.Section].Name,
			XM: r.Site.Pos.X, YM: r.Site.Pos.Y, AngleRad: r.Site.Angle, OffsetM: r.Offset, OffsetFromDesignM: r.Stats.MeanAcross,
			SigmaM: r.Stats.SDAcross, CouplingDB: r.Coupling, DriftDB: r.Drift, MarginDB: r.Margin, InSpec: r.InSpec,
			PInSpec: r.PInSpec, AlongM: r.Along, Coupling3Lo: r.CouplingLo, Coupling3Hi: r.CouplingHi})
		a.splitWorst(&s.Worst[len(s.Worst)-1], r) // variation.go
	}
	s.Linearity = a.linearity
	return s
}

// WindowUsed returns the share of the allowed interval of curve c that the
// offsets mean ± 3σ reach on their worse side: 0 when they sit at the design
// offset, 1 when mean ± 3σ touches an end of the interval, above 1 beyond it.
// It puts sections of different windows on one scale (a 3 dB hybrid that
// tolerates ±3 mil beside a 20 dB coupler that tolerates ±1 mil). It is +Inf
// when the design is out of spec (an empty interval).
func WindowUsed(c *Curve, mean, sd float64) float64 {
	iv := c.Allowed
	if iv.Empty() {
		return math.Inf(1)
	}
	d := c.Section.NominalOffset()
	hi, lo := iv.Hi-d, d-iv.Lo
	u := 0.0
	if hi > 0 {
		u = math.Max(u, (mean+3*sd-d)/hi)
	}
	if lo > 0 {
		u = math.Max(u, (d-(mean-3*sd))/lo)
	}
	return u
}

// WindowUsed returns the share of its allowed interval the site's offsets
// reach (WindowUsed of its section's curve).
func (a *Analysis) WindowUsed(k int) float64 {
	r := &a.Sites[k]
	return WindowUsed(a.Curves[r.Section], r.Offset, r.Stats.SDAcross)
}

// WindowUsedAt returns the share of its allowed interval that a site at p
// with lines along u would reach, by the evaluator's own offset statistics.
func (e Evaluator) WindowUsedAt(p, u panel.Vec) float64 {
	return WindowUsed(e.Curve, e.Value(Offset, p, u), e.Value(Sigma, p, u))
}

// WriteSitesCSV writes one row per site (sites.csv): position, offsets,
// coupling, drift, margin, in spec (of the mean offset), the coupling at ±3σ
// and the probability of being in spec.
func (a *Analysis) WriteSitesCSV(w io.Writer, u unit.Output) error {
	cw := csv.NewWriter(w)
	L := "[" + u.Length() + "]"
	P := "[" + u.Panel() + "]"
	header := []string{"site", "part", "array", "i", "j", "coupler", "section",
		"x " + P, "y " + P, "angle [deg]",
		"offset_across " + L, "sigma_across " + L, "offset_along " + L, "sigma_along " + L,
		"coupling [dB]", "drift [dB]", "margin [dB]", "in_spec",
		"coupling_minus3sigma [dB]", "coupling_plus3sigma [dB]", "p_in_spec"}
	header = append(header, a.processHeader()...) // variation.go; none without process terms
	if err := cw.Write(header); err != nil {
		return err
	}
	rec := make([]string, len(header))
	for i := range a.Sites {
		r := &a.Sites[i]
		s := r.Site
		rec = rec[:0]
		rec = append(rec, s.Name, a.In.PartName(s), arrayName(&a.In.Layout, s.Array), strconv.Itoa(s.I+1), strconv.Itoa(s.J+1), s.Coupler,
			a.In.Sections[r.Section].Name,
			fixed(s.Pos.X/u.PanelSI(), 4), fixed(s.Pos.Y/u.PanelSI(), 4), fixed(s.Angle*180/math.Pi, 2),
			fixed(r.Offset/u.LengthSI(), 4), fixed(r.Stats.SDAcross/u.LengthSI(), 4), fixed(r.Along/u.LengthSI(), 4), fixed(r.Stats.SDAlong/u.LengthSI(), 4),
			fixed(r.Coupling, 4), fixed(r.Drift, 4), fixed(r.Margin, 4), strconv.FormatBool(r.InSpec),
			fixed(r.CouplingLo, 4), fixed(r.CouplingHi, 4), fixed(r.PInSpec, 6))
		rec = a.processColumns(rec, i)
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// arrayName names array i of l in sites.csv: its name ("a1" without one),
// or "" for a site read from a placement file (i < 0).
func arrayName(l *panel.Layout, i int) string {
	if i < 0 {
		return ""
	}
	return l.ArrayName(i)
}
