package figure

import (
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"io"
	"math"
	"slices"
	"strings"

	"github.com/fogleman/gg"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/render"
)

// Colours of the cross-section: copper, two resin families told apart by
// hue (cores cool, prepregs warm), the mask green as boards show it, air the
// page. Each dielectric's tint darkens a little with its εr so that two
// neighbours of one family still differ.
var (
	copperFill  = color.RGBA{196, 122, 64, 255}
	copperEdge  = color.RGBA{120, 66, 28, 255}
	coreTint    = [3]float64{206, 228, 222}
	prepregTint = [3]float64{242, 230, 204}
	maskFill    = color.RGBA{70, 150, 90, 150}
	meshLine    = color.RGBA{30, 30, 50, 170}
	dimInk      = color.RGBA{20, 60, 150, 255}
)

// Layout of section.png, in em (the body text size) or pixels.
const (
	sectionWidth  = 1800
	sectionEm     = 17.0
	minRowPx      = 16.0 // thinnest drawn row: a thinner layer is drawn this tall and marked
	maxDrawPx     = 980  // tallest drawing
	labelColumnPx = 640  // width of the layer labels on the right
)

// vrow is one horizontal row of the picture: an interval of y (m) and its
// drawn height.
type vrow struct {
	y0, y1 float64
	px     float64
	raised bool // drawn taller than to scale
}

// vscale maps y (m) to pixels: to scale at s px/m, row by row, each row at
// least minRowPx tall.
type vscale struct {
	rows []vrow // top to bottom
	top  float64
	s    float64
}

func newVScale(breaks []float64, s, top float64) vscale {
	slices.Sort(breaks)
	breaks = slices.Compact(breaks)
	v := vscale{top: top, s: s}
	for i := len(breaks) - 1; i > 0; i-- {
		y0, y1 := breaks[i-1], breaks[i]
		if y1-y0 <= 1e-12 {
			continue
		}
		px := (y1 - y0) * s
		r := vrow{y0: y0, y1: y1, px: math.Max(px, minRowPx)}
		r.raised = px < minRowPx
		v.rows = append(v.rows, r)
	}
	return v
}

func (v vscale) height() float64 {
	h := 0.0
	for _, r := range v.rows {
		h += r.px
	}
	return h
}

// py returns the pixel row of y; outside the rows it continues to scale.
func (v vscale) py(y float64) float64 {
	p := v.top
	if len(v.rows) == 0 || y >= v.rows[0].y1 {
		if len(v.rows) > 0 {
			return p - (y-v.rows[0].y1)*v.s
		}
		return p
	}
	for _, r := range v.rows {
		if y >= r.y0 {
			return p + (r.y1-y)/(r.y1-r.y0)*r.px
		}
		p += r.px
	}
	last := v.rows[len(v.rows)-1]
	return p + (last.y0-y)*v.s
}

// raised reports whether any row within [y0, y1] is drawn taller than to scale.
func (v vscale) raised(y0, y1 float64) bool {
	for _, r := range v.rows {
		if r.raised && r.y0 < y1-1e-12 && r.y1 > y0+1e-12 {
			return true
		}
	}
	return false
}

