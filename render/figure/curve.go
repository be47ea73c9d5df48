package figure

import (
	"fmt"
	"github.com/regdrift/regdrift/panel/unit"
	"io"
	"math"
	"strings"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// specBand is the spec window of s as a plot band.
func specBand(s *section.Section) render.Band {
	return render.Band{Lo: s.Spec.Coupling - s.Spec.Tolerance, Hi: s.Spec.Coupling + s.Spec.Tolerance,
		Label: fmt.Sprintf("spec %.2f ± %.2f dB", s.Spec.Coupling, s.Spec.Tolerance)}
}

// offsetLabel is the x axis title of every plot against offset.
func offsetLabel(u unit.Output) string {
	return "offset of the upper trace across the lines [" + u.Length() + "]"
}

// Tol plots coupling against offset for each studied section of r (one panel
// each) with the spec band, the offsets where the design meets the limits,
// and the widened designs' curves (tol.png).
func Tol(w io.Writer, r *drift.TolSummary, u unit.Output) error {
	p := &render.Plot{XLabel: offsetLabel(u)}
	var titles []string
	xlo, xhi := math.Inf(1), math.Inf(-1)
	for k := range r.Sections {
		st := &r.Sections[k]
		s := st.Curve.Section
		a := &render.Axes{YLabel: s.Name + ": coupling [dB]", Bands: []render.Band{specBand(s)}}
		add := func(c *section.Curve, label string, i int) {
			lo, hi := c.Range()
			xlo, xhi = math.Min(xlo, lo), math.Max(xhi, hi)
			const n = 300
			xs, ys := make([]float64, n+1), make([]float64, n+1)
			for q := range xs {
				x := lo + (hi-lo)*float64(q)/n
				xs[q], ys[q] = x/u.LengthSI(), c.Coupling(x)
			}
			line := render.Line{Label: label, X: xs, Y: ys, Color: render.Series(i)}
			if i > 0 {
				line.Dash = []float64{4, 2}
			}
			a.Lines = append(a.Lines, line)
		}
		add(st.Curve.Curve, "as designed", 0)
		for q, row := range st.Widen {
			if row.DeltaWM == 0 {
				continue
			}
			add(row.Curve.Curve, fmt.Sprintf("%s %+.2f %s", row.Trace, row.DeltaWM/u.LengthSI(), u.Length()), q+1)
		}
		a.VLines = append(a.VLines, render.VLine{X: s.NominalOffset() / u.LengthSI(), Label: "design", Color: render.Frame})
		if st.DesignInSpec {
			for _, x := range []*float64{st.OffsetLowM, st.OffsetHighM} {
				a.VLines = append(a.VLines, render.VLine{X: *x / u.LengthSI(), Label: fmt.Sprintf("%+.2f %s", *x/u.LengthSI(), u.Length()), Color: render.Series(0)})
			}
			titles = append(titles, fmt.Sprintf("%s ± %.2f %s", s.Name, st.ToleranceM/u.LengthSI(), u.Length()))
		} else {
			titles = append(titles, s.Name+" out of spec")
		}
		p.Axes = append(p.Axes, a)
	}
	p.XMin, p.XMax = xlo/u.LengthSI(), xhi/u.LengthSI()
	p.Title = "Offset tolerance: coupling against lateral offset, spec band; " + strings.Join(titles, ", ")
	return p.Render(1800, 700+400*len(p.Axes)).EncodePNG(w)
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
	mid := &render.Axes{YLabel: "line impedance [ohm]",
		Lines: []render.Line{
			{Label: "upper line (" + s.Traces[0].Layer + ")", X: xs, Y: z1, Color: render.Series(1)},
			{Label: "lower line (" + s.Traces[1].Layer + ")", X: xs, Y: z2, Color: render.Series(2), Dash: []float64{3, 2}},
		},
		HLines: []render.HLine{{Y: s.ZRef, Label: fmt.Sprintf("z_ref %.0f ohm", s.ZRef), Dash: []float64{6, 4}}},
	}
	bot := &render.Axes{YLabel: "directivity [dB]",
		Lines: []render.Line{{Label: "directivity", X: xs, Y: dir, Color: render.Series(4)}}}
	p := &render.Plot{
		Title: fmt.Sprintf("section %s at %.4g GHz, coupled length %.1f %s: coupling versus lateral offset of %s against %s",
			s.Name, c.Frequency/1e9, c.Length/u.LengthSI(), u.Length(), s.Traces[0].Layer, s.Traces[1].Layer),
		XLabel: offsetLabel(u),
		Axes:   []*render.Axes{top, mid, bot},
	}
	return p.Render(1800, 1500).EncodePNG(w)
}
