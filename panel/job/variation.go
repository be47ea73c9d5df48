package job

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// Variation terms: [[variation]] tables, read into a process.Model.
//
//	[[variation]]
//	name       = "press profile of K1"
//	on         = "K1"            # a dielectric, a copper layer, a plating step "L1/2", or "mask"
//	quantity   = "thickness"     # thickness | er | width | etch | copper | mask
//	panel      = { mean = "0 mil", sigma = "0.25 mil" }   # or a fixed value, or half_width with dist = "uniform"
//	shape      = { kind = "dome", centre_minus_edge = "0.4 mil" }
//	site_sigma = "0.05 mil"
//
// Shapes: { kind = "dome", centre_minus_edge = A }, { kind = "edge",
// at_edge = A, decay = L }, { kind = "tilt", along = "x"|"y", end_to_end =
// A }, { kind = "grid", file = "values.csv" } (columns x, y, value with
// units; package process). A value of er is a plain number; every other
// value is a length with its unit.

// variationSigmas is how many standard deviations below its nominal a
// varied thickness, width or εr must stay physical: a normal tail beyond
// 6σ holds Φ(−6) = 9.9e-10 (Abramowitz & Stegun 26.2.29), below one site
// in a million panels of a thousand sites.
const variationSigmas = 6

// maxErChange bounds a term of εr: no laminate's εr moves by 10 from panel
// to panel; a value typed in the wrong place is caught.
const maxErChange = 10.0

// variationKeys are the keys of a [[variation]] table.
var variationKeys = map[string]bool{"name": true, "on": true, "quantity": true, "panel": true, "shape": true, "site_sigma": true}

// buildVariation reads the [[variation]] tables of every file into
// j.Process (nil when there are none).
func (l *loader) buildVariation() error {
	j := l.job
	if len(l.variations) == 0 {
		return nil
	}
	m := &process.Model{Size: j.Layout.Panel.Size}
	for i, raw := range l.variations {
		t, err := l.variationTerm(l.variationSrc[i], raw)
		if err != nil {
			return err
		}
		if t.Name == "" {
			t.Name = fmt.Sprintf("variation %d", i+1)
		}
		if f := l.variationSrc[i].f.name; f != j.File {
			t.File = f // a shared process file: the analysis folds its idle terms into one line
		}
		m.Terms = append(m.Terms, t)
	}
	j.Process = m
	return nil
}

// variationTerm reads one [[variation]] table.
func (l *loader) variationTerm(src source, raw map[string]any) (process.Term, error) {
	var t process.Term
	keys := make([]string, 0, len(raw))
	for k := range raw {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if !variationKeys[k] {
			return t, src.errf(k, "%w %q (keys: name, on, quantity, panel, shape, site_sigma)", ErrUnknownKey, k)
		}
	}
	if v, ok := raw["name"]; ok {
		s, ok := v.(string)
		if !ok {
			return t, src.errf("name", "%w: want a string", ErrValue)
		}
		t.Name = s
	}
	on, ok := raw["on"].(string)
	if !ok || on == "" {
		return t, src.errf("on", "%w: a variation names what it acts on: a dielectric's name, a copper layer, a plating step such as \"L1/2\", or \"mask\"", ErrMissing)
	}
	qs, ok := raw["quantity"].(string)
	if !ok {
		return t, src.errf("quantity", "%w: give quantity = \"thickness\", \"er\", \"width\", \"etch\", \"copper\" or \"mask\"", ErrMissing)
	}
	q, ok := process.ParseQuantity(qs)
	if !ok {
		return t, src.errf("quantity", "%w: unknown quantity %q (want thickness, er, width, etch, copper or mask)", ErrValue, qs)
	}
	t.On, t.Quantity = on, q
	nominal, err := l.variationTarget(src, &t)
	if err != nil {
		return t, err
	}
	read := func(key string, v any, def *float64) (float64, error) {
		return variationValue(src, key, v, q.IsLength(), def)
	}
	if v, ok := raw["panel"]; ok {
		if t.Panel, err = variationPanel(src, "panel", v, read); err != nil {
			return t, err
		}
	}
	if v, ok := raw["site_sigma"]; ok {
		if t.SiteSigma, err = read("site_sigma", v, nil); err != nil {
			return t, err
		}
		if t.SiteSigma < 0 {
			return t, src.errf("site_sigma", "%w: site_sigma must be non-negative", ErrValue)
		}
	}
	if v, ok := raw["shape"]; ok {
		if t.Shape, err = l.variationShape(src, v, q.IsLength(), read); err != nil {
			return t, err
		}
	}
	return t, checkVariationReach(src, &t, nominal, l.job.Layout.Panel.Size, l.usableHalf())
}