// Section draws the cross-section d of s as the field solver meshes it
// (section.png): each layer of the solved domain shaded and labelled with
// its name, kind, thickness and εr (copper: foil, plating steps and the
// finished thickness); the ground planes; the two traces as their
// trapezoids with their foot and far-face widths; the solder mask; the
// offset between the trace centres dimensioned; and, when m is not nil, the
// mesh overlaid. To scale in both directions, except that a layer thinner
// than minRowPx pixels is drawn that tall (its label says so).
func Section(w io.Writer, s *section.Section, d *section.Drawing, m *section.DrawnMesh, u unit.Output) error {
	ls := s.Stackup.Layers
	L := func(v float64) string { return fmt.Sprintf("%.2f %s", v/u.LengthSI(), u.Length()) }
	far := func(v float64) string { return fmt.Sprintf("%.0f %s", v/u.LengthSI(), u.Length()) } // a distance to a wall

	// Horizontal extent: the traces with room around them.
	xlo, xhi := math.Inf(1), math.Inf(-1)
	for _, t := range d.Traces {
		for _, c := range t.Corners {
			xlo, xhi = math.Min(xlo, c.X), math.Max(xhi, c.X)
		}
	}
	if d.Mask != nil {
		for _, c := range d.Mask.Coats {
			for _, p := range c {
				xlo, xhi = math.Min(xlo, p.X), math.Max(xhi, p.X)
			}
		}
	}
	H := d.Top - d.Bottom
	pad := math.Max(0.3*(xhi-xlo), 0.5*H)
	xlo, xhi = math.Max(xlo-pad, d.Walls[0]), math.Min(xhi+pad, d.Walls[1])

	const left = 40.0
	drawW := float64(sectionWidth) - left - labelColumnPx
	sc := drawW / (xhi - xlo)
	// Rows: every layer face, the mask's faces and, for a microstrip, the
	// air beyond the stack (a band half the stack high, then cut).
	var breaks []float64
	for _, l := range d.Layers {
		breaks = append(breaks, l.Y0, l.Y1)
	}
	var airLo, airHi float64 // the air band shown, y
	if d.Microstrip {
		outer := d.Top
		dir := 1.0
		if d.Bottom < 0 { // the stack runs down from the ground
			outer, dir = d.Bottom, -1
		}
		edge := outer
		if mk := d.Mask; mk != nil {
			for _, y := range []float64{mk.Y0, mk.Top} {
				breaks = append(breaks, y)
				if (y-edge)*dir > 0 {
					edge = y
				}
			}
			for _, c := range mk.Coats {
				for _, p := range c {
					breaks = append(breaks, p.Y)
					if (p.Y-edge)*dir > 0 {
						edge = p.Y
					}
				}
			}
		}
		far := edge + dir*math.Max(0.5*H, 3*(math.Abs(edge-outer)))
		airLo, airHi = math.Min(outer, far), math.Max(outer, far)
		breaks = append(breaks, far)
	}
	vs := newVScale(breaks, sc, 0)
	for vs.height() > maxDrawPx && sc > 1e-3 {
		sc *= 0.95
		vs = newVScale(breaks, sc, 0)
	}
	drawW = sc * (xhi - xlo)

	em := sectionEm
	titleH := 3.6 * em
	drawTop := titleH + 4.2*em // room for the upper dimension lines
	notesH := 10 * em
	height := int(drawTop + vs.height() + 5*em + notesH)
	cv := render.NewSketch(sectionWidth, height, em)
	dc := cv.Context()
	vs.top = drawTop
	px := func(x float64) float64 { return left + (x-xlo)*sc }
	py := vs.py
	yTop, yBot := drawTop, drawTop+vs.height()

	// Title.
	kind := "stripline"
	if d.Microstrip {
		kind = "microstrip"
	}
	pair := "broadside"
	if s.Traces[0].Layer == s.Traces[1].Layer {
		pair = "edge-coupled"
	}
	cv.Text(fmt.Sprintf("Section %s: the cross-section as the field solver meshes it (%s %s pair, offset %s)", s.Name, pair, kind, L(d.Offset)),
		left, 1.2*em, 0, 0.5, render.TextStyle{Size: 1.25, Bold: true})
	scaleNote := fmt.Sprintf("to scale, %.3g px per %s, in both directions", sc*u.LengthSI(), u.Length())
	if anyRaised(vs) {
		scaleNote += fmt.Sprintf("; layers thinner than %s are drawn %.0f px tall (marked * in their label)", L(minRowPx/sc), minRowPx)
	}
	cv.Text(scaleNote, left, 2.7*em, 0, 0.5, render.TextStyle{})

	// The layers, straight into the pixels (axis-aligned rectangles).
	img := cv.Image()
	fillBand := func(y0, y1 float64, col color.RGBA) {
		fillRect(img, left, py(y1), left+drawW, py(y0), col)
	}
	for _, l := range d.Layers {
		lay := ls[l.Index]
		switch {
		case l.Ground:
			fillBand(l.Y0, l.Y1, copperFill)
			hatch(img, left, py(l.Y1), left+drawW, py(l.Y0))
		case lay.Kind == section.Dielectric:
			fillBand(l.Y0, l.Y1, dielectricTint(lay))
		default: // a copper slab: the resin around its traces
			col := render.Background
			if l.ResinFrom >= 0 {
				col = dielectricTint(ls[l.ResinFrom])
			}
			fillBand(l.Y0, l.Y1, col)
		}
	}
	// Mask, then the copper over it.
	if mk := d.Mask; mk != nil {
		fillBand(mk.Y0, mk.Top, maskFill)
		for _, c := range mk.Coats {
			if c == nil {
				continue
			}
			dc.SetColor(maskFill)
			polygon(dc, c, px, py)
			dc.Fill()
		}
	}
	for _, t := range d.Traces {
		cs := t.Corners[:]
		if t.Y1 == t.Y0 { // an ideal zero-thickness strip: a line
			dc.SetColor(copperEdge)
			dc.SetLineWidth(3)
			dc.DrawLine(px(cs[0].X), py(cs[0].Y), px(cs[1].X), py(cs[1].Y))
			dc.Stroke()
			continue
		}
		dc.SetColor(copperFill)
		polygon(dc, cs, px, py)
		dc.FillPreserve()
		dc.SetColor(copperEdge)
		dc.SetLineWidth(1.5)
		dc.Stroke()
	}
	// Layer faces.
	dc.SetColor(render.Frame)
	dc.SetLineWidth(1)
	for _, l := range d.Layers {
		for _, y := range []float64{l.Y0, l.Y1} {
			dc.DrawLine(left, py(y), left+drawW, py(y))
		}
	}
	dc.Stroke()
	if m != nil {
		drawMesh(img, m, px, py, left, yTop-0.6*em, left+drawW, yBot+0.6*em)
	}
	dc.SetColor(render.Frame)
	dc.SetLineWidth(1)
	dc.DrawRectangle(left, yTop-0.6*em, drawW, vs.height()+1.2*em)
	dc.Stroke()

	// Dimensions: each trace's foot and far-face widths on the side away
	// from the other trace (broadside), both above (edge-coupled).
	upper := 0
	if d.Traces[1].Y1 > d.Traces[0].Y1 {
		upper = 1
	}
	for k, t := range d.Traces {
		above := k == upper || pair == "edge-coupled"
		var yEdge float64 // face the dimension stands off from
		if above {
			yEdge = py(t.Y1)
		} else {
			yEdge = py(t.Y0)
		}
		// The foot's corners: the face the trace was etched from.
		fl, fr := t.Corners[0].X, t.Corners[1].X
		if !t.FootLow {
			fl, fr = t.Corners[3].X, t.Corners[2].X
		}
		// Beside the trace when the dielectric there has room, else beyond
		// the drawing.
		var yDim float64
		if above {
			room := yEdge - py(d.Top)
			yDim = yEdge - 1.8*em
			if room < 3.5*em {
				yDim = yTop - 1.6*em
			}
		} else {
			room := py(d.Bottom) - yEdge
			yDim = yEdge + 1.8*em
			if room < 3.5*em {
				yDim = yBot + 1.6*em
			}
		}
		label := fmt.Sprintf("%s trace: foot %s, far face %s", t.Layer, L(t.Foot), L(t.Far))
		dimension(cv, px(fl), px(fr), yDim, yEdge, label, above, m != nil)
	}
	// Offset between the centres, below the drawing; the gap of an
	// edge-coupled pair beside it.
	c0, c1 := px(d.Traces[0].Centre), px(d.Traces[1].Centre)
	dc.SetColor(dimInk)
	dc.SetLineWidth(1)
	dc.SetDash(8, 4, 2, 4)
	for _, c := range []float64{c0, c1} {
		dc.DrawLine(c, yTop-0.6*em, c, yBot+4.2*em)
	}
	dc.Stroke()
	dc.SetDash()
	yOff := yBot + 3.8*em
	offText := fmt.Sprintf("offset %s (upper %s minus lower %s, centre to centre; design offset %s)", L(d.Offset), s.Traces[0].Layer, s.Traces[1].Layer, L(s.NominalOffset()))
	if pair == "edge-coupled" {
		offText = fmt.Sprintf("centres %s apart; gap %s at the foot", L(math.Abs(d.Offset)), L(math.Abs(d.Offset)-(d.Traces[0].Foot+d.Traces[1].Foot)/2))
	}
	if math.Abs(c0-c1) > 2 {
		arrowLine(dc, math.Min(c0, c1), math.Max(c0, c1), yOff)
	}
	cv.Text(offText, math.Max(c0, c1)+0.8*em, yOff, 0, 0.5, render.TextStyle{Color: dimInk})

	// Scale bar: a round length about a tenth of the view.
	bar := niceLength(0.12 * (xhi - xlo) / u.LengthSI())
	bx := left + 0.5*em
	by := yBot + 5.6*em
	dc.SetColor(render.Ink)
	dc.SetLineWidth(3)
	dc.DrawLine(bx, by, bx+bar*u.LengthSI()*sc, by)
	dc.Stroke()
	cv.Text(fmt.Sprintf("%g %s", bar, u.Length()), bx+bar*u.LengthSI()*sc+0.6*em, by, 0, 0.5, render.TextStyle{})

	// Layer labels, each at its row, spread apart where rows are thin, with
	// a leader to the row.
	type lab struct {
		y    float64 // wanted centre, px
		text string
		bold bool
	}
	var labs []lab
	if d.Microstrip {
		labs = append(labs, lab{y: (py(airLo) + py(airHi)) / 2, text: "air (εr 1), open to the solver's far box"})
	}
	for _, l := range d.Layers {
		lay := ls[l.Index]
		star := ""
		if vs.raised(l.Y0, l.Y1) {
			star = " *"
		}
		var t string
		switch {
		case l.Ground:
			t = fmt.Sprintf("%s  ground plane  %s%s", lay.Name, L(lay.Thickness), star)
			if b := buildText(lay, u); b != "" {
				t += " = " + b
			}
		case lay.Kind == section.Dielectric:
			t = fmt.Sprintf("%s  %s  %s  εr %.2f%s", dielectricName(ls, l.Index), coreOrPrepreg(lay), L(lay.Thickness), lay.Er, star)
		default:
			resin := "air"
			if l.ResinFrom >= 0 {
				resin = fmt.Sprintf("resin εr %.2f of %s", ls[l.ResinFrom].Er, dielectricName(ls, l.ResinFrom))
			}
			where := "beside the traces"
			if lay.Name != d.Traces[0].Layer && lay.Name != d.Traces[1].Layer {
				where = "no trace here, the slab is"
			}
			t = fmt.Sprintf("%s  copper %s%s\n", lay.Name, L(lay.Thickness), star)
			if b := buildText(lay, u); b != "" {
				t += b + "; "
			}
			t += where + ": " + resin
		}
		labs = append(labs, lab{y: (py(l.Y0) + py(l.Y1)) / 2, text: t, bold: l.Ground || lay.Kind == section.Copper})
	}
	if mk := d.Mask; mk != nil {
		labs = append(labs, lab{y: (py(mk.Y0) + py(mk.Top)) / 2,
			text: fmt.Sprintf("solder mask εr %.2f: %s over the laminate, %s over the copper", mk.Er, L(mk.OverLaminate), L(mk.OverCopper))})
	}
	slices.SortStableFunc(labs, func(a, b lab) int { return cmpFloat(a.y, b.y) })
	// Centres at least half of each neighbour's height apart, plus a gap.
	lineH := 1.25 * em
	hOf := func(l lab) float64 { return float64(strings.Count(l.text, "\n")+1) * lineH }
	ys := make([]float64, len(labs))
	spread := func() {
		for i := 1; i < len(ys); i++ {
			if need := ys[i-1] + (hOf(labs[i-1])+hOf(labs[i]))/2 + 0.2*em; ys[i] < need {
				ys[i] = need
			}
		}
	}
	for i, l := range labs {
		ys[i] = l.y
	}
	spread()
	// Centre the spread block on the rows it labels where it overflows.
	if n := len(ys); n > 0 {
		shift := 0.0
		for i := range ys {
			shift += labs[i].y - ys[i]
		}
		shift /= float64(n)
		for i := range ys {
			ys[i] += shift
		}
		spread()
	}
	lx := left + drawW + 2.5*em
	for i, l := range labs {
		dc.SetColor(render.Frame)
		dc.SetLineWidth(1)
		dc.DrawLine(left+drawW+2, l.y, lx-0.8*em, ys[i])
		dc.DrawLine(lx-0.8*em, ys[i], lx-0.3*em, ys[i])
		dc.Stroke()
		lines := strings.Split(l.text, "\n")
		y0 := ys[i] - float64(len(lines)-1)*lineH/2
		for k, line := range lines {
			cv.Text(line, lx, y0+float64(k)*lineH, 0, 0.5, render.TextStyle{Size: 0.95, Bold: l.bold && k == 0})
		}
	}

	// Notes.
	var notes []string
	if len(d.Omitted) > 0 {
		var o []string
		for _, i := range d.Omitted {
			if ls[i].Kind == section.Copper {
				o = append(o, ls[i].Name)
			} else {
				o = append(o, dielectricName(ls, i))
			}
		}
		notes = append(notes, "Beyond the grounds, not in the solve: "+strings.Join(o, ", ")+".")
	}
	if d.Microstrip {
		notes = append(notes, fmt.Sprintf("The solved region is closed by a grounded box %s from the traces (its field there is negligible).", far(d.Walls[1]-d.Traces[0].Centre)))
	} else {
		notes = append(notes, fmt.Sprintf("The solved region runs %s left and %s right of the lower trace's centre to side walls of zero normal field; the view is cut.", far(d.Traces[1].Centre-d.Walls[0]), far(d.Walls[1]-d.Traces[1].Centre)))
	}
	for _, l := range d.Layers {
		if ls[l.Index].Kind == section.Dielectric && ls[l.Index].Name == "" {
			notes = append(notes, "An unnamed dielectric is called by its place in the stackup: layer N is the job's Nth stackup entry, counted from the top.")
			break
		}
	}
	notes = append(notes, "Each trace stands on the face of the dielectric it was etched on (its foot); the rest of its copper layer is resin of the neighbouring dielectric.")
	if m != nil {
		mn := fmt.Sprintf("Mesh: level %.3g, %d unknowns, as solved at this offset; the fine mesh of the Richardson pair halves every element.", m.Level, m.Unknowns)
		if m.Blend > 0 {
			mn += fmt.Sprintf(" This offset lies in a transition window: a second mesh, weight %.2f, is blended in.", m.Blend)
		}
		notes = append(notes, mn)
	}
	ny := by + 1.6*em
	for _, n := range notes {
		for _, line := range wrapText(cv, n, float64(sectionWidth)-2*left, render.TextStyle{Size: 0.95}) {
			cv.Text(line, left, ny, 0, 0.5, render.TextStyle{Size: 0.95})
			ny += 1.4 * em
		}
	}
	return cv.EncodePNG(w)
}

