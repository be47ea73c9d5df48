package drift

import (
	"encoding/csv"
	"github.com/regdrift/regdrift/panel/unit"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/regdrift/regdrift/registration"
)

// YieldSummary is the summary of a yield study (yield.json).
type YieldSummary struct {
	Job                 string         `json:"job"`
	Trials              int            `json:"trials"`
	Seed                uint64         `json:"seed"`
	Sites               int            `json:"sites"`
	Parts               int            `json:"parts"`                  // products; coupon parts are not counted
	Coupons             int            `json:"coupon_parts,omitempty"` // parts of product = false arrays
	SiteYieldMean       float64        `json:"site_yield_mean"`
	SiteYieldMeanClosed float64        `json:"site_yield_mean_closed"`
	PartYieldMean       float64        `json:"part_yield_mean"`
	GoodPartsPerPanel   GoodParts      `json:"good_parts_per_panel"`
	WorstParts          []WorstPart    `json:"worst_parts"`
	WorstSites          []YieldSite    `json:"worst_sites"`
	Arrays              []YieldArray   `json:"arrays"`
	Sections            []YieldSection `json:"sections"`
	Budget              Budget         `json:"budget"`
	// CouplingBudget ranks registration and variation terms together by
	// their share of the coupling variance; absent without variation terms.
	CouplingBudget *CouplingBudget `json:"coupling_budget,omitempty"`
	Orientation    []Orient        `json:"orientation,omitempty"`
	// TurnMinGain is the smallest rise in mean site yield for which the
	// orientation study recommends a turn (registration.TurnThreshold).
	TurnMinGain float64  `json:"turn_min_gain"`
	Warnings    []string `json:"warnings,omitempty"`
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

// YieldArray is one array's line of the yield summary (placements from
// files form one group named "placements"). A coupon array (product = false)
// is reported like any other, but its parts are in none of the panel's part
// counts. The Monte Carlo figures are nil in a closed-form comparison.
type YieldArray struct {
	Name    string `json:"name"`
	Part    string `json:"part"`
	Product bool   `json:"product"`
	Parts   int    `json:"parts"`
	Sites   int    `json:"sites"`
	// SiteYieldMean and SiteYieldMeanClosed are the mean Monte Carlo and
	// closed-form yields of the array's sites.
	SiteYieldMean       *float64 `json:"site_yield_mean"`
	SiteYieldMeanClosed float64  `json:"site_yield_mean_closed"`
	// PartYieldMean is the mean Monte Carlo yield of its parts, and
	// GoodPartsMean the expected number of them in spec per panel (for a
	// coupon array: strips in spec, not counted as good parts).
	PartYieldMean *float64 `json:"part_yield_mean"`
	GoodPartsMean *float64 `json:"good_parts_mean"`
	// PartYieldBounds and GoodPartsBounds bound the same from the
	// closed-form site yields alone (Analysis.PartBounds).
	PartYieldBounds [2]float64 `json:"part_yield_bounds"`
	GoodPartsBounds [2]float64 `json:"good_parts_bounds"`
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
	Array           int     `json:"array"` // 1-based position in the job
	Name            string  `json:"name"`
	Part            string  `json:"part"`
	Rotate          int     `json:"rotate_deg"`
	MeanYield       float64 `json:"site_yield_mean"`
	MeanYieldTurned float64 `json:"site_yield_mean_turned"`
	WorstYield      float64 `json:"site_yield_worst"`
	WorstTurned     float64 `json:"site_yield_worst_turned"`
	RMSOffsetM      float64 `json:"rms_offset_m"`
	RMSOffsetTurned float64 `json:"rms_offset_turned_m"`
	// Gain is MeanYieldTurned − MeanYield; a turn is recommended when it
	// exceeds Threshold, the larger of MinGain and Resolution (the Monte
	// Carlo resolution of the array's mean site yield, 0 without a run).
	Gain       float64 `json:"gain"`
	MinGain    float64 `json:"min_gain"`
	Resolution float64 `json:"mc_resolution"`
	Threshold  float64 `json:"threshold"`
	TurnHelps  bool    `json:"turn_helps"`
}

// Verdict says what the orientation study recommends: "turn" when the gain
// exceeds the threshold, "keep" when turning loses more than it, "either"
// in between.
func (o Orient) Verdict() string {
	switch {
	case o.TurnHelps:
		return "turn"
	case o.Gain >= -o.Threshold:
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
// analysis's yield problem, with the orientation study's default threshold.
func (a *Analysis) YieldSummary(res *registration.MCResult, seed uint64) *YieldSummary {
	return a.YieldSummaryTurn(res, seed, 0)
}

// YieldSummaryTurn is YieldSummary with turnGain the smallest rise in mean
// site yield for which the orientation study recommends a turn (0 means
// registration.OrientMinGain).
func (a *Analysis) YieldSummaryTurn(res *registration.MCResult, seed uint64, turnGain float64) *YieldSummary {
	in, y := a.In, a.Yield
	sum := &YieldSummary{Job: in.Source, Trials: res.Trials, Seed: seed, Sites: len(in.Sites), Parts: y.Products(),
		Coupons: len(y.Coupons), Warnings: a.Warnings()}
	// Count the good site-trials, then divide once: adding SiteYield/n n
	// times reported 1.0000000000000107 for a panel where every site passed.
	var good float64
	for i := range a.Sites {
		good += float64(res.SiteGood[i])
	}
	if len(a.Sites) > 0 && res.Trials > 0 {
		sum.SiteYieldMean = Clamp01(good / (float64(res.Trials) * float64(len(a.Sites))))
	}
	sum.SiteYieldMeanClosed = a.MeanPInSpec()
	mean := res.MeanGoodParts()
	if y.Products() > 0 {
		sum.PartYieldMean = mean / float64(y.Products())
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
	// Coupon strips are reported per array, never among the worst parts.
	parts := make([]int, 0, y.Products())
	for i := range in.Instances {
		if !in.Instances[i].Coupon {
			parts = append(parts, i)
		}
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
		ysec.SiteYieldMean = Clamp01(ysec.SiteYieldMean / float64(ysec.Sites))
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
	sum.CouplingBudget = a.couplingBudget() // variation_budget.go
	sum.Arrays = a.yieldArrays(res)
	sum.TurnMinGain = registration.TurnThreshold(turnGain, 0)
	sum.Orientation = a.OrientationMC(res, turnGain)
	return sum
}

// yieldArrays returns one line per array that has sites, then one for the
// placements if there are any; the Monte Carlo figures come from res, and
// are left nil when res is nil.
func (a *Analysis) yieldArrays(res *registration.MCResult) []YieldArray {
	in := a.In
	na := len(in.Layout.Arrays)
	rows := make([]YieldArray, na+1)
	for i, ar := range in.Layout.Arrays {
		rows[i] = YieldArray{Name: in.Layout.ArrayName(i), Part: ar.Part, Product: !ar.Coupon}
	}
	rows[na] = YieldArray{Name: "placements", Product: true}
	group := func(array int) int {
		if array < 0 {
			return na
		}
		return array
	}
	mc := make([][3]float64, len(rows)) // per group: Σ site yield, Σ part yield
	lo, hi := a.PartBounds()
	for k := range in.Instances {
		g := group(in.Instances[k].Array)
		rows[g].Parts++
		rows[g].GoodPartsBounds[0] += lo[k]
		rows[g].GoodPartsBounds[1] += hi[k]
		if res != nil {
			mc[g][1] += res.PartYield(k)
		}
	}
	for i := range a.Sites {
		g := group(a.Sites[i].Site.Array)
		rows[g].Sites++
		rows[g].SiteYieldMeanClosed += a.Sites[i].PInSpec
		if res != nil {
			mc[g][0] += res.SiteYield(i)
		}
	}
	var out []YieldArray
	for gi, g := range rows {
		if g.Sites == 0 {
			continue
		}
		g.SiteYieldMeanClosed /= float64(g.Sites)
		if g.Parts > 0 {
			g.PartYieldBounds = [2]float64{g.GoodPartsBounds[0] / float64(g.Parts), g.GoodPartsBounds[1] / float64(g.Parts)}
		}
		if res != nil {
			sy, good := mc[gi][0]/float64(g.Sites), mc[gi][1]
			py := 0.0
			if g.Parts > 0 {
				py = good / float64(g.Parts)
			}
			g.SiteYieldMean, g.PartYieldMean, g.GoodPartsMean = &sy, &py, &good
		}
		out = append(out, g)
	}
	return out
}

// Orientation runs the quarter-turn study for every array that has sites,
// on the closed form alone, with the default threshold.
func (a *Analysis) Orientation() []Orient { return a.OrientationMC(nil, 0) }

// OrientationMC runs the quarter-turn study for every array that has sites:
// a turn is recommended when it raises the array's mean site yield by more
// than minGain (0 means registration.OrientMinGain) and by more than the
// resolution of the Monte Carlo run res (none when res is nil).
func (a *Analysis) OrientationMC(res *registration.MCResult, minGain float64) []Orient {
	var out []Orient
	// Judge each site, as placed and turned, by the one evaluator: with
	// process variation terms its coupling depends on more than the offset.
	var prob func(int, *registration.Row) float64
	if a.proc != nil {
		ev := make([]Evaluator, len(a.Curves))
		for i := range a.Curves {
			if a.used[i] {
				ev[i] = a.Evaluator(i)
			}
		}
		prob = func(i int, row *registration.Row) float64 {
			r := &a.Sites[i]
			return ev[r.Section].EvalSite(*row, r.Site.Pos).PInSpec
		}
	}
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
		o := a.Yield.OrientBy(sites, prob)
		var resolution float64
		if res != nil {
			resolution = res.GroupResolution(sites)
		}
		out = append(out, Orient{Array: ai + 1, Name: a.In.Layout.ArrayName(ai), Part: ar.Part, Rotate: ar.Rotate,
			MeanYield: o.AsPlaced.Mean, MeanYieldTurned: o.Turned.Mean,
			WorstYield: o.AsPlaced.Worst, WorstTurned: o.Turned.Worst,
			RMSOffsetM: o.AsPlaced.RMSAcross, RMSOffsetTurned: o.Turned.RMSAcross,
			Gain: o.Gain(), MinGain: registration.TurnThreshold(minGain, 0), Resolution: resolution,
			Threshold: registration.TurnThreshold(minGain, resolution), TurnHelps: o.Recommend(minGain, resolution)})
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
	if err := cw.Write([]string{"scope", "rank", "contributor", "term", "share", "sd [" + u.Length() + "]", "source", "sd [dB]"}); err != nil {
		return err
	}
	for _, part := range []struct {
		scope string
		rows  []BudgetRow
	}{{"worst site: " + sum.Budget.WorstSite, sum.Budget.AtWorst}, {"panel", sum.Budget.Panel}} {
		for k, r := range part.rows {
			if err := cw.Write([]string{part.scope, strconv.Itoa(k + 1), r.Contributor, r.Term,
				fixed(r.Share, 5), fixed(r.SDM/u.LengthSI(), 4), "offset", ""}); err != nil {
				return err
			}
		}
	}
	// With variation terms, the coupling budget follows: registration and
	// variation terms together by their share of the coupling variance.
	if cb := sum.CouplingBudget; cb != nil {
		for _, part := range []struct {
			scope string
			rows  []CouplingShare
		}{{"coupling, worst site: " + cb.WorstSite, cb.AtWorst}, {"coupling, panel", cb.Panel}} {
			for k, r := range part.rows {
				name, term := r.Name, ""
				if i := strings.LastIndex(name, ": "); i >= 0 && r.Source == "registration" {
					name, term = name[:i], name[i+2:]
				}
				if err := cw.Write([]string{part.scope, strconv.Itoa(k + 1), name, term,
					fixed(r.Share, 5), "", r.Source, fixed(r.SDDB, 5)}); err != nil {
					return err
				}
			}
		}
	}
	cw.Flush()
	return cw.Error()
}