// usableHalf returns the half-size of the panel's usable area (inside the
// border), where sites may be.
func (l *loader) usableHalf() panel.Vec {
	p := l.job.Layout.Panel
	return panel.Vec{X: p.Size.X/2 - p.Border, Y: p.Size.Y/2 - p.Border}
}

// variationTarget resolves t.On in the stackup, checks that it can take
// t.Quantity, and returns the nominal value the term varies (m, or εr; 0
// for an etch, which may be nominally zero).
func (l *loader) variationTarget(src source, t *process.Term) (float64, error) {
	st := l.job.Stackup
	if t.On == "mask" {
		if st.Mask == nil {
			// A shared process file may describe the mask for the jobs that
			// have one; here the term moves nothing (the analysis says so).
			switch t.Quantity {
			case process.Thickness, process.Mask:
				t.Quantity = process.Mask
				return math.Inf(1), nil
			case process.Er:
				return math.Inf(1), nil
			}
			return 0, src.errf("quantity", "%w: the mask takes quantity \"mask\" (its coat) or \"er\", not %q", ErrValue, t.Quantity)
		}
		switch t.Quantity {
		case process.Thickness, process.Mask:
			t.Quantity = process.Mask
			return math.Min(st.Mask.OverLaminate, st.Mask.OverCopper), nil
		case process.Er:
			return st.Mask.Er, nil
		}
		return 0, src.errf("quantity", "%w: the mask takes quantity \"mask\" (its coat) or \"er\", not %q", ErrValue, t.Quantity)
	}
	name, stepText, isStep := strings.Cut(t.On, "/")
	idx := -1
	for i, ly := range st.Layers {
		if ly.Name == name {
			idx = i
		}
	}
	if idx < 0 {
		return 0, src.errf("on", "%w: no layer named %q in the stackup (name a dielectric with name = \"...\" to address it)", ErrValue, name)
	}
	ly := st.Layers[idx]
	t.Layer = name
	if isStep {
		n, err := strconv.Atoi(stepText)
		if ly.Kind != section.Copper || err != nil || n < 1 || n > len(ly.Plating) {
			return 0, src.errf("on", "%w: %q is not a plating step: layer %s has %d plating step(s), addressed as %s/1 ... (1-based)", ErrValue, t.On, name, len(ly.Plating), name)
		}
		t.Step = n
		if t.Quantity != process.Copper && t.Quantity != process.Thickness {
			return 0, src.errf("quantity", "%w: a plating step takes quantity \"copper\", not %q", ErrValue, t.Quantity)
		}
		t.Quantity = process.Copper
		return ly.Plating[n-1], nil
	}
	if ly.Kind == section.Dielectric {
		switch t.Quantity {
		case process.Thickness:
			return ly.Thickness, nil
		case process.Er:
			return ly.Er, nil
		}
		return 0, src.errf("quantity", "%w: dielectric %s takes quantity \"thickness\" or \"er\", not %q", ErrValue, name, t.Quantity)
	}
	switch t.Quantity {
	case process.Copper, process.Thickness:
		t.Quantity = process.Copper
		if !(ly.Thickness > 0) {
			return 0, src.errf("on", "%w: copper layer %s is an ideal zero-thickness strip; it has no thickness to vary", ErrValue, name)
		}
		return ly.Thickness, nil
	case process.Width, process.Etch:
		w, e := math.Inf(1), math.Inf(1)
		for _, s := range l.job.Sections {
			for _, tr := range s.Traces {
				if tr.Layer == name {
					w, e = math.Min(w, tr.Width), math.Min(e, tr.Etch)
				}
			}
		}
		if math.IsInf(w, 1) {
			// No section etches a trace on this layer: a shared process file
			// may carry every layer's etch, and here the term moves nothing
			// (the analysis says so). Nothing can turn non-positive.
			return math.Inf(1), nil
		}
		if t.Quantity == process.Width {
			return w, nil
		}
		return e, nil
	}
	return 0, src.errf("quantity", "%w: copper layer %s takes quantity \"copper\", \"width\" or \"etch\", not %q", ErrValue, name, t.Quantity)
}

