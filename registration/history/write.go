package history

import (
	"bufio"
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// TermUnit returns the kind and unit a term is written in: the term table's
// (registration.TermKind.Info), and mil for offsets.
func TermUnit(k registration.TermKind) (unit.Kind, string) {
	info := k.Info()
	if info.Kind == unit.Length {
		return unit.Length, "mil"
	}
	return info.Kind, info.Unit
}

func fixed(v float64, kind unit.Kind, u string, dec int) string {
	if math.IsNaN(v) {
		return ""
	}
	return strconv.FormatFloat(unit.In(v, kind, u), 'f', dec, 64)
}

// signalText lists the rules a row's signals broke, each once, with the
// latest lot that broke it: "WE1 at H053, EWMA at H059".
func signalText(r *TableRow) string {
	var order []Rule
	last := map[Rule]string{}
	for i, s := range r.Signals {
		if _, ok := last[s.Rule]; !ok {
			order = append(order, s.Rule)
		}
		last[s.Rule] = r.SignalLots[i]
	}
	slices.Sort(order)
	parts := make([]string, len(order))
	for i, ru := range order {
		parts[i] = ru.Short() + " at " + last[ru]
	}
	return strings.Join(parts, ", ")
}

// WriteTableCSV writes the scale table as CSV with units in the header.
func WriteTableCSV(w io.Writer, rows []TableRow) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"construction", "role", "axis", "layers", "lots", "last_lot", "last_date",
		"movement [ppm]", "setting [ppm]", "factor", "se [ppm]", "lot_sigma [ppm]", "within_sd [ppm]", "shift"})
	for _, r := range rows {
		cw.Write([]string{r.Construction, r.Role, r.Axis, strings.Join(r.Layers, " "), strconv.Itoa(r.Lots), r.LastLot, r.LastDate,
			fixed(r.Movement, unit.Strain, "ppm", 2), fixed(r.Setting, unit.Strain, "ppm", 2),
			strconv.FormatFloat(1+r.Setting, 'f', 9, 64), fixed(r.SE, unit.Strain, "ppm", 2),
			fixed(r.LotSigma, unit.Strain, "ppm", 2), fixed(r.WithinSD, unit.Strain, "ppm", 2),
			signalText(&r)})
	}
	cw.Flush()
	return cw.Error()
}

// WriteContributors writes the scale table as [[contributor]] blocks a job
// can include: per construction and role, the estimated material movement
// of the next lot as the mean of scale_x and scale_y, and as sigma the
// spread of one panel about it, √(σ_lot² + σ_within²) — the lot-to-lot
// standard deviation of the lot means and the pooled panel-to-panel one
// within a lot (σ_lot already holds σ_within²/n of the lot mean, so the sum
// overstates the spread slightly for lots of few panels).
func WriteContributors(w io.Writer, rows []TableRow, db string) error {
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "# Material movement from the registration history %s, written by regdrift.\n", db)
	bw.WriteString("# Each contributor is one construction and layer role: mean = the EWMA estimate of\n" +
		"# the next lot's movement (the applied artwork scale taken out), sigma = the spread of\n" +
		"# one panel about it (lot to lot and panel to panel). Layers of one role share the\n" +
		"# term (they move together); different roles are independent here. Include this\n" +
		"# file from a job (include = [\"FILE\"]), leave out the job's own movement\n" +
		"# contributors for these layers, and rename the layers to the job's if they differ.\n")
	for i := 0; i+1 < len(rows); i += 2 {
		x, y := rows[i], rows[i+1]
		fmt.Fprintf(bw, "\n[[contributor]]\n")
		fmt.Fprintf(bw, "name   = %s\n", strconv.Quote(fmt.Sprintf("history: %s, %s (%d lots to %s)", x.Construction, x.Role, x.Lots, x.LastDate)))
		q := make([]string, len(x.Layers))
		for j, l := range x.Layers {
			q[j] = strconv.Quote(l)
		}
		fmt.Fprintf(bw, "layers = [%s]\n", strings.Join(q, ", "))
		for _, r := range []TableRow{x, y} {
			sigma := math.Hypot(nan0(r.LotSigma), r.WithinSD)
			fmt.Fprintf(bw, "scale_%s = { mean = \"%s ppm\", sigma = \"%s ppm\" }   # lot to lot %s ppm, within a lot %s ppm\n", r.Axis,
				fixed(r.Movement, unit.Strain, "ppm", 2), fixed(sigma, unit.Strain, "ppm", 2),
				fixed(nan0(r.LotSigma), unit.Strain, "ppm", 2), fixed(r.WithinSD, unit.Strain, "ppm", 2))
		}
	}
	return bw.Flush()
}