func anyRaised(v vscale) bool {
	for _, r := range v.rows {
		if r.raised {
			return true
		}
	}
	return false
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// dielectricTint shades a dielectric by kind, darker by 4 % per unit of εr
// above 2 (up to 5), so that two neighbours of one kind still differ.
func dielectricTint(l section.Layer) color.RGBA {
	c := prepregTint
	if l.Core {
		c = coreTint
	}
	f := 1 - 0.04*math.Min(3, math.Max(0, l.Er-2))
	return color.RGBA{uint8(c[0] * f), uint8(c[1] * f), uint8(c[2] * f), 255}
}

func coreOrPrepreg(l section.Layer) string {
	if l.Core {
		return "core"
	}
	return "prepreg"
}

// dielectricName returns the dielectric's name, or its place in the stackup.
func dielectricName(ls []section.Layer, i int) string {
	if ls[i].Name != "" {
		return ls[i].Name
	}
	return fmt.Sprintf("layer %d", i+1)
}

// buildText writes a copper layer's foil and plating steps, if given, in
// the output unit: "foil 0.67 + plating 1.00 + 0.30 mil"; "" if not.
func buildText(l section.Layer, u unit.Output) string {
	if l.Foil == 0 && len(l.Plating) == 0 {
		return ""
	}
	parts := []string{fmt.Sprintf("foil %.2f", l.Foil/u.LengthSI())}
	for k, p := range l.Plating {
		pre := ""
		if k == 0 {
			pre = "plating "
		}
		parts = append(parts, fmt.Sprintf("%s%.2f", pre, p/u.LengthSI()))
	}
	return strings.Join(parts, " + ") + " " + u.Length()
}

// wrapText breaks s at spaces into lines no wider than width pixels,
// measuring each word once.
func wrapText(cv *render.Sketch, s string, width float64, ts render.TextStyle) []string {
	space := cv.TextWidth(" ", ts)
	var lines []string
	var line []string
	w := 0.0
	for _, word := range strings.Fields(s) {
		ww := cv.TextWidth(word, ts)
		if len(line) > 0 && w+space+ww > width {
			lines = append(lines, strings.Join(line, " "))
			line, w = nil, 0
		}
		if len(line) > 0 {
			w += space
		}
		line = append(line, word)
		w += ww
	}
	if len(line) > 0 {
		lines = append(lines, strings.Join(line, " "))
	}
	return lines
}

func polygon(dc interface {
	MoveTo(x, y float64)
	LineTo(x, y float64)
	ClosePath()
}, pts []section.XY, px, py func(float64) float64) {
	for i, p := range pts {
		if i == 0 {
			dc.MoveTo(px(p.X), py(p.Y))
		} else {
			dc.LineTo(px(p.X), py(p.Y))
		}
	}
	dc.ClosePath()
}

// fillRect composites col over the pixels of [x0, x1) × [y0, y1).
func fillRect(img *image.RGBA, x0, y0, x1, y1 float64, col color.RGBA) {
	r := image.Rect(int(math.Round(x0)), int(math.Round(y0)), int(math.Round(x1)), int(math.Round(y1)))
	draw.Draw(img, r, &image.Uniform{col}, image.Point{}, draw.Over)
}

// hatch draws diagonal lines, one pixel wide and hatchStep apart, over a
// ground plane's band.
func hatch(img *image.RGBA, x0, y0, x1, y1 float64) {
	const hatchStep = 9
	r := image.Rect(int(math.Round(x0)), int(math.Round(y0)), int(math.Round(x1)), int(math.Round(y1))).Intersect(img.Bounds())
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X + (hatchStep-(r.Min.X+y)%hatchStep)%hatchStep; x < r.Max.X; x += hatchStep {
			img.SetRGBA(x, y, copperEdge)
		}
	}
}

