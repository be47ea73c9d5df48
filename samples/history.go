package samples

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"strings"
	"time"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/history"
)

// HistoryLot is one lot of the invented demo history: its targets, the
// construction its measured layers belong to and the artwork scale they
// were built with.
type HistoryLot struct {
	Name, Date   string
	Construction string // the construction key, one for both layers
	Targets      TargetLot
	// Applied is the artwork scale (x, y; strain) each layer was built with.
	Applied map[string][2]float64
}

// Demo history constructions.
const (
	HistoryCoreA = "5mil-core-A" // changes laminate at lot H036
	HistoryCoreB = "8mil-core-B" // steady
)

// DemoHistory returns an invented history of 60 lots, one every two days
// from 2026-03-02, alternating between two constructions whose layers L3
// and L4 are the faces of one core, measured against the drilled tooling
// on 4 panels of 16 targets:
//
//   - 5mil-core-A moves −190/−150 ppm (x/y) on L3 and −175/−140 ppm on L4
//     until lot H036, when a new laminate moves 45 ppm (x) and 25 ppm (y)
//     further;
//   - 8mil-core-B moves −120/−90 ppm on L3 and −110/−85 ppm on L4
//     throughout.
//
// Each lot's mean movement scatters by 8 ppm about its construction's and
// each panel by 10 ppm about its lot's. The artwork of a lot is what a
// process engineer following the scale table would have set: +150 ppm for
// the first lot of a construction, then the EWMA run-to-run setting of the
// lots before (history.ControllerLambda), rounded to 5 ppm. Every number
// here is invented for the demo; none is reference data.
func DemoHistory() []HistoryLot {
	type layerMove struct {
		layer string
		x, y  float64
	}
	moves := map[string][]layerMove{
		HistoryCoreA: {{"L3", -190 * ppm, -150 * ppm}, {"L4", -175 * ppm, -140 * ppm}},
		HistoryCoreB: {{"L3", -120 * ppm, -90 * ppm}, {"L4", -110 * ppm, -85 * ppm}},
	}
	const stepLot = 36
	rng := rand.New(rand.NewPCG(2026, 13))
	// seen[construction][layer] holds the lot means of the movement so far,
	// x then y, from which the next artwork is set.
	seen := map[string]map[string][2][]float64{}
	start := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	var out []HistoryLot
	for i := range 60 {
		cons := HistoryCoreA
		if i%2 == 1 {
			cons = HistoryCoreB
		}
		h := HistoryLot{
			Name: fmt.Sprintf("H%03d", i+1), Date: start.AddDate(0, 0, 2*i).Format(history.DateLayout),
			Construction: cons, Applied: map[string][2]float64{},
		}
		lot := TwoCoreLot()
		lot.Panels, lot.Misses, lot.Seed = 4, nil, 3000+uint64(i)
		lot.Layers = nil
		if seen[cons] == nil {
			seen[cons] = map[string][2][]float64{}
		}
		for _, lm := range moves[cons] {
			mx, my := lm.x, lm.y
			if cons == HistoryCoreA && i+1 >= stepLot {
				mx, my = mx-45*ppm, my-25*ppm
			}
			mx += 8 * ppm * rng.NormFloat64()
			my += 8 * ppm * rng.NormFloat64()
			prev := seen[cons][lm.layer]
			a := [2]float64{150 * ppm, 150 * ppm}
			for k, p := range prev {
				if len(p) > 0 {
					est := history.EWMAEstimate(p, 0, history.ControllerLambda)
					a[k] = math.Round(registration.Setting(est.Movement)/(5*ppm)) * 5 * ppm
				}
			}
			h.Applied[lm.layer] = a
			prev[0], prev[1] = append(prev[0], mx), append(prev[1], my)
			seen[cons][lm.layer] = prev
			var tl TargetLayer
			tl.Layer = lm.layer
			tl.Mean = [registration.NumTerms]float64{0.1 * mil, -0.1 * mil, 3 * urad, (1+a[0])*(1+mx) - 1, (1+a[1])*(1+my) - 1, 2 * urad}
			tl.SD = [registration.NumTerms]float64{0.4 * mil, 0.4 * mil, 10 * urad, 10 * ppm, 10 * ppm, 5 * urad}
			lot.Layers = append(lot.Layers, tl)
		}
		h.Targets = lot
		out = append(out, h)
	}
	return out
}

// WriteTargets writes the lot's measurement file (the format of
// TargetLot.Write, with a header comment of its own).
func (h *HistoryLot) WriteTargets(w io.Writer) error {
	var b bytes.Buffer
	if err := h.Targets.Write(&b); err != nil {
		return err
	}
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "# Invented demo lot %s (%s, %s), written by samples.DemoHistory; not reference data.\n", h.Name, h.Date, h.Construction)
	for _, line := range strings.SplitAfter(b.String(), "\n") {
		if !strings.HasPrefix(line, "#") {
			bw.WriteString(line)
		}
	}
	return bw.Flush()
}

// WriteApplied writes the lot's applied-compensation file
// (registration.ReadApplied's format).
func (h *HistoryLot) WriteApplied(w io.Writer) error {
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "# artwork scale of lot %s (invented demo)\nlayer,scale_x [ppm],scale_y [ppm]\n", h.Name)
	for _, l := range h.Targets.Layers {
		a := h.Applied[l.Layer]
		fmt.Fprintf(bw, "%s,%.1f,%.1f\n", l.Layer, a[0]/ppm, a[1]/ppm)
	}
	return bw.Flush()
}
