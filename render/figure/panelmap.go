package figure

import (
	"github.com/regdrift/regdrift/panel/unit"
	"image/color"
	"math"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// axisUnit returns the unit of the panel axes for u: millimetres when panel
// coordinates are in mm, inches otherwise.
func axisUnit(u unit.Output) render.LengthUnit {
	if u.Panel() == "mm" {
		return render.Millimetre
	}
	return render.Inch
}

// toRect converts a panel rectangle for drawing.
func toRect(r panel.Rect) render.Rect {
	return render.Rect{Min: render.Point{X: r.Min.X, Y: r.Min.Y}, Max: render.Point{X: r.Max.X, Y: r.Max.Y}}
}

// newPanelMap lays out a map of in's panel outline with axes in u's panel
// unit; spec gives the width, views, title and captions.
func newPanelMap(in *drift.Input, u unit.Output, spec render.MapSpec) *render.Map {
	spec.Extent = toRect(in.Layout.Panel.Outline())
	spec.Unit = axisUnit(u)
	return render.NewMap(spec)
}

// fieldGrid samples f over in's usable area on nx columns and as many rows
// as keep the cells square (at least 40 each way).
func fieldGrid(in *drift.Input, nx int, f func(x, y float64) float64) *render.Grid {
	ur := toRect(in.Layout.Panel.Usable())
	nx = max(nx, 40)
	ny := max(int(float64(nx)*ur.Dy()/ur.Dx()), 40)
	return render.NewGrid(ur, nx, ny, f)
}

// drawPanel draws the field grid g on v, the border of the usable area
// (dashed), the panel outline and, with parts, the outline of every part at
// least minPartPixels across.
func drawPanel(v *render.View, in *drift.Input, g *render.Grid, pal *render.Palette, lo, hi float64, parts bool) {
	v.FieldGrid(g, pal, lo, hi)
	v.StrokeRect(toRect(in.Layout.Panel.Usable()), render.LineStyle{Color: render.Frame, Dash: []float64{6, 4}})
	v.StrokeRect(toRect(in.Layout.Panel.Outline()), render.LineStyle{Color: render.Ink, Width: 2})
	if !parts {
		return
	}
	var rs []render.Rect
	for _, pi := range in.Instances {
		if pi.Array < 0 {
			continue
		}
		sz := pi.Bounds.Size()
		if v.PixelLen(math.Min(sz.X, sz.Y)) < minPartPixels {
			continue
		}
		rs = append(rs, toRect(pi.Bounds))
	}
	v.StrokeRects(rs, render.LineStyle{Color: render.Frame})
}

// minPartPixels is the smallest part, in pixels across, whose outline is
// drawn: below it the outlines merge into a grey wash over the field.
const minPartPixels = 12

// zoneField returns the field of quantity q over the zones of a (each
// zone's first kind), scaled by scale, evaluated by the analysis's own
// evaluators. zones may come from another analysis of the same input (the
// state before compensation), so that two maps show the same kinds.
func zoneField(a *drift.Analysis, zones []drift.Zone, q drift.Quantity, scale float64) func(x, y float64) float64 {
	ev := evaluators(a)
	return func(x, y float64) float64 {
		p := panel.Vec{X: x, Y: y}
		k := drift.ZoneAt(zones, p).Kinds[0]
		return ev[k.Section].Value(q, p, k.U) * scale
	}
}

// lowestField returns the field of quantity q over the zones of a, the
// lowest over each zone's kinds, scaled by scale.
func lowestField(a *drift.Analysis, zones []drift.Zone, q drift.Quantity, scale float64) func(x, y float64) float64 {
	ev := evaluators(a)
	return func(x, y float64) float64 {
		p := panel.Vec{X: x, Y: y}
		v := math.Inf(1)
		for _, k := range drift.ZoneAt(zones, p).Kinds {
			v = math.Min(v, ev[k.Section].Value(q, p, k.U))
		}
		return v * scale
	}
}

func evaluators(a *drift.Analysis) []drift.Evaluator {
	ev := make([]drift.Evaluator, len(a.In.Sections))
	for i := range ev {
		if a.Used(i) {
			ev[i] = a.Evaluator(i)
		}
	}
	return ev
}

// siteBars returns a bar per site of a along its lines (drift.Input.BarLength
// long), coloured by colour of the site and its index.
func siteBars(a *drift.Analysis, colour func(k int, r *drift.Site) color.RGBA) []render.Bar {
	return siteBarsOf(a, nil, colour)
}

// siteBarsOf returns the bars of siteBars for the sites that keep accepts
// (every site when keep is nil).
func siteBarsOf(a *drift.Analysis, keep func(*drift.Site) bool, colour func(k int, r *drift.Site) color.RGBA) []render.Bar {
	l := a.In.BarLength()
	bars := make([]render.Bar, 0, len(a.Sites))
	for i := range a.Sites {
		r := &a.Sites[i]
		if keep != nil && !keep(r) {
			continue
		}
		bars = append(bars, render.Bar{At: render.Point{X: r.Site.Pos.X, Y: r.Site.Pos.Y}, Length: l, Angle: r.Site.Angle, Color: colour(i, r)})
	}
	return bars
}