// drawMesh draws every element edge outside the conductors, clipped to the
// box [bx0, bx1] × [by0, by1]. Each edge is sampled at steps under a pixel
// and composited straight into the pixels: a fine mesh has tens of thousands
// of edges, which gg's rasteriser strokes a hundred times slower.
func drawMesh(img *image.RGBA, m *section.DrawnMesh, px, py func(float64) float64, bx0, by0, bx1, by1 float64) {
	ny := m.Ny
	nodeX := make([]float64, len(m.X))
	nodeY := make([]float64, len(m.Y))
	for n := range m.X {
		nodeX[n], nodeY[n] = px(m.X[n]), py(m.Y[n])
	}
	seg := func(a, b int) {
		x0, y0, x1, y1 := nodeX[a], nodeY[a], nodeX[b], nodeY[b]
		if math.Max(x0, x1) < bx0 || math.Min(x0, x1) > bx1 || math.Max(y0, y1) < by0 || math.Min(y0, y1) > by1 {
			return
		}
		steps := int(math.Ceil(math.Max(math.Abs(x1-x0), math.Abs(y1-y0))))
		for k := 0; k <= steps; k++ {
			t := 0.0
			if steps > 0 {
				t = float64(k) / float64(steps)
			}
			x, y := x0+t*(x1-x0), y0+t*(y1-y0)
			if x < bx0 || x > bx1 || y < by0 || y > by1 {
				continue
			}
			blend(img, int(x), int(y), meshLine)
		}
	}
	// Every row and column edge of the grid once; an edge between two
	// conductor elements is skipped.
	cond := func(i, j int) bool { return i >= 0 && j >= 0 && i < m.Nx && j < ny && m.Conductor[i*ny+j] }
	node := func(i, j int) int { return i*(ny+1) + j }
	for i := 0; i <= m.Nx; i++ {
		for j := 0; j <= ny; j++ {
			if i < m.Nx && !(cond(i, j) && cond(i, j-1)) { // row edge (i, j)–(i+1, j)
				seg(node(i, j), node(i+1, j))
			}
			if j < ny && !(cond(i, j) && cond(i-1, j)) { // column edge (i, j)–(i, j+1)
				seg(node(i, j), node(i, j+1))
			}
		}
	}
}