// variationValue reads one value of a term: a length with its unit, or for
// εr a plain number.
func variationValue(src source, key string, v any, length bool, def *float64) (float64, error) {
	if length {
		x, err := quantity(src, key, v, unit.Length, def)
		if err != nil {
			return 0, err
		}
		if math.Abs(x) > panel.MaxPanelSize {
			return 0, src.errf(key, "%w: %s is not a plausible process variation", ErrValue, unit.Format(x, unit.Length, "mil", 4))
		}
		return x, nil
	}
	if v == nil && def != nil {
		return *def, nil
	}
	x, ok, err := number(src, key, v)
	if err != nil {
		return 0, err
	}
	if !ok {
		return 0, src.errf(key, "%w: give a plain number (a change of εr)", ErrMissing)
	}
	if math.Abs(x) > maxErChange {
		return 0, src.errf(key, "%w: a change of εr by %g is not plausible (at most %g)", ErrValue, x, maxErChange)
	}
	return x, nil
}

// variationPanel reads the panel-to-panel part: a fixed value, { mean,
// sigma } or { mean, half_width, dist = "uniform" }, as a contributor term.
func variationPanel(src source, key string, v any, read func(string, any, *float64) (float64, error)) (registration.Term, error) {
	m, ok := v.(map[string]any)
	if !ok {
		x, err := read(key, v, nil)
		return registration.Term{Mean: x}, err
	}
	for k := range m {
		switch k {
		case "mean", "sigma", "half_width", "dist":
		default:
			return registration.Term{}, src.errf(key+"."+k, "%w %q (want mean, sigma, or half_width with dist = \"uniform\")", ErrUnknownKey, k)
		}
	}
	zero := 0.0
	mean, err := read(key+".mean", m["mean"], &zero)
	if err != nil {
		return registration.Term{}, err
	}
	t := registration.Term{Mean: mean}
	dist := "normal"
	if d, ok := m["dist"]; ok {
		s, _ := d.(string)
		if s != "normal" && s != "uniform" {
			return t, src.errf(key+".dist", "%w: dist is \"normal\" or \"uniform\"", ErrValue)
		}
		dist = s
	}
	spreadKey := key + ".sigma"
	if dist == "uniform" {
		if _, ok := m["sigma"]; ok {
			return t, src.errf(key+".sigma", "%w: a uniform term takes half_width, not sigma", ErrValue)
		}
		spreadKey = key + ".half_width"
		if t.Spread, err = read(spreadKey, m["half_width"], nil); err != nil {
			return t, err
		}
		t.Dist = registration.Uniform
	} else {
		if _, ok := m["half_width"]; ok {
			return t, src.errf(key+".half_width", "%w: half_width needs dist = \"uniform\"", ErrValue)
		}
		if t.Spread, err = read(spreadKey, m["sigma"], &zero); err != nil {
			return t, err
		}
		if t.Spread > 0 {
			t.Dist = registration.Normal
		}
	}
	if t.Spread < 0 {
		return t, src.errf(spreadKey, "%w: sigma and half_width must be non-negative", ErrValue)
	}
	return t, nil
}

// shapeAmplitude is the key of each shape's amplitude.
var shapeAmplitude = map[process.ShapeKind]string{process.Dome: "centre_minus_edge", process.Edge: "at_edge", process.Tilt: "end_to_end"}

