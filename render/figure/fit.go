package figure

import (
	"fmt"
	"github.com/regdrift/regdrift/panel/unit"
	"io"
	"math"
	"path/filepath"
	"strconv"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/render"
)

// Fit draws one view per fitted layer (fit.png): every panel's targets with
// the measured displacement (grey) and the residual after the fit
// (coloured), each exaggerated by one stated factor, outliers ringed. file
// names the measurement file, set the fit; size is the panel size, or zero to
// frame the targets' extent; width is in pixels, 0 meaning 2400.
//
// The figure never needs every target at once: the extent and the arrows'
// scales come from each fit's summary (registration.Fit's Extent, Max and
// MaxMeasured), and the views are drawn a fit's group at a time, loaded and
// released, from a sample of at most maxFitArrows targets.
func Fit(w io.Writer, file string, set registration.FitSettings, fits []registration.Fit, lots []registration.Lot, size panel.Vec, width int, u unit.Output) error {
	if width == 0 {
		width = 2400
	}
	var ext render.Rect
	if size.X > 0 {
		ext = render.Centered(size.X, size.Y)
	} else {
		lo := panel.Vec{X: math.Inf(1), Y: math.Inf(1)}
		hi := panel.Vec{X: math.Inf(-1), Y: math.Inf(-1)}
		for _, f := range fits {
			if f.Len() > 0 {
				lo = panel.Vec{X: math.Min(lo.X, f.Extent.Min.X), Y: math.Min(lo.Y, f.Extent.Min.Y)}
				hi = panel.Vec{X: math.Max(hi.X, f.Extent.Max.X), Y: math.Max(hi.Y, f.Extent.Max.Y)}
			}
		}
		pad := 0.1*math.Max(hi.X-lo.X, hi.Y-lo.Y) + 0.01
		ext = render.Rect{Min: render.Point{X: lo.X - pad, Y: lo.Y - pad}, Max: render.Point{X: hi.X + pad, Y: hi.Y + pad}}
	}
	// Two exaggerations: the measured displacements are mils, the residuals
	// a tenth of that; each gets the round factor that draws its largest
	// arrow (outliers aside) a tenth of the panel's shorter side long.
	// Outliers are left out of both (an outlier must not shrink every
	// other arrow), as they are of the fits' Max and MaxMeasured.
	var maxD, maxR float64
	for _, f := range fits {
		maxD = math.Max(maxD, f.MaxMeasured)
		maxR = math.Max(maxR, f.Max)
	}
	side := math.Min(ext.Dx(), ext.Dy())
	exg := niceLength(side / 10 / math.Max(maxD, 1e-9))
	exr := niceLength(side / 10 / math.Max(maxR, 1e-9))
	// Each view's caption states its lot's mean movement, the numbers a
	// process engineer reads off this figure.
	var captions []string
	for _, l := range lots {
		captions = append(captions, fmt.Sprintf("layer %s, %d panels; lot mean scale x %+.1f ppm, y %+.1f ppm, rotation %+.1f µrad",
			l.Layer, l.Panels, l.Mean[registration.ScaleX]/1e-6, l.Mean[registration.ScaleY]/1e-6, l.Mean[registration.Rotation]/1e-6))
	}
	title := []string{
		"Registration targets of " + filepath.Base(file),
		fmt.Sprintf("%s fit per panel and layer about the datum (%.2f, %.2f) %s; robust: %s; all panels overlaid",
			set.Model, set.Datum.X/u.PanelSI(), set.Datum.Y/u.PanelSI(), u.Panel(), set.Robust),
	}
	// The scale key is an arrow of the legend, off the panel, drawn at the
	// measured arrows' exaggeration to a round length about keyEm long; its
	// pixel length needs the views' scale, so the map is laid out, measured
	// and laid out again (the legend's size barely moves the views).
	legendFor := func(pxPerM, em float64) []render.LegendItem {
		key := render.LegendItem{Kind: render.LegendArrow, Color: render.Ink, Length: keyEm * em,
			Label: "key: 0.00 mil measured, 0.000 mil residual"}
		if pxPerM > 0 {
			d := niceLength(keyEm*em/pxPerM/exg/u.LengthSI()) * u.LengthSI() // round in the output unit
			key.Length = d * exg * pxPerM
			key.Label = fmt.Sprintf("key: this arrow is %s %s measured, %s %s residual",
				strconv.FormatFloat(d/u.LengthSI(), 'g', 3, 64), u.Length(), strconv.FormatFloat(d*exg/exr/u.LengthSI(), 'g', 3, 64), u.Length())
		}
		return []render.LegendItem{
			{Label: "measured displacement, × " + strconv.FormatFloat(exg, 'g', 6, 64), Kind: render.LegendArrow, Color: render.Frame},
			{Label: "residual after the fit, × " + strconv.FormatFloat(exr, 'g', 6, 64), Kind: render.LegendArrow, Color: render.Series(0)},
			{Label: "target rejected as mis-measured", Kind: render.LegendRing},
			key,
		}
	}
	// Targets outside the panel outline are not drawn (they would cover the
	// axes); the title says how many.
	outside := func(p panel.Vec) bool {
		return size.X > 0 && (math.Abs(p.X) > size.X/2 || math.Abs(p.Y) > size.Y/2)
	}
	// Only a fit whose extent crosses the outline has its group loaded to
	// count them.
	nOut := 0
	for _, f := range fits {
		if f.Len() == 0 || !outside(f.Extent.Min) && !outside(f.Extent.Max) {
			continue
		}
		if err := f.Group.Load(); err != nil {
			return err
		}
		for i := range f.Len() {
			if outside(f.Group.Pos(i)) {
				nOut++
			}
		}
		f.Group.Release()
	}
	if nOut > 0 {
		title = append(title, fmt.Sprintf("%d targets outside the panel outline are not drawn", nOut))
	}
	// The figure draws at most maxFitArrows targets (minViewArrows a view):
	// beyond that the arrows overlap into a solid field and only cost time. A layer with more is
	// drawn from a deterministic sample (see sampleTarget); the statistics
	// above and the fit itself use every target.
	perLayer := map[string]int{}
	total := 0
	for _, f := range fits {
		perLayer[f.Layer] += f.Len()
		total += f.Len()
	}
	keep := map[string]uint32{}
	shown := 0
	limit := max(minViewArrows, maxFitArrows/max(len(lots), 1))
	for _, l := range lots {
		n := perLayer[l.Layer]
		keep[l.Layer] = sampleThreshold(n, limit)
		shown += sampledCount(n, keep[l.Layer])
	}
	if shown < total {
		title = append(title, fmt.Sprintf("showing a sample of %s of %s targets (every target is in the fit and the tables)",
			groupThousands(shown), groupThousands(total)))
	}
	cols := min(len(lots), 4)
	spec := render.MapSpec{Width: width, Extent: ext, Views: len(lots), Columns: cols, Title: title,
		Captions: captions, Unit: axisUnit(u), NoColorBar: true}
	spec.Legend = legendFor(0, 0)
	m := render.NewMap(spec)
	for range 2 {
		s := m.Views[0].PixelLen(1)
		spec.Legend = legendFor(s, m.TextSize())
		m = render.NewMap(spec)
		if m.Views[0].PixelLen(1) == s {
			break
		}
	}
	for li, l := range lots {
		v := m.Views[li]
		if size.X > 0 {
			v.StrokeRect(ext, render.LineStyle{Color: render.Ink, Width: 2})
		}
		var meas, res []render.Arrow
		var pts []render.Point
		var ms []render.Marker
		th := keep[l.Layer]
		var idx uint32 // the target's index within its layer, for the sample
		for _, f := range fits {
			if f.Layer != l.Layer || f.Len() == 0 {
				continue
			}
			if err := f.Group.Load(); err != nil {
				return err
			}
			for i := range f.Len() {
				idx++
				if !sampleTarget(idx-1, th) {
					continue
				}
				p, d := f.Group.Pos(i), f.Group.D(i)
				if outside(p) {
					continue
				}
				at := render.Point{X: p.X, Y: p.Y}
				pts = append(pts, at)
				meas = append(meas, render.Arrow{At: at, D: render.Point{X: d.X, Y: d.Y}})
				if f.Outlier(i) {
					ms = append(ms, render.Marker{At: at, Label: f.Panel + " " + f.Group.Name(i)})
					continue
				}
				r := f.Residual(i)
				res = append(res, render.Arrow{At: at, D: render.Point{X: r.X, Y: r.Y}})
			}
			f.Group.Release()
		}
		v.Arrows(meas, render.ArrowStyle{Color: render.Frame, Exaggeration: exg})
		v.Arrows(res, render.ArrowStyle{Color: render.Series(0), Exaggeration: exr, Width: 2 * m.Thin()})
		v.Dots(pts, 0.25*m.TextSize(), render.Ink)
		v.Markers(ms)
	}
	return m.EncodePNG(w)
}