// blend composites col (non-premultiplied alpha) over pixel (x, y).
func blend(img *image.RGBA, x, y int, col color.RGBA) {
	if !(image.Point{x, y}.In(img.Rect)) {
		return
	}
	o := img.PixOffset(x, y)
	a := uint32(col.A)
	p := img.Pix[o : o+3 : o+3]
	p[0] = uint8((uint32(col.R)*a + uint32(p[0])*(255-a)) / 255)
	p[1] = uint8((uint32(col.G)*a + uint32(p[1])*(255-a)) / 255)
	p[2] = uint8((uint32(col.B)*a + uint32(p[2])*(255-a)) / 255)
}

// dimension draws a width dimension from x0 to x1 at height y with
// extension lines to the face at yFace and the label beyond it.
func dimension(cv *render.Sketch, x0, x1, y, yFace float64, label string, above, halo bool) {
	dc := cv.Context()
	em := cv.TextSize()
	dc.SetColor(dimInk)
	dc.SetLineWidth(1)
	ext := 0.4 * em
	if !above {
		ext = -ext
	}
	for _, x := range []float64{x0, x1} {
		dc.DrawLine(x, yFace, x, y-ext)
	}
	dc.Stroke()
	arrowLine(dc, x0, x1, y)
	ly := y - 0.9*em
	if !above {
		ly = y + 0.9*em
	}
	// A halo only over the mesh: each costs twelve more passes of the text.
	cv.Text(label, (x0+x1)/2, ly, 0.5, 0.5, render.TextStyle{Size: 0.95, Color: dimInk, Halo: halo})
}

// arrowLine draws a horizontal line from x0 to x1 with arrowheads at both ends.
func arrowLine(dc *gg.Context, x0, x1, y float64) {
	dc.SetColor(dimInk)
	dc.SetLineWidth(1.2)
	dc.DrawLine(x0, y, x1, y)
	dc.Stroke()
	a := math.Min(8, (x1-x0)/3)
	for _, e := range [][2]float64{{x0, a}, {x1, -a}} {
		dc.MoveTo(e[0], y)
		dc.LineTo(e[0]+e[1], y-a/2)
		dc.LineTo(e[0]+e[1], y+a/2)
		dc.ClosePath()
	}
	dc.Fill()
}
