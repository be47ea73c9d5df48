package figure

import (
	"fmt"
	"github.com/regdrift/regdrift/panel/unit"
	"io"
	"math"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// specBand is the spec window of s as a plot band.
func specBand(s *section.Section) render.Band {
	return render.Band{Lo: s.Spec.Coupling - s.Spec.Tolerance, Hi: s.Spec.Coupling + s.Spec.Tolerance,
		Label: fmt.Sprintf("spec %.2f ± %.2f dB", s.Spec.Coupling, s.Spec.Tolerance)}
}

// offsetLabel is the x axis title of every plot of section s against
// offset: for two traces on one layer the offset is their centre-to-centre
// spacing, which registration cannot move, so the label says so.
func offsetLabel(s *section.Section, u unit.Output) string {
	if drift.OffsetKind(s) == "spacing" {
		return "centre-to-centre spacing of the two " + s.Traces[0].Layer + " traces (gap + width; set by etching, not registration) [" + u.Length() + "]"
	}
	return "offset of the upper trace (" + s.Traces[0].Layer + ") against the lower (" + s.Traces[1].Layer + ") across the lines [" + u.Length() + "]"
}

// tolPlotWidth and tolPlotHeight are the size of each section's plot in
// tol.png.
const tolPlotWidth, tolPlotHeight = 1800, 760

// Tol plots coupling against offset for each studied section of r (tol.png),
// one plot per section over its own offsets, stacked: the spec band, the
// offsets where the design meets the limits, and the widened designs'
// curves, coloured light to dark by the width change in the legend to the
// right of the data, with the design in bold ink.
func Tol(w io.Writer, r *drift.TolSummary, u unit.Output) error {
	var plots []*render.Canvas
	for k := range r.Sections {
		st := &r.Sections[k]
		s := st.Curve.Section
		a := &render.Axes{YLabel: "coupling [dB]", Bands: []render.Band{specBand(s)}, Legend: render.Outside}
		xlo, xhi := math.Inf(1), math.Inf(-1)
		add := func(c *section.Curve, line render.Line) {
			lo, hi := c.Range()
			xlo, xhi = math.Min(xlo, lo), math.Max(xhi, hi)
			const n = 300
			line.X, line.Y = make([]float64, n+1), make([]float64, n+1)
			for q := range line.X {
				x := lo + (hi-lo)*float64(q)/n
				line.X[q], line.Y[q] = x/u.LengthSI(), c.Coupling(x)
			}
			a.Lines = append(a.Lines, line)
		}
		add(st.Curve.Curve, render.Line{Label: "as designed", Color: render.Ink, Width: 4})
		// The widened designs are an ordered family: one hue from light to
		// dark as the width grows, so that 13 curves stay told apart by
		// their order rather than by 13 unrelated colours.
		dlo, dhi := math.Inf(1), math.Inf(-1)
		for _, row := range st.Widen {
			dlo, dhi = math.Min(dlo, row.DeltaWM), math.Max(dhi, row.DeltaWM)
		}
		for _, row := range st.Widen {
			if row.DeltaWM == 0 {
				continue
			}
			t := 0.5
			if dhi > dlo {
				t = (row.DeltaWM - dlo) / (dhi - dlo)
			}
			col := render.Sequential.Map(0.25+0.7*t, 0, 1)
			label := fmt.Sprintf("%s %+.2f %s", row.Trace, row.DeltaWM/u.LengthSI(), u.Length())
			if row.DesignInSpec {
				label += fmt.Sprintf(": ± %.2f", row.ToleranceM/u.LengthSI())
			} else {
				label += ": out of spec"
			}
			add(row.Curve.Curve, render.Line{Label: label, Color: col})
		}
		a.VLines = append(a.VLines, render.VLine{X: s.NominalOffset() / u.LengthSI(), Label: "design", Color: render.Frame})
		what, note := "drawing tolerance", ""
		if drift.OffsetKind(s) == "spacing" {
			what, note = "spacing tolerance", " (both traces on "+s.Traces[0].Layer+": a gap tolerance, not registration)"
		}
		title := fmt.Sprintf("%s: coupling against offset, spec %.2f ± %.2f dB; ", s.Name, s.Spec.Coupling, s.Spec.Tolerance)
		if st.DesignInSpec {
			for _, x := range []*float64{st.OffsetLowM, st.OffsetHighM} {
				a.VLines = append(a.VLines, render.VLine{X: *x / u.LengthSI(), Label: fmt.Sprintf("%+.2f %s", *x/u.LengthSI(), u.Length()), Color: render.Series(0)})
			}
			title += fmt.Sprintf("%s ± %.2f %s about %+.2f %s%s", what, st.ToleranceM/u.LengthSI(), u.Length(), s.NominalOffset()/u.LengthSI(), u.Length(), note)
		} else {
			title += "the design is out of spec"
		}
		p := &render.Plot{Title: title, XLabel: offsetLabel(s, u), XMin: xlo / u.LengthSI(), XMax: xhi / u.LengthSI(), Axes: []*render.Axes{a}}
		plots = append(plots, p.Render(tolPlotWidth, tolPlotHeight))
	}
	if len(plots) == 0 {
		p := &render.Plot{Title: "Offset tolerance: no section studied"}
		plots = append(plots, p.Render(tolPlotWidth, 300))
	}
	return render.Stack(plots...).EncodePNG(w)
}

// Sweep plots the curve c of section s (sweep.png): coupling with the spec
// band and the offsets where it crosses a limit, each line's impedance and
// the directivity, against offset.
func Sweep(w io.Writer, s *section.Section, c *section.Curve, u unit.Output) error {
	lo, hi := c.Range()
	const n = 400
	xs := make([]float64, n+1)
	cp := make([]float64, n+1)
	dir := make([]float64, n+1)
	z1 := make([]float64, n+1)
	z2 := make([]float64, n+1)
	for k := range xs {
		x := lo + (hi-lo)*float64(k)/n
		xs[k] = x / u.LengthSI()
		cp[k] = c.Coupling(x)
		dir[k] = c.Directivity(x)
		z := c.ZLine(x)
		z1[k], z2[k] = z[0], z[1]
	}
	var px, pc []float64
	for _, p := range c.Points {
		px = append(px, p.Offset/u.LengthSI())
		pc = append(pc, p.CouplingDB)
	}
	top := &render.Axes{YLabel: "coupling |S31| [dB]", Weight: 2,
		Bands: []render.Band{specBand(s)},
		Lines: []render.Line{
			{Label: "interpolated", X: xs, Y: cp, Color: render.Series(0)},
			{Label: "solved", X: px, Y: pc, Color: render.Series(0), Marker: render.Circle, Width: -1},
		},
		VLines: []render.VLine{{X: s.NominalOffset() / u.LengthSI(), Label: "design", Color: render.Frame}},
	}
	for _, x := range drift.SpecCrossings(c, s.Spec) {
		top.VLines = append(top.VLines, render.VLine{X: x / u.LengthSI(), Label: fmt.Sprintf("%+.2f %s", x/u.LengthSI(), u.Length()), Color: render.Series(3)})
	}
	// An edge-coupled pair has no upper and lower trace, and its offset
	// is the spacing.
	names := [2]string{"upper line (" + s.Traces[0].Layer + ")", "lower line (" + s.Traces[1].Layer + ")"}
	against := fmt.Sprintf("lateral offset of %s against %s", s.Traces[0].Layer, s.Traces[1].Layer)
	if drift.OffsetKind(s) == "spacing" {
		names = [2]string{"first line (" + s.Traces[0].Layer + ")", "second line (" + s.Traces[1].Layer + ")"}
		against = "centre-to-centre spacing of the two " + s.Traces[0].Layer + " traces"
	}
	mid := &render.Axes{YLabel: "line impedance [ohm]",
		Lines: []render.Line{
			{Label: names[0], X: xs, Y: z1, Color: render.Series(1)},
			{Label: names[1], X: xs, Y: z2, Color: render.Series(2), Dash: []float64{3, 2}},
		},
		HLines: []render.HLine{{Y: s.ZRef, Label: fmt.Sprintf("z_ref %.0f ohm", s.ZRef), Dash: []float64{6, 4}}},
	}
	bot := &render.Axes{YLabel: "directivity [dB]",
		Lines: []render.Line{{Label: "directivity", X: xs, Y: dir, Color: render.Series(4)}}}
	p := &render.Plot{
		Title: fmt.Sprintf("section %s at %.4g GHz, coupled length %.1f %s: coupling versus %s",
			s.Name, c.Frequency/1e9, c.Length/u.LengthSI(), u.Length(), against),
		XLabel: offsetLabel(s, u),
		Axes:   []*render.Axes{top, mid, bot},
	}
	return p.Render(1800, 1500).EncodePNG(w)
}
