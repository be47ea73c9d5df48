package figure

import (
	"fmt"
	"github.com/regdrift/regdrift/panel/unit"
	"image/color"
	"io"
	"math"
	"strconv"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// Shows are the quantities a drift map can draw, by the names the map
// command takes.
var Shows = []string{"drift", "worst", "offset", "sigma", "margin", "window", "p", "registration", "variation"}

// show is one quantity a drift map draws.
type show struct {
	name   string
	q      drift.Quantity
	window bool // drift.WindowUsed rather than a Quantity
	length bool // a length, drawn in the output's length unit
	badLow bool // low values are the bad end
	label  string
}

func showOf(name string, u unit.Output) (show, bool) {
	L := " [" + u.Length() + "]"
	switch name {
	case "drift":
		return show{name, drift.Drift, false, false, true, "coupling drift at the mean offset, against the design offset [dB]"}, true
	case "worst":
		return show{name, drift.WorstDrift, false, false, true, "worst coupling drift within mean ± 3σ of the offset [dB]"}, true
	case "offset":
		return show{name, drift.Offset, false, true, false, "mean offset of the upper trace against the lower across the lines, design offset included" + L}, true
	case "sigma":
		return show{name, drift.Sigma, false, true, false, "standard deviation of the broadside offset" + L}, true
	case "margin":
		return show{name, drift.Margin, false, false, true, "margin from the coupling at the mean offset to the nearer spec limit [dB]"}, true
	case "window":
		return show{name, 0, true, false, false, fmt.Sprintf("share of each section's allowed offsets that mean ± 3σ reaches (1: at its edge; drawn up to %g)", windowCap)}, true
	case "p":
		return show{name, drift.PInSpec, false, false, true, "probability of the site being in spec"}, true
	case "registration":
		return show{name, drift.RegistrationDrift, false, false, true, "coupling drift from registration alone, at the mean offset [dB]"}, true
	case "variation":
		return show{name, drift.ProcessDrift, false, false, true, "coupling drift from the process variation terms alone, at the mean offset [dB]"}, true
	}
	return show{}, false
}

// windowCap is the largest share of the window drawn: a site whose ±3σ
// reaches twice past its allowed offsets is as bad as the scale needs to
// say, and a design out of spec (an infinite share) stays drawable.
const windowCap = 2.0

// siteValue returns the shown value of site i of a, in the units drawn.
func (s show) siteValue(a *drift.Analysis, i int, u unit.Output) float64 {
	if s.window {
		return math.Min(a.WindowUsed(i), windowCap)
	}
	return a.Sites[i].Value(s.q) * s.scale(u)
}

// field returns the shown quantity over the zones of a.
func (s show) field(a *drift.Analysis, zones []drift.Zone, u unit.Output) func(x, y float64) float64 {
	if !s.window {
		return zoneField(a, zones, s.q, s.scale(u))
	}
	// The largest share over each zone's kinds: on a mixed array the field
	// shows the coupler nearest its window's edge, whichever section it is.
	ev := evaluators(a)
	return func(x, y float64) float64 {
		p := panel.Vec{X: x, Y: y}
		v := 0.0
		for _, k := range drift.ZoneAt(zones, p).Kinds {
			v = math.Max(v, ev[k.Section].WindowUsedAt(p, k.U))
		}
		return math.Min(v, windowCap)
	}
}

func (s show) scale(u unit.Output) float64 {
	if s.length {
		return 1 / u.LengthSI()
	}
	return 1
}

// MapOptions say what a drift map draws.
type MapOptions struct {
	// Show is one of Shows; "" means DefaultShow's: the window share is of
	// the allowed offsets alone, blind to what the process does to a
	// microstrip, and the probability in spec counts every source on one
	// scale.
	Show  string
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

// usedSections returns the indices of the sections some site of a uses.
func usedSections(a *drift.Analysis) []int {
	var out []int
	for i := range a.In.Sections {
		if a.Used(i) {
			out = append(out, i)
		}
	}
	return out
}

// DefaultShow is the field a map of a draws when MapOptions.Show is "":
// "drift" when the sites use one section; when they use several, whose
// drifts in dB and offsets do not compare, "window" (registration only)
// or, with process terms, "p".
func DefaultShow(a *drift.Analysis) string {
	switch {
	case len(usedSections(a)) <= 1:
		return "drift"
	case a.In.Process.Empty():
		return "window"
	}
	return "p"
}

func (o MapOptions) norm(a *drift.Analysis) (MapOptions, show, error) {
	if o.Width == 0 {
		o.Width = 2400
	}
	if o.Show == "" {
		o.Show = DefaultShow(a)
	}
	s, ok := showOf(o.Show, o.Units)
	if o.Show == "term" {
		s, ok = show{"term", drift.TermDrift(o.Term), false, false, true, fmt.Sprintf("coupling drift from the process term %q alone, at the mean offset [dB]", o.TermName)}, true
	}
	if !ok {
		return o, s, fmt.Errorf("figure: no map of %q (want one of %v)", o.Show, Shows)
	}
	return o, s, nil
}

// ShownRange returns the smallest and largest value a map with options o
// draws for the sites of a, in the units drawn.
func ShownRange(a *drift.Analysis, o MapOptions) (lo, hi float64, err error) {
	o, s, err := o.norm(a)
	if err != nil {
		return 0, 0, err
	}
	lo, hi = math.Inf(1), math.Inf(-1)
	for i := range a.Sites {
		v := s.siteValue(a, i, o.Units)
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
// the panel, a bar per site along its lines in its own colour (one bar width
// per section when there are several, named in the legend), and the worst
// sites of sum ringed and numbered.
func Map(w io.Writer, a *drift.Analysis, sum *drift.MapSummary, o MapOptions) error {
	_, err := MapView(w, a, sum, o)
	return err
}

// MapView draws the map as Map does and returns the view the panel is drawn
// in, so that the caller can tell where each site is in the picture
// (View.Pixel): the report's site look-up.
func MapView(w io.Writer, a *drift.Analysis, sum *drift.MapSummary, o MapOptions) (*render.View, error) {
	o, s, err := o.norm(a)
	if err != nil {
		return nil, err
	}
	in, u := a.In, o.Units
	zones := a.Zones()
	cells := o.Width / 6
	if !in.Process.Empty() && !s.window {
		// With variation terms every cell reads a dozen sensitivity
		// curves (and for p integrates over the offset, like yield.png);
		// the process shapes are smooth over the panel, so a quarter (a
		// sixteenth) of the cells draws the same field.
		cells = o.Width / 12
		if s.q == drift.PInSpec {
			cells = o.Width / 24
		}
	}
	grid := fieldGrid(in, cells, s.field(a, zones, u))
	lo, hi, _ := ShownRange(a, o)
	glo, ghi := grid.Range()
	lo, hi = math.Min(lo, glo), math.Max(hi, ghi)
	if s.window {
		lo, hi = 0, math.Max(hi, 1) // 0 and the window's edge are always on the scale
	}
	if o.Scale != nil {
		lo, hi = o.Scale[0], o.Scale[1]
	}
	pal, lo, hi := scaleFor(lo, hi, s.badLow)

	used := usedSections(a)
	global := zones[len(zones)-1].Kinds[0]
	title := []string{in.Title}
	barWidth := math.Max(2, math.Round(math.Max(10, float64(o.Width)/100)/3)) // the render default, em/3
	var legend []render.LegendItem
	for n, si := range used {
		sec, c := in.Sections[si], a.Curves[si]
		line := fmt.Sprintf("section %s: spec %.2f ± %.2f dB at %.4g GHz, design offset %.2f %s, coupling %.3f dB there",
			sec.Name, sec.Spec.Coupling, sec.Spec.Tolerance, sec.Frequency/1e9, sec.NominalOffset()/u.LengthSI(), u.Length(), c.Nominal)
		if !c.Allowed.Empty() {
			line += fmt.Sprintf(", allowed offsets %+.2f to %+.2f %s", c.Allowed.Lo/u.LengthSI(), c.Allowed.Hi/u.LengthSI(), u.Length())
		}
		title = append(title, line)
		if len(used) > 1 {
			legend = append(legend, render.LegendItem{Label: fmt.Sprintf("%s bars: section %s", widthWord(n), sec.Name),
				Kind: render.LegendLine, Width: barWidth * float64(n+1)})
		}
	}
	title = append(title, fmt.Sprintf("expected in spec %.1f of %d sites (%s)", sum.ExpectedInSpec, sum.Sites, sum.InSpecPhrase()))
	if len(sum.Worst) > 0 {
		ws := sum.Worst[0]
		title = append(title, fmt.Sprintf("least likely in spec: %s (%s), P(in spec) %.4f, offset from design %+.2f %s, drift %+.3f dB, margin %.3f dB",
			ws.Name, ws.Section, ws.PInSpec, ws.OffsetFromDesignM/u.LengthSI(), u.Length(), ws.DriftDB, ws.MarginDB))
	}
	fieldOf := "over each array its most common coupler kind"
	if s.window {
		fieldOf = "over each array the largest share among its coupler kinds"
	}
	title = append(title, fmt.Sprintf("field: %s (elsewhere lines at %.0f deg, %s); bars: each site along its lines; rings: the ten sites least likely in spec",
		fieldOf, math.Atan2(global.U.Y, global.U.X)*180/math.Pi, in.Sections[global.Section].Name))

	m := newPanelMap(in, u, render.MapSpec{Width: o.Width, Title: title, Legend: legend})
	v := m.Views[0]
	drawPanel(v, in, grid, pal, lo, hi, true)
	colour := func(i int, _ *drift.Site) color.RGBA { return pal.Map(s.siteValue(a, i, u), lo, hi) }
	if len(used) > 1 {
		for n, si := range used {
			v.Bars(siteBarsOf(a, func(r *drift.Site) bool { return r.Section == si }, colour), render.BarStyle{Width: barWidth * float64(n+1), Contrast: true})
		}
	} else {
		v.Bars(siteBars(a, colour), render.BarStyle{Width: barWidth, Contrast: true})
	}
	var ms []render.Marker
	for _, ws := range sum.Worst {
		ms = append(ms, render.Marker{At: render.Point{X: ws.XM, Y: ws.YM}, Label: strconv.Itoa(ws.Rank)})
	}
	v.Markers(ms)
	m.ColorBar(pal, lo, hi, s.label)
	return v, m.EncodePNG(w)
}

// widthWord names the n-th bar width of a mixed map's legend.
func widthWord(n int) string {
	if words := []string{"thin", "thicker", "thickest"}; n < len(words) {
		return words[n]
	}
	return fmt.Sprintf("%d× width", n+1)
}