func nan0(v float64) float64 {
	if math.IsNaN(v) {
		return 0
	}
	return v
}

// WriteCSV writes the trend: one row per lot with the lot mean, the
// within-lot spread, the individuals and EWMA limits and the signals.
func (t *Trend) WriteCSV(w io.Writer) error {
	kind, u := TermUnit(t.Term)
	name := t.Term.String()
	cw := csv.NewWriter(w)
	h := func(s string) string { return s + " [" + u + "]" }
	cw.Write([]string{"lot", "date", "fits", h(name), h("within_sd"), h("centre"), h("ucl"), h("lcl"), h("ewma"), h("ewma_ucl"), h("ewma_lcl"), "signals"})
	j := 0
	for i, p := range t.Series.Points {
		var rules []string
		for j < len(t.Signals) && t.Signals[j].Index == i {
			rules = append(rules, t.Signals[j].Rule.Short())
			j++
		}
		cw.Write([]string{p.Lot, p.Date, strconv.Itoa(p.N),
			fixed(t.Values[i], kind, u, 3), fixed(p.SD[t.Term], kind, u, 3),
			fixed(t.Chart.Centre, kind, u, 3), fixed(t.Chart.UCL, kind, u, 3), fixed(t.Chart.LCL, kind, u, 3),
			fixed(t.EWMA.Z[i], kind, u, 3), fixed(t.EWMA.UCL[i], kind, u, 3), fixed(t.EWMA.LCL[i], kind, u, 3),
			strings.Join(rules, " ")})
	}
	cw.Flush()
	return cw.Error()
}

// trendJSON is the trend in SI, the unit in the key where there is one
// (strain terms are plain numbers).
type trendJSON struct {
	Construction string      `json:"construction"`
	Role         string      `json:"role"`
	Layer        string      `json:"layer,omitempty"`
	Term         string      `json:"term"`
	Centre       float64     `json:"centre"`
	Sigma        *float64    `json:"sigma"`
	UCL          *float64    `json:"ucl"`
	LCL          *float64    `json:"lcl"`
	Lambda       float64     `json:"ewma_lambda"`
	L            float64     `json:"ewma_l"`
	Lots         []trendLotJ `json:"lots"`
}

type trendLotJ struct {
	Lot      string   `json:"lot"`
	Date     string   `json:"date"`
	Fits     int      `json:"fits"`
	Mean     float64  `json:"mean"`
	WithinSD float64  `json:"within_sd"`
	EWMA     float64  `json:"ewma"`
	EWMAUCL  *float64 `json:"ewma_ucl"`
	EWMALCL  *float64 `json:"ewma_lcl"`
	Signals  []string `json:"signals"`
}

func finite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// JSON returns the trend's numbers for a JSON summary: the term's values
// in SI (the key "term" says which; JSONKey's unit applies to every value).
func (t *Trend) JSON() any {
	k := t.Term
	j := trendJSON{Construction: t.Series.Construction, Role: t.Series.Role, Layer: t.Series.Layer, Term: k.JSONKey(),
		Centre: t.Chart.Centre, Sigma: finite(t.Chart.Sigma), UCL: finite(t.Chart.UCL), LCL: finite(t.Chart.LCL),
		Lambda: t.EWMA.Lambda, L: t.EWMA.L, Lots: make([]trendLotJ, len(t.Values))}
	for i, p := range t.Series.Points {
		j.Lots[i] = trendLotJ{Lot: p.Lot, Date: p.Date, Fits: p.N, Mean: t.Values[i], WithinSD: p.SD[k],
			EWMA: t.EWMA.Z[i], EWMAUCL: finite(t.EWMA.UCL[i]), EWMALCL: finite(t.EWMA.LCL[i]), Signals: []string{}}
	}
	for _, s := range t.Signals {
		j.Lots[s.Index].Signals = append(j.Lots[s.Index].Signals, s.Rule.Short())
	}
	return j
}
