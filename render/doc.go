// Package render draws the pictures regdrift writes: heatmaps of a
// production panel, XY plots, histograms and bar charts, as PNG.
//
// It knows nothing of circuit boards. It takes numbers, panel coordinates in
// metres, and labels and units as strings; the callers in cmd/regdrift
// decide what to show and how to name it.
//
// # Palettes
//
// Sequential (for magnitudes) and Diverging (for signed values on a
// symmetric range, with a neutral light centre) are our own curves in
// Björn Ottosson's OKLab space (2020), tabulated once into 1024-entry
// lookup tables so that Palette.At and Palette.Map cost an index. Their
// lightness is linear in the value (Diverging: on each half, mirrored), the
// farther from zero the darker, and their chroma is pulled inside the sRGB
// gamut at constant lightness and hue, so that maps keep their order printed
// in grey. Qualitative holds eight series colours that differ in hue and in
// lightness. The tests measure lightness and BT.709 luma on the 8-bit
// output.
//
// # Panel maps
//
// NewMap lays out a canvas from a MapSpec: the title block, one or more
// views of the panel side by side (two for a before/after comparison), axes
// in inches or millimetres, an optional legend at the right of the title
// block and space for one shared colour bar. Each View maps panel
// coordinates (origin at the panel centre, y up) to pixels at one uniform
// scale. Draw in this order:
//
//	m := render.NewMap(render.MapSpec{Width: 2400, Extent: panel, Title: lines})
//	v := m.Views[0]
//	v.Field(panel, offsetAt, render.Diverging, lo, hi) // pixels, straight into image.RGBA.Pix
//	v.StrokeRect(panel, render.LineStyle{Width: 2 * m.Thin()})
//	v.Bars(sites, render.BarStyle{})                   // one short bar per site
//	v.Markers(worst)                                   // numbered rings
//	m.ColorBar(render.Diverging, lo, hi, "offset [mil]")
//	err := m.EncodePNG(w)
//
// Field calls the caller's function once per pixel; FieldGrid upsamples a
// Grid of values bilinearly, for fields that are costly to evaluate. Both
// colour a pixel exactly as Palette.Map colours the value at its centre
// (View.PixelCenter). The vector overlay — rectangles, bars, dots, numbered
// markers, arrows with a scale arrow, contour lines (marching squares on a
// Grid, see Contour) and legends — is drawn with gg on the same pixels.
// View.PixelLen tells the caller how large a length appears, so that it can
// leave out part outlines too small to see.
//
// # Plots
//
// A Plot stacks panels (Axes) that share an x axis: lines with markers and
// dashes, horizontal bands (a spec window), horizontal and vertical
// reference lines with labels, histograms (IntegerHist for counts) and a
// legend placed in the emptiest corner. BarChart draws labelled horizontal
// bars. Axis ticks follow the 1-2-5 rule (Ticks, TickLabel).
//
// # Text, size and speed
//
// Text is set in the Go fonts compiled into the binary, at a size
// proportional to the image width (a hundredth of it for maps), so a
// picture reads the same at any width. Every canvas is opaque over a light
// neutral background. EncodePNG writes 8-bit RGB, deflating bands of rows
// on all cores (see encodeRGB).
//
// The benchmarks measure the speed (go test -bench . ./render/):
// BenchmarkField, the field raster of a 3000 x 4000 pixel plot area;
// BenchmarkMap10k, a complete 3000 pixel wide map of 10,000 sites — field,
// outlines, bars, ten markers, colour bar and PNG encoding; BenchmarkEncode,
// the encoding alone; BenchmarkPlot, a three-panel sweep plot. The figures
// are kept in the README's speed table.
package render