// variationShape reads shape = { kind = ..., ... }.
func (l *loader) variationShape(src source, v any, length bool, read func(string, any, *float64) (float64, error)) (process.Shape, error) {
	var s process.Shape
	m, ok := v.(map[string]any)
	if !ok {
		return s, src.errf("shape", "%w: want a table such as { kind = \"dome\", centre_minus_edge = \"0.4 mil\" }", ErrValue)
	}
	ks, _ := m["kind"].(string)
	kind, ok := process.ParseShapeKind(ks)
	if !ok {
		return s, src.errf("shape.kind", "%w: shape kind is \"dome\", \"edge\", \"tilt\" or \"grid\"", ErrValue)
	}
	s.Kind = kind
	allowed := map[string]bool{"kind": true}
	switch kind {
	case process.Edge:
		allowed["decay"] = true
	case process.Tilt:
		allowed["along"] = true
	case process.Grid:
		allowed["file"] = true
	}
	if a, ok := shapeAmplitude[kind]; ok {
		allowed[a] = true
	}
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if !allowed[k] {
			want := make([]string, 0, len(allowed))
			for a := range allowed {
				want = append(want, a)
			}
			sort.Strings(want)
			return s, src.errf("shape."+k, "%w %q for the shape %q (its keys: %s)", ErrUnknownKey, k, kind.String(), strings.Join(want, ", "))
		}
	}
	if a, ok := shapeAmplitude[kind]; ok {
		if _, given := m[a]; !given {
			return s, src.errf("shape."+a, "%w: a %s shape needs its amplitude %s", ErrMissing, kind, a)
		}
		x, err := read("shape."+a, m[a], nil)
		if err != nil {
			return s, err
		}
		s.Amplitude = x
	}
	switch kind {
	case process.Edge:
		if _, given := m["decay"]; !given {
			return s, src.errf("shape.decay", "%w: an edge shape needs decay, the length over which it falls to 1/e", ErrMissing)
		}
		d, err := quantity(src, "shape.decay", m["decay"], unit.Length, nil)
		if err != nil {
			return s, err
		}
		if !(d > 0) || d > panel.MaxPanelSize {
			return s, src.errf("shape.decay", "%w: decay must be positive and at most the panel size", ErrValue)
		}
		s.Decay = d
	case process.Tilt:
		switch m["along"] {
		case nil, "x":
		case "y":
			s.AlongY = true
		default:
			return s, src.errf("shape.along", "%w: along is \"x\" or \"y\"", ErrValue)
		}
	case process.Grid:
		f, ok := m["file"].(string)
		if !ok || f == "" {
			return s, src.errf("shape.file", "%w: a grid shape needs file = \"values.csv\" (columns x, y, value with units)", ErrMissing)
		}
		p := f
		if !filepath.IsAbs(p) {
			p = filepath.Join(src.f.dir, f)
		}
		fh, err := os.Open(p)
		if err != nil {
			return s, src.err("shape.file", err)
		}
		g, err := process.ReadGrid(fh, p, length)
		fh.Close()
		if err != nil {
			return s, err
		}
		if !process.Covers(g, l.usableHalf()) {
			h := l.usableHalf()
			return s, src.errf("shape.file", "%w: the grid in %s spans x %.4g to %.4g in, y %.4g to %.4g in; it must cover the usable panel (x ±%.4g in, y ±%.4g in)",
				ErrValue, p, g.X[0]/unit.Inch, g.X[len(g.X)-1]/unit.Inch, g.Y[0]/unit.Inch, g.Y[len(g.Y)-1]/unit.Inch, h.X/unit.Inch, h.Y/unit.Inch)
		}
		s.Values = g
	}
	return s, nil
}

// checkVariationReach refuses a term that can make its quantity
// unphysical at some site within variationSigmas: a thickness or width
// non-positive, an etch negative, an εr below 1. The reach is the lowest
// value of the shape over the usable panel plus the panel mean, less
// variationSigmas standard deviations of the normal parts and a uniform
// part's half-width.
func checkVariationReach(src source, t *process.Term, nominal float64, size, half panel.Vec) error {
	lo, _ := t.Shape.Range(half, size)
	normal := t.SiteSigma * t.SiteSigma
	var box float64
	if t.Panel.Dist == registration.Uniform {
		box = t.Panel.Spread
	} else {
		normal += t.Panel.Variance()
	}
	low := nominal + t.Panel.Mean + lo - variationSigmas*math.Sqrt(normal) - box
	var bad bool
	var what string
	switch t.Quantity {
	case process.Er:
		bad, what = low < 1, "below 1"
	case process.Etch:
		bad, what = low < 0, "negative"
	default:
		bad, what = !(low > 0), "non-positive"
	}
	if !bad {
		return nil
	}
	key := "panel"
	switch {
	case t.SiteSigma > 0 && t.Panel.Spread == 0:
		key = "site_sigma"
	case t.Panel.Spread == 0 && t.Shape.Kind != process.Flat:
		key = "shape"
	}
	f := func(v float64) string {
		if t.Quantity.IsLength() {
			return unit.Format(v, unit.Length, "mil", 4)
		}
		return strconv.FormatFloat(v, 'g', 4, 64)
	}
	return src.errf(key, "%w: %s of %s would be %s at some site within %d sigma (nominal %s, lowest %s)",
		ErrValue, t.Quantity, t.On, what, variationSigmas, f(nominal), f(low))
}