// keyEm is the longest the scale key of fit.png is drawn, in text sizes.
const keyEm = 5.0

// niceLength returns 1, 2 or 5 times a power of ten not above d, for a
// scale arrow.
func niceLength(d float64) float64 {
	if !(d > 0) {
		return 1
	}
	mag := math.Pow(10, math.Floor(math.Log10(d)))
	for _, m := range []float64{5, 2, 1} {
		if m*mag <= d {
			return m * mag
		}
	}
	return mag
}

// fit.png draws at most maxFitArrows targets in all, shared by its views,
// but never fewer than minViewArrows in one view.
const (
	maxFitArrows  = 20000
	minViewArrows = 2000
)

// sampleThreshold returns the threshold of sampleTarget that keeps about
// limit of n targets; 0 means keep all.
func sampleThreshold(n, limit int) uint32 {
	if n <= limit {
		return 0
	}
	return uint32(float64(limit) / float64(n) * (1 << 32))
}

// sampleTarget reports whether the target with index i within its layer is
// drawn. Multiplicative (Fibonacci) hashing, i·⌊2³²/φ⌋ mod 2³², spreads
// consecutive indices evenly over [0, 2³²) (Knuth, The Art of Computer
// Programming, vol. 3, sec. 6.4), so keeping those below a threshold takes
// a fraction of the targets without the aliasing of every k-th one on a
// regular target grid, and the same file always draws the same sample.
func sampleTarget(i, threshold uint32) bool {
	return threshold == 0 || i*2654435769 < threshold
}

// sampledCount counts the targets among n that sampleTarget keeps.
func sampledCount(n int, threshold uint32) int {
	if threshold == 0 {
		return n
	}
	k := 0
	for i := range uint32(n) {
		if sampleTarget(i, threshold) {
			k++
		}
	}
	return k
}

// groupThousands writes n with commas between groups of three digits.
func groupThousands(n int) string {
	s := strconv.Itoa(n)
	for i := len(s) - 3; i > 0; i -= 3 {
		s = s[:i] + "," + s[i:]
	}
	return s
}
