package render_test

import (
	"fmt"
	"io"

	"github.com/regdrift/regdrift/render"
)

// Example draws a small panel map and a small plot, as regdrift's map and
// sweep commands do, and prints the image sizes.
func Example() {
	const in = 0.0254 // metres per inch
	panel := render.Centered(12*in, 18*in)
	offset := func(x, y float64) float64 { return 30e-6*x - 20e-6*y } // metres, invented
	lo, hi := render.Symmetric(-6e-6, 6e-6)

	m := render.NewMap(render.MapSpec{
		Width:  600,
		Extent: panel,
		Title:  []string{"Demo panel", "4 sites"},
	})
	v := m.Views[0]
	v.Field(panel, offset, render.Diverging, lo, hi)
	v.StrokeRect(panel, render.LineStyle{Width: 2 * m.Thin()})
	var bars []render.Bar
	for _, p := range []render.Point{{X: -3 * in, Y: -5 * in}, {X: 3 * in, Y: -5 * in}, {X: -3 * in, Y: 5 * in}, {X: 3 * in, Y: 5 * in}} {
		bars = append(bars, render.Bar{At: p, Length: 0.5 * in, Angle: 0, Color: render.Diverging.Map(offset(p.X, p.Y), lo, hi)})
	}
	v.Bars(bars, render.BarStyle{})
	v.Markers([]render.Marker{{At: bars[1].At, Label: "1"}})
	m.ColorBar(render.Diverging, lo*1e6, hi*1e6, "offset [µm]")
	if err := m.EncodePNG(io.Discard); err != nil {
		fmt.Println(err)
	}
	fmt.Println("map", m.Bounds())

	p := &render.Plot{
		Title:  "Coupling against offset",
		XLabel: "offset [mil]",
		Axes: []*render.Axes{{
			YLabel: "coupling [dB]",
			Lines:  []render.Line{{Label: "coupling", X: []float64{-2, -1, 0, 1, 2}, Y: []float64{-3.4, -3.1, -3.0, -3.1, -3.4}}},
			Bands:  []render.Band{{Lo: -3.25, Hi: -2.75, Label: "spec"}},
			VLines: []render.VLine{{X: -1.5, Label: "−1.5 mil"}, {X: 1.5, Label: "+1.5 mil"}},
		}},
	}
	c := p.Render(800, 500)
	fmt.Println("plot", c.Bounds())
	// Output:
	// map (0,0)-(600,966)
	// plot (0,0)-(800,500)
}
