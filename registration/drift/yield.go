package drift

import (
	"encoding/csv"
	"github.com/regdrift/regdrift/panel/unit"
	"io"
	"math"
	"sort"
	"strconv"

	"github.com/regdrift/regdrift/registration"
)

// YieldSummary is the summary of a yield study (yield.json).
type YieldSummary struct {
	Job                 string         `json:"job"`
	Trials              int            `json:"trials"`
	Seed                uint64         `json:"seed"`
	Sites               int            `json:"sites"`
	Parts               int            `json:"parts"`
	SiteYieldMean       float64        `json:"site_yield_mean"`
	SiteYieldMeanClosed float64        `json:"site_yield_mean_closed"`
	PartYieldMean       float64        `json:"part_yield_mean"`
	GoodPartsPerPanel   GoodParts      `json:"good_parts_per_panel"`
	WorstParts          []WorstPart    `json:"worst_parts"`
	WorstSites          []YieldSite    `json:"worst_sites"`
	Sections            []YieldSection `json:"sections"`
	Budget              Budget         `json:"budget"`
	Orientation         []Orient       `json:"orientation,omitempty"`
	Warnings            []string       `json:"warnings,omitempty"`
}

// GoodParts is the distribution of good parts per panel over the trials.
type GoodParts struct {
	Mean float64 `json:"mean"`
	SD   float64 `json:"sd"`
	Min  int     `json:"min"`
	P05  int     `json:"p05"`
	P50  int     `json:"p50"`
	P95  int     `json:"p95"`
	Max  int     `json:"max"`
}

// WorstPart is one of the parts of lowest Monte Carlo yield.
type WorstPart struct {
	Name           string  `json:"name"`
	PartYield      float64 `json:"part_yield"`
	PartYieldSE    float64 `json:"part_yield_se"`
	WorstSite      string  `json:"worst_site"`
	WorstSiteYield float64 `json:"worst_site_yield"`
}

// YieldSite is one of the sites of lowest closed-form yield.
type YieldSite struct {
	Name     string  `json:"name"`
	XM       float64 `json:"x_m"`
	YM       float64 `json:"y_m"`
	PClosed  float64 `json:"p_closed"`
	PMC      float64 `json:"p_mc"`
	PMCSE    float64 `json:"p_mc_se"`
	OffsetM  float64 `json:"offset_mean_m"`
	OffsetSD float64 `json:"offset_sd_m"`
}

