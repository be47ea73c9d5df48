package drift

import (
	"bytes"
	"encoding/csv"
	"math"
	"strconv"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// TestBudgetCSVCoupling: with variation terms budget.csv carries, after the
// offset budget, the coupling budget at the worst site and over the panel;
// each scope's shares sum to one (variances over their sum), both sources
// appear, and the rows match the summary's to their printed digits.
func TestBudgetCSVCoupling(t *testing.T) {
	s := namedPair("bcsv", section.Spec{Coupling: -3, Tolerance: 0.1})
	arr := panel.Array{Part: "p", Count: [2]int{3, 3}, Pitch: panel.Vec{X: 4 * inch, Y: 6 * inch}}
	l, inst, sites := layout(t, "bcsv", 90, arr)
	m := &registration.Model{Contributors: []registration.Contributor{{Name: "L3", Layers: []string{"L3"},
		Terms:     [registration.NumTerms]registration.Term{registration.OffsetX: term(1.5*mil, 1.2*mil), registration.ScaleY: term(40e-6, 20e-6)},
		SiteSigma: 0.3 * mil}}}
	pm := &process.Model{Size: l.Panel.Size, Terms: []process.Term{
		{Name: "c2", Layer: "C2", Quantity: process.Thickness, Panel: term(0, 0.06*mil), SiteSigma: 0.03 * mil,
			Shape: process.Shape{Kind: process.Dome, Amplitude: 0.12 * mil}},
		{Name: "w3", Layer: "L3", Quantity: process.Width, Panel: term(0, 0.4*mil), Shape: process.Shape{Kind: process.Tilt, Amplitude: 0.6 * mil}}}}
	in := &Input{Layout: l, Instances: inst, Sites: sites, Sections: []*section.Section{s}, Model: m, Process: pm}
	a, err := Analyse(t.Context(), in, testSettings(t))
	if err != nil {
		t.Fatal(err)
	}
	res, err := a.Yield.MonteCarlo(t.Context(), registration.MCSettings{Trials: 200, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	sum := a.YieldSummary(res, 3)
	if sum.CouplingBudget == nil {
		t.Fatal("no coupling budget with variation terms")
	}
	var b bytes.Buffer
	if err := WriteBudgetCSV(&b, sum, unit.MilInch); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&b).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if recs[0][5] != "sd [mil]" || recs[0][7] != "sd [dB]" {
		t.Fatalf("header %v", recs[0])
	}
	share := map[string]float64{}
	src := map[string]bool{}
	n := 0
	for _, r := range recs[1:] {
		if !strings.HasPrefix(r[0], "coupling, ") {
			continue
		}
		n++
		v, _ := strconv.ParseFloat(r[4], 64)
		share[r[0]] += v
		src[r[6]] = true
	}
	if want := len(sum.CouplingBudget.AtWorst) + len(sum.CouplingBudget.Panel); n != want {
		t.Errorf("%d coupling rows, want %d", n, want)
	}
	for scope, v := range share {
		// Five printed decimals per row, a handful of rows.
		if math.Abs(v-1) > 1e-4 {
			t.Errorf("%s: shares sum to %.6f", scope, v)
		}
	}
	if len(share) != 2 || !src["registration"] || !src["variation"] {
		t.Errorf("scopes %v, sources %v", share, src)
	}
}
