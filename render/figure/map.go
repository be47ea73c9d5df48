package figure

import (
	"fmt"
	"github.com/regdrift/regdrift/panel/unit"
	"image/color"
	"io"
	"math"
	"strconv"

	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// Shows are the quantities a drift map can draw, by the names the map
// command takes.
var Shows = []string{"drift", "worst", "offset", "sigma", "margin", "registration", "variation"}

// show is one quantity a drift map draws.
type show struct {
	q      drift.Quantity
	length bool // a length, drawn in the output's length unit
	badLow bool // low values are the bad end
	label  string
}

func showOf(name string, u unit.Output) (show, bool) {
	L := " [" + u.Length() + "]"
	switch name {
	case "drift", "":
		return show{drift.Drift, false, true, "coupling drift at the mean offset, against the design offset [dB]"}, true
	case "worst":
		return show{drift.WorstDrift, false, true, "worst coupling drift within mean ± 3σ of the offset [dB]"}, true
	case "offset":
		return show{drift.Offset, true, false, "mean broadside offset across the lines, design offset included" + L}, true
	case "sigma":
		return show{drift.Sigma, true, false, "standard deviation of the broadside offset" + L}, true
	case "margin":
		return show{drift.Margin, false, true, "margin from the coupling at the mean offset to the nearer spec limit [dB]"}, true
	case "registration":
		return show{drift.RegistrationDrift, false, true, "coupling drift from registration alone, at the mean offset [dB]"}, true
	case "variation":
		return show{drift.ProcessDrift, false, true, "coupling drift from the process variation terms alone, at the mean offset [dB]"}, true
	}
	return show{}, false
}

func (s show) scale(u unit.Output) float64 {
	if s.length {
		return 1 / u.LengthSI()
	}
	return 1
}

// MapOptions say what a drift map draws.
type MapOptions struct {
	Show  string      // one of Shows; "" means "drift"
	Width int         // pixels; 0 means 2400
	Units unit.Output // zero means unit.MilInch
	// Scale, when set, fixes the colour range, so that maps of several
	// panels compare on one scale.
	Scale *[2]float64
	// Term, with Show "term", is the index into the process terms
	// (process.Model.Terms) of the one term drawn, and TermName its name
	// for the colour bar.
	Term     int
	TermName string
}

func (o MapOptions) norm() (MapOptions, show, error) {
	if o.Width == 0 {
		o.Width = 2400
	}
	s, ok := showOf(o.Show, o.Units)
	if o.Show == "term" {
		s, ok = show{drift.TermDrift(o.Term), false, true, fmt.Sprintf("coupling drift from the process term %q alone, at the mean offset [dB]", o.TermName)}, true
	}
	if !ok {
		return o, s, fmt.Errorf("figure: no map of %q (want one of %v)", o.Show, Shows)
	}
	return o, s, nil
}

// ShownRange returns the smallest and largest value a map with options o
// draws for the sites of a, in the units drawn.
func ShownRange(a *drift.Analysis, o MapOptions) (lo, hi float64, err error) {
	o, s, err := o.norm()
	if err != nil {
		return 0, 0, err
	}
	lo, hi = math.Inf(1), math.Inf(-1)
	k := s.scale(o.Units)
	for i := range a.Sites {
		v := a.Sites[i].Value(s.q) * k
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	return lo, hi, nil
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

// Map draws the drift map of a (map.png): the chosen quantity as a field over
// the panel, a bar per site along its lines in its own colour, and the worst
// sites of sum ringed and numbered.
func Map(w io.Writer, a *drift.Analysis, sum *drift.MapSummary, o MapOptions) error {
	_, err := MapView(w, a, sum, o)
	return err
}

// MapView draws the map as Map does and returns the view the panel is drawn
// in, so that the caller can tell where each site is in the picture
// (View.Pixel): the report's site look-up.
func MapView(w io.Writer, a *drift.Analysis, sum *drift.MapSummary, o MapOptions) (*render.View, error) {
	o, s, err := o.norm()
	if err != nil {
		return nil, err
	}
	in, u := a.In, o.Units
	zones := a.Zones()
	k := s.scale(u)
	grid := fieldGrid(in, o.Width/6, zoneField(a, zones, s.q, k))
	lo, hi, _ := ShownRange(a, o)
	glo, ghi := grid.Range()
	lo, hi = math.Min(lo, glo), math.Max(hi, ghi)
	if o.Scale != nil {
		lo, hi = o.Scale[0], o.Scale[1]
	}
	pal, lo, hi := scaleFor(lo, hi, s.badLow)

	global := zones[len(zones)-1].Kinds[0]
	sec, c := in.Sections[global.Section], a.Curves[global.Section]
	title := []string{
		in.Title,
		fmt.Sprintf("section %s: spec %.2f ± %.2f dB at %.4g GHz, design offset %.2f %s, coupling %.3f dB there",
			sec.Name, sec.Spec.Coupling, sec.Spec.Tolerance, sec.Frequency/1e9, sec.NominalOffset()/u.LengthSI(), u.Length(), c.Nominal),
	}
	if len(sum.Worst) > 0 {
		ws := sum.Worst[0]
		title = append(title, fmt.Sprintf("%d of %d sites in spec; worst %s: offset %+.2f %s, drift %+.3f dB, margin %.3f dB",
			sum.InSpec, sum.Sites, ws.Name, ws.OffsetM/u.LengthSI(), u.Length(), ws.DriftDB, ws.MarginDB))
	}
	title = append(title, fmt.Sprintf("field: over each array its most common coupler's line direction (elsewhere lines at %.0f deg, %s); bars: each site along its lines; rings: the ten worst sites",
		math.Atan2(global.U.Y, global.U.X)*180/math.Pi, sec.Name))

	m := newPanelMap(in, u, render.MapSpec{Width: o.Width, Title: title})
	v := m.Views[0]
	drawPanel(v, in, grid, pal, lo, hi, true)
	v.Bars(siteBars(a, func(_ int, r *drift.Site) color.RGBA { return pal.Map(r.Value(s.q)*k, lo, hi) }), render.BarStyle{})
	var ms []render.Marker
	for _, ws := range sum.Worst {
		ms = append(ms, render.Marker{At: render.Point{X: ws.XM, Y: ws.YM}, Label: strconv.Itoa(ws.Rank)})
	}
	v.Markers(ms)
	m.ColorBar(pal, lo, hi, s.label)
	return v, m.EncodePNG(w)
}