// YieldSection is one section's line of the yield summary.
type YieldSection struct {
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

// Budget is the error budget at the worst site and over the panel.
type Budget struct {
	WorstSite string      `json:"worst_site"`
	AtWorst   []BudgetRow `json:"worst_site_terms"`
	Panel     []BudgetRow `json:"panel_terms"`
}

// BudgetRow is one contributor term's share of the across-offset variance.
type BudgetRow struct {
	Contributor string  `json:"contributor"`
	Term        string  `json:"term"`
	Share       float64 `json:"share"`
	SDM         float64 `json:"sd_m"`
}

// Orient is the quarter-turn study of one array.
type Orient struct {
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

// Verdict says what the orientation study recommends: "turn", "either" or
// "keep".
func (o Orient) Verdict() string {
	switch {
	case o.TurnHelps:
		return "turn"
	case o.MeanYieldTurned-o.MeanYield > -registration.OrientMinGain:
		return "either"
	}
	return "keep"
}

// WorstYieldSite returns the site with the lowest closed-form yield (the
// largest offset sigma breaking ties).
func (a *Analysis) WorstYieldSite() int {
	w, wp, wsd := 0, math.Inf(1), 0.0
	for i := range a.Sites {
		p := a.Sites[i].PInSpec
		sd := a.Sites[i].Stats.SDAcross
		if p < wp || (p == wp && sd > wsd) {
			w, wp, wsd = i, p, sd
		}
	}
	return w
}

func (a *Analysis) budgetRows(shares []registration.Share, total float64) []BudgetRow {
	var out []BudgetRow
	for _, s := range shares {
		term := "site_sigma"
		if s.Term >= 0 {
			term = s.Term.String()
		}
		out = append(out, BudgetRow{Contributor: a.Model.Contributors[s.Contributor].Name, Term: term,
			Share: s.Variance / total, SDM: math.Sqrt(s.Variance)})
	}
	return out
}

// YieldSummary summarises a Monte Carlo run res (drawn with seed) of the
// analysis's yield problem.
func (a *Analysis) YieldSummary(res *registration.MCResult, seed uint64) *YieldSummary {
	in, y := a.In, a.Yield
	sum := &YieldSummary{Job: in.Source, Trials: res.Trials, Seed: seed, Sites: len(in.Sites), Parts: len(in.Instances),
		Warnings: a.Warnings()}
	for i := range a.Sites {
		sum.SiteYieldMean += res.SiteYield(i) / float64(len(a.Sites))
		sum.SiteYieldMeanClosed += a.Sites[i].PInSpec / float64(len(a.Sites))
	}
	mean := res.MeanGoodParts()
	if len(in.Instances) > 0 {
		sum.PartYieldMean = mean / float64(len(in.Instances))
	}
	var v float64
	for k, c := range res.GoodParts {
		v += float64(c) * (float64(k) - mean) * (float64(k) - mean)
	}
	sum.GoodPartsPerPanel = GoodParts{Mean: mean, SD: math.Sqrt(v / float64(res.Trials)),
		Min: res.GoodPartsQuantile(0), P05: res.GoodPartsQuantile(0.05), P50: res.GoodPartsQuantile(0.5),
		P95: res.GoodPartsQuantile(0.95), Max: res.GoodPartsQuantile(1)}

	// Worst parts by Monte Carlo part yield, then by index for a stable order.
	sitesOf := make([][]int, len(in.Instances))
	for i, s := range in.Sites {
		if s.Instance >= 0 {
			sitesOf[s.Instance] = append(sitesOf[s.Instance], i)
		}
	}
	parts := make([]int, len(in.Instances))
	for i := range parts {
		parts[i] = i
	}
	sort.SliceStable(parts, func(p, q int) bool { return res.PartGood[parts[p]] < res.PartGood[parts[q]] })
	for _, p := range parts[:min(10, len(parts))] {
		wp := WorstPart{Name: in.Instances[p].Name, PartYield: res.PartYield(p), WorstSiteYield: 1}
		q := wp.PartYield
		wp.PartYieldSE = math.Sqrt(q * (1 - q) / float64(res.Trials))
		for _, i := range sitesOf[p] {
			if py := res.SiteYield(i); py <= wp.WorstSiteYield {
				wp.WorstSite, wp.WorstSiteYield = in.Sites[i].Name, py
			}
		}
		sum.WorstParts = append(sum.WorstParts, wp)
	}
	idx := make([]int, len(a.Sites))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(p, q int) bool { return a.Sites[idx[p]].PInSpec < a.Sites[idx[q]].PInSpec })
	for _, i := range idx[:min(10, len(idx))] {
		r := &a.Sites[i]
		sum.WorstSites = append(sum.WorstSites, YieldSite{Name: r.Site.Name, XM: r.Site.Pos.X, YM: r.Site.Pos.Y,
			PClosed: r.PInSpec, PMC: res.SiteYield(i), PMCSE: res.SiteSE(i), OffsetM: r.Offset, OffsetSD: r.Stats.SDAcross})
	}
	for si, s := range in.Sections {
		c := a.Curves[si]
		if c == nil || !a.used[si] {
			continue
		}
		ysec := YieldSection{Name: s.Name, NominalCoupling: c.Nominal, DesignOffsetM: s.NominalOffset(), DesignInSpec: c.DesignInSpec}
		if c.DesignInSpec {
			lo, hi := c.Allowed.Lo, c.Allowed.Hi
			ysec.AllowedLowM, ysec.AllowedHighM = &lo, &hi
			ysec.LowClipped, ysec.HighClipped = c.Limits.Clipped[0], c.Limits.Clipped[1]
		}
		for i := range a.Sites {
			if a.Sites[i].Section == si {
				ysec.Sites++
				ysec.SiteYieldMean += res.SiteYield(i)
			}
		}
		ysec.SiteYieldMean /= float64(ysec.Sites)
		sum.Sections = append(sum.Sections, ysec)
	}
	if len(a.Sites) > 0 {
		w := a.WorstYieldSite()
		shares := y.Budget(nil, w)
		registration.SortShares(shares)
		sd := a.Sites[w].Stats.SDAcross
		sum.Budget.WorstSite = in.Sites[w].Name
		sum.Budget.AtWorst = a.budgetRows(shares, sd*sd)
		panelShares := y.PanelBudget()
		var tot float64
		for _, s := range panelShares {
			tot += s.Variance
		}
		sum.Budget.Panel = a.budgetRows(panelShares, tot)
	}
	sum.Orientation = a.Orientation()
	return sum
}

// Orientation runs the quarter-turn study for every array that has sites.
func (a *Analysis) Orientation() []Orient {
	var out []Orient
	for ai, ar := range a.In.Layout.Arrays {
		var sites []int
		for i := range a.Sites {
			if a.Sites[i].Site.Array == ai {
				sites = append(sites, i)
			}
		}
		if len(sites) == 0 {
			continue
		}
		o := a.Yield.Orient(sites)
		out = append(out, Orient{Array: ai + 1, Part: ar.Part, Rotate: ar.Rotate,
			MeanYield: o.AsPlaced.Mean, MeanYieldTurned: o.Turned.Mean,
			WorstYield: o.AsPlaced.Worst, WorstTurned: o.Turned.Worst,
			RMSOffsetM: o.AsPlaced.RMSAcross, RMSOffsetTurned: o.Turned.RMSAcross, TurnHelps: o.Better()})
	}
	return out
}

// WriteYieldCSV writes one row per site (yield.csv): offset statistics, the
// allowed interval, the closed-form and Monte Carlo yields.
func (a *Analysis) WriteYieldCSV(w io.Writer, res *registration.MCResult, u unit.Output) error {
	cw := csv.NewWriter(w)
	pu, lu := "["+u.Panel()+"]", "["+u.Length()+"]"
	if err := cw.Write([]string{"site", "name", "section", "part", "x " + pu, "y " + pu, "angle [deg]",
		"offset_mean " + lu, "offset_sd " + lu, "allowed_low " + lu, "allowed_high " + lu,
		"p_closed", "p_mc", "p_mc_se"}); err != nil {
		return err
	}
	for i := range a.Sites {
		r := &a.Sites[i]
		s := r.Site
		iv := a.Yield.Sites[i].Allowed
		lo, hi := "", ""
		if !iv.Empty() {
			lo, hi = fixed(iv.Lo/u.LengthSI(), 4), fixed(iv.Hi/u.LengthSI(), 4)
		}
		if err := cw.Write([]string{strconv.Itoa(i + 1), s.Name, s.Section, a.In.PartName(s),
			fixed(s.Pos.X/u.PanelSI(), 4), fixed(s.Pos.Y/u.PanelSI(), 4), fixed(s.Angle*180/math.Pi, 2),
			fixed(r.Offset/u.LengthSI(), 4), fixed(r.Stats.SDAcross/u.LengthSI(), 4), lo, hi,
			fixed(r.PInSpec, 6), fixed(res.SiteYield(i), 6), fixed(res.SiteSE(i), 6)}); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteBudgetCSV writes the error budget rows of sum (budget.csv).
func WriteBudgetCSV(w io.Writer, sum *YieldSummary, u unit.Output) error {
	cw := csv.NewWriter(w)
	if err := cw.Write([]string{"scope", "rank", "contributor", "term", "share", "sd [" + u.Length() + "]"}); err != nil {
		return err
	}
	for _, part := range []struct {
		scope string
		rows  []BudgetRow
	}{{"worst site: " + sum.Budget.WorstSite, sum.Budget.AtWorst}, {"panel", sum.Budget.Panel}} {
		for k, r := range part.rows {
			if err := cw.Write([]string{part.scope, strconv.Itoa(k + 1), r.Contributor, r.Term,
				fixed(r.Share, 5), fixed(r.SDM/u.LengthSI(), 4)}); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}
