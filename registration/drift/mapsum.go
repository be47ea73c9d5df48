package drift

import (
	"encoding/csv"
	"github.com/regdrift/regdrift/panel/unit"
	"io"
	"math"
	"strconv"
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

// WorstSite is one of the sites with the least margin, in the map summary.
type WorstSite struct {
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
	// DriftSources splits DriftDB into registration and the variation
	// terms; set only when the job has process terms.
	DriftSources *DriftSources `json:"drift_sources,omitempty"`
}

// SectionSummary is one section's line of the map summary.
type SectionSummary struct {
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

// MapSummary is the summary of a drift map (summary.json).
type MapSummary struct {
	Title    string           `json:"title"`
	Job      string           `json:"job"`
	Sites    int              `json:"sites"`
	InSpec   int              `json:"in_spec"`
	OffsetM  MinMaxRMS        `json:"offset_m"`
	DriftDB  MinMaxRMS        `json:"drift_db"`
	Sections []SectionSummary `json:"sections"`
	Worst    []WorstSite      `json:"worst"`
	// Linearity checks the first-order process model at the worst sites
	// (Analysis.CheckLinearity); absent without process terms.
	Linearity *Linearity `json:"linearity,omitempty"`
}

// Summary returns the map summary with the n sites of least margin.
func (a *Analysis) Summary(n int) *MapSummary {
	s := &MapSummary{Title: a.In.Title, Job: a.In.Source, Sites: len(a.Sites), InSpec: a.InSpec()}
	off := make([]float64, len(a.Sites))
	drift := make([]float64, len(a.Sites))
	for i := range a.Sites {
		off[i], drift[i] = a.Sites[i].Offset, a.Sites[i].Drift
	}
	s.OffsetM, s.DriftDB = Summarize(off), Summarize(drift)
	for i, sec := range a.In.Sections {
		c := a.Curves[i]
		if c == nil {
			continue
		}
		ss := SectionSummary{Name: sec.Name, FrequencyHz: sec.Frequency, LengthM: c.Curve.Length,
			SpecCouplingDB: sec.Spec.Coupling, SpecToleranceDB: sec.Spec.Tolerance,
			DesignOffsetM: sec.NominalOffset(), NominalCoupling: c.Nominal, CurveFromCache: c.FromCache}
		ss.CurveOffsetLowM, ss.CurveOffsetHighM = c.Curve.Range()
		for k := range a.Sites {
			if a.Sites[k].Section == i {
				ss.Sites++
				if a.Sites[k].InSpec {
					ss.InSpec++
				}
			}
		}
		s.Sections = append(s.Sections, ss)
	}
	for rank, k := range a.Worst(n) {
		r := &a.Sites[k]
		s.Worst = append(s.Worst, WorstSite{Rank: rank + 1, Name: r.Site.Name, Section: a.In.Sections[r.Section].Name,
			XM: r.Site.Pos.X, YM: r.Site.Pos.Y, AngleRad: r.Site.Angle, OffsetM: r.Offset, SigmaM: r.Stats.SDAcross,
			CouplingDB: r.Coupling, DriftDB: r.Drift, MarginDB: r.Margin, InSpec: r.InSpec, AlongM: r.Along,
			Coupling3Lo: r.CouplingLo, Coupling3Hi: r.CouplingHi})
		a.splitWorst(&s.Worst[len(s.Worst)-1], r) // variation.go
	}
	s.Linearity = a.linearity
	return s
}

// WriteSitesCSV writes one row per site (sites.csv): position, offsets,
// coupling, drift, margin, in spec and the coupling at ±3σ.
func (a *Analysis) WriteSitesCSV(w io.Writer, u unit.Output) error {
	cw := csv.NewWriter(w)
	L := "[" + u.Length() + "]"
	P := "[" + u.Panel() + "]"
	header := []string{"site", "part", "array", "i", "j", "coupler", "section",
		"x " + P, "y " + P, "angle [deg]",
		"offset_across " + L, "sigma_across " + L, "offset_along " + L, "sigma_along " + L,
		"coupling [dB]", "drift [dB]", "margin [dB]", "in_spec",
		"coupling_minus3sigma [dB]", "coupling_plus3sigma [dB]"}
	header = append(header, a.processHeader()...) // variation.go; none without process terms
	if err := cw.Write(header); err != nil {
		return err
	}
	rec := make([]string, len(header))
	for i := range a.Sites {
		r := &a.Sites[i]
		s := r.Site
		rec = rec[:0]
		rec = append(rec, s.Name, a.In.PartName(s), strconv.Itoa(s.Array+1), strconv.Itoa(s.I+1), strconv.Itoa(s.J+1), s.Coupler,
			a.In.Sections[r.Section].Name,
			fixed(s.Pos.X/u.PanelSI(), 4), fixed(s.Pos.Y/u.PanelSI(), 4), fixed(s.Angle*180/math.Pi, 2),
			fixed(r.Offset/u.LengthSI(), 4), fixed(r.Stats.SDAcross/u.LengthSI(), 4), fixed(r.Along/u.LengthSI(), 4), fixed(r.Stats.SDAlong/u.LengthSI(), 4),
			fixed(r.Coupling, 4), fixed(r.Drift, 4), fixed(r.Margin, 4), strconv.FormatBool(r.InSpec),
			fixed(r.CouplingLo, 4), fixed(r.CouplingHi, 4))
		rec = a.processColumns(rec, i)
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
