package job

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"github.com/pelletier/go-toml/v2"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/textfile"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// Raw job-file shapes. Dimensional values are decoded as any so that a bare
// number is reported as a missing unit rather than a type mismatch.
type rawJob struct {
	Title       string           `toml:"title"`
	Include     []string         `toml:"include"`
	Panel       *rawPanel        `toml:"panel"`
	Stackup     *rawStackup      `toml:"stackup"`
	Section     []rawSection     `toml:"section"`
	Part        []rawPart        `toml:"part"`
	Array       []rawArray       `toml:"array"`
	Contributor []map[string]any `toml:"contributor"`
	Variation   []map[string]any `toml:"variation"`
	Sites       []rawSites       `toml:"sites"`
}

type rawPanel struct {
	Size   []any `toml:"size"`
	Border any   `toml:"border"`
	Datum  []any `toml:"datum"`
}

type rawStackup struct {
	Layers []map[string]any `toml:"layers"`
	Mask   map[string]any   `toml:"mask"`
}

type rawSection struct {
	Name         string         `toml:"name"`
	Traces       []rawTrace     `toml:"traces"`
	Grounds      []string       `toml:"grounds"`
	Frequency    any            `toml:"frequency"`
	Length       any            `toml:"length"`
	ZRef         any            `toml:"z_ref"`
	Spec         map[string]any `toml:"spec"`
	DesignOffset any            `toml:"design_offset"`
}

type rawTrace struct {
	Layer string `toml:"layer"`
	Width any    `toml:"width"`
	Etch  any    `toml:"etch"`
	X     any    `toml:"x"`
}

type rawPart struct {
	Name     string       `toml:"name"`
	Size     []any        `toml:"size"`
	Couplers []rawCoupler `toml:"couplers"`
}

type rawCoupler struct {
	Name    string `toml:"name"`
	Section string `toml:"section"`
	At      []any  `toml:"at"`
	Angle   any    `toml:"angle"`
}

type rawArray struct {
	Name    string `toml:"name"`
	Part    string `toml:"part"`
	Product *bool  `toml:"product"` // nil: a product; false: a coupon strip
	Count   []int  `toml:"count"`
	Pitch   []any  `toml:"pitch"`
	Center  []any  `toml:"center"`
	Origin  []any  `toml:"origin"`
	Rotate  any    `toml:"rotate"`
}

type rawSites struct {
	File string `toml:"file"`
}

// parseTOML decodes one job file strictly, with line numbers in its errors.
func parseTOML(data []byte, name string) (*rawJob, *tomlFile, error) {
	f := &tomlFile{name: name}
	data, err := textfile.Decode(data)
	if err != nil {
		return nil, f, &ParseError{File: name, Line: 1, Err: err}
	}
	f.lines = indexLines(data)
	var raw rawJob
	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&raw); err != nil {
		var se *toml.StrictMissingError
		if errors.As(err, &se) && len(se.Errors) > 0 {
			e := se.Errors[0]
			row, _ := e.Position()
			key := f.keyAt(e.Key(), row)
			return nil, f, &ParseError{File: name, Line: row, Key: key, Err: fmt.Errorf("%w %q", ErrUnknownKey, key)}
		}
		var de *toml.DecodeError
		if errors.As(err, &de) {
			row, _ := de.Position()
			return nil, f, &ParseError{File: name, Line: row, Key: f.keyAt(de.Key(), row), Err: decodeError(de.Error())}
		}
		return nil, f, &ParseError{File: name, Err: decodeError(err.Error())}
	}
	if err := checkKeyCase(f); err != nil {
		return nil, f, err
	}
	return &raw, f, nil
}

// loader merges a job file and its includes: included files come first, so a
// main file's arrays of tables follow theirs; a single table ([panel],
// [stackup]) may be defined in one file only.
type loader struct {
	job        *Job
	seen       map[string]string // included files by absolute path: where they were included
	title      string
	panel      *rawPanel
	panelSrc   source
	stackup    *rawStackup
	stackupSrc source
	sections   []rawSection
	sectionSrc []source
	parts      []rawPart
	partSrc    []source
	arrays     []rawArray
	arraySrc   []source
	contribs   []map[string]any
	contribSrc []source
	// variations are the [[variation]] tables (variation.go).
	variations   []map[string]any
	variationSrc []source
	placements   []panel.Placement
}

// MaxIncludeDepth bounds how deep includes nest: a job that includes a
// variant that includes a base that includes a shared stackup is four deep,
// so 32 leaves room for any layering a person writes, and stops a generated
// chain that runs away.
const MaxIncludeDepth = 32

// file reads one job file; chain holds the files that include it, outermost
// first (their absolute paths and the names messages use).
func (l *loader) file(data []byte, name, dir string, depth int, chain []chainLink) error {
	raw, f, err := parseTOML(data, name)
	if err != nil {
		return err
	}
	l.job.Sources = append(l.job.Sources, Source{Name: name, Data: data})
	f.dir = dir
	for i, inc := range raw.Include {
		src := source{f, fmt.Sprintf("include[%d]", i)}
		p := inc
		if !filepath.IsAbs(p) {
			p = filepath.Join(dir, inc)
		}
		abs, err := filepath.Abs(p)
		if err != nil {
			abs = p
		}
		for k, c := range chain {
			if c.abs == abs {
				names := []string{}
				for _, c := range chain[k:] {
					names = append(names, c.name)
				}
				return src.errf("", "%w: include cycle: %s → %s", ErrValue, strings.Join(names, " → "), p)
			}
		}
		if depth >= MaxIncludeDepth {
			return src.errf("", "%w: includes nest more than %d deep (%s → %s)", ErrValue, MaxIncludeDepth, chainNames(chain), p)
		}
		if first, ok := l.seen[abs]; ok {
			// A diamond (two files include one): its contributors and
			// arrays would count twice and its [panel] clash with itself.
			return src.errf("", "%w: %q is included twice (also at %s); include it once, from the file that needs it first", ErrValue, inc, first)
		}
		l.seen[abs] = fmt.Sprintf("%s:%d", f.name, f.line(src.key))
		b, err := os.ReadFile(p)
		if err != nil {
			return src.err("", err)
		}
		if err := l.file(b, p, filepath.Dir(p), depth+1, append(chain[:len(chain):len(chain)], chainLink{abs, p})); err != nil {
			return err
		}
	}
	if raw.Title != "" {
		l.title = raw.Title
	}
	if raw.Panel != nil {
		if l.panel != nil {
			return source{f, "panel"}.errf("", "[panel] is also defined in %s", l.panelSrc.f.name)
		}
		l.panel, l.panelSrc = raw.Panel, source{f, "panel"}
	}
	if raw.Stackup != nil {
		if l.stackup != nil {
			return source{f, "stackup"}.errf("", "[stackup] is also defined in %s", l.stackupSrc.f.name)
		}
		l.stackup, l.stackupSrc = raw.Stackup, source{f, "stackup"}
	}
	for i := range raw.Section {
		l.sections = append(l.sections, raw.Section[i])
		l.sectionSrc = append(l.sectionSrc, source{f, fmt.Sprintf("section[%d]", i)})
	}
	for i := range raw.Part {
		l.parts = append(l.parts, raw.Part[i])
		l.partSrc = append(l.partSrc, source{f, fmt.Sprintf("part[%d]", i)})
	}
	for i := range raw.Array {
		l.arrays = append(l.arrays, raw.Array[i])
		l.arraySrc = append(l.arraySrc, source{f, fmt.Sprintf("array[%d]", i)})
	}
	for i := range raw.Contributor {
		l.contribs = append(l.contribs, raw.Contributor[i])
		l.contribSrc = append(l.contribSrc, source{f, fmt.Sprintf("contributor[%d]", i)})
	}
	for i := range raw.Variation {
		l.variations = append(l.variations, raw.Variation[i])
		l.variationSrc = append(l.variationSrc, source{f, fmt.Sprintf("variation[%d]", i)})
	}
	for i, s := range raw.Sites {
		src := source{f, fmt.Sprintf("sites[%d]", i)}
		if s.File == "" {
			return src.err("file", fmt.Errorf("%w: a [[sites]] table needs file = \"placements.csv\"", ErrMissing))
		}
		p := s.File
		if !filepath.IsAbs(p) {
			p = filepath.Join(dir, p)
		}
		pl, err := readPlacementFile(p)
		if err != nil {
			var ce *registration.CSVError
			if errors.As(err, &ce) {
				return err
			}
			// The file cannot be read: say which job line names it.
			return src.err("file", err)
		}
		l.placements = append(l.placements, pl...)
	}
	return nil
}

// checkTurn refuses a direction beyond a full turn either way: no layout
// needs one, and "90 rad" typed for "90 deg" is caught (the direction of a
// huge angle is also only as good as its rounding).
func checkTurn(a float64) error {
	if math.Abs(a) <= 2*math.Pi*(1+1e-12) {
		return nil
	}
	return fmt.Errorf("%w: %.6g deg is more than a full turn (at most ±360 deg)", ErrValue, a/unit.Degree)
}

// chainLink is one file of a chain of includes.
type chainLink struct{ abs, name string }

// chainNames writes the first and last files of a long chain of includes.
func chainNames(chain []chainLink) string {
	if len(chain) == 0 {
		return "<stdin>"
	}
	return fmt.Sprintf("%s → ... → %s", chain[0].name, chain[len(chain)-1].name)
}

// quantity converts a job-file value of kind k; a missing value is an error
// unless def is given.
func quantity(src source, key string, v any, k unit.Kind, def *float64) (float64, error) {
	if v == nil {
		if def != nil {
			return *def, nil
		}
		return 0, src.err(key, fmt.Errorf("%w: give a %s with its unit (%s)", ErrMissing, k, unit.Accepted(k)))
	}
	s, ok := v.(string)
	if !ok {
		switch v.(type) {
		case int64, float64:
			return 0, src.err(key, fmt.Errorf("%w: %v needs a unit: write it as a string such as \"%v %s\" (%s)", ErrValue, v, v, firstUnit(k), unit.Accepted(k)))
		}
		return 0, src.err(key, fmt.Errorf("%w: want a %s such as \"1 %s\", not a TOML %s", ErrValue, k, firstUnit(k), tomlKind(v)))
	}
	x, err := unit.Parse(s, k)
	if err != nil {
		return 0, src.err(key, err)
	}
	return x, nil
}

func firstUnit(k unit.Kind) string {
	a := unit.Accepted(k)
	if i := strings.Index(a, ","); i > 0 {
		return a[:i]
	}
	return a
}

func pair(src source, key string, v []any, k unit.Kind, def *panel.Vec) (panel.Vec, error) {
	if v == nil && def != nil {
		return *def, nil
	}
	if len(v) != 2 {
		return panel.Vec{}, src.err(key, fmt.Errorf("%w: want two values [x, y], each with a unit", ErrValue))
	}
	x, err := quantity(src, key+"[0]", v[0], k, nil)
	if err != nil {
		return panel.Vec{}, err
	}
	y, err := quantity(src, key+"[1]", v[1], k, nil)
	if err != nil {
		return panel.Vec{}, err
	}
	return panel.Vec{X: x, Y: y}, nil
}

func number(src source, key string, v any) (float64, bool, error) {
	switch x := v.(type) {
	case nil:
		return 0, false, nil
	case int64:
		return float64(x), true, nil
	case float64:
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return 0, false, src.err(key, fmt.Errorf("%w: must be finite", ErrValue))
		}
		return x, true, nil
	}
	return 0, false, src.err(key, fmt.Errorf("%w: want a plain number, not a TOML %s", ErrValue, tomlKind(v)))
}

func (l *loader) finish() error {
	j := l.job
	j.Title = l.title
	if l.panel == nil {
		return &ParseError{File: j.File, Key: "panel", Err: fmt.Errorf("%w: the job has no [panel] table", ErrMissing)}
	}
	ps := l.panelSrc
	size, err := pair(ps, "size", l.panel.Size, unit.Length, nil)
	if err != nil {
		return err
	}
	zero := 0.0
	border, err := quantity(ps, "border", l.panel.Border, unit.Length, &zero)
	if err != nil {
		return err
	}
	datum, err := pair(ps, "datum", l.panel.Datum, unit.Length, &panel.Vec{})
	if err != nil {
		return err
	}
	j.Layout.Panel = panel.Panel{Size: size, Border: border, Datum: datum}
	if err := j.Layout.Panel.Validate(); err != nil {
		return l.layoutErr(err)
	}
	if err := l.buildStackup(); err != nil {
		return err
	}
	if err := l.buildSections(); err != nil {
		return err
	}
	if err := l.buildLayout(); err != nil {
		return err
	}
	if err := l.buildModel(); err != nil {
		return err
	}
	return l.buildVariation()
}

func (l *loader) layoutErr(err error) error {
	var fe *panel.FieldError
	if !errors.As(err, &fe) {
		if len(l.arraySrc) > 0 {
			return &ParseError{File: l.arraySrc[0].f.name, Key: "array", Err: err}
		}
		return &ParseError{File: l.job.File, Err: err}
	}
	key := fe.Key
	var src source
	switch {
	case strings.HasPrefix(key, "panel."):
		src = source{l.panelSrc.f, ""}
	case strings.HasPrefix(key, "array["):
		i, rest := splitIndex(key, "array[")
		src = l.arraySrc[i]
		key = rest
		var oe *panel.OverlapError
		if errors.As(fe.Err, &oe) && oe.A.Array >= 0 && oe.A.Array < len(l.arraySrc) {
			o := l.arraySrc[oe.A.Array]
			return src.err(key, fmt.Errorf("%w (the [[array]] at %s:%d)", fe.Err, o.f.name, o.f.line(o.key)))
		}
		var de *panel.DuplicateNameError
		if errors.As(fe.Err, &de) && de.First >= 0 && de.First < len(l.arraySrc) {
			o := l.arraySrc[de.First]
			how := ""
			if de.Default {
				how = "; an array without a name is called a1, a2, … by its position"
			}
			return src.err(key, fmt.Errorf("%w: %w: array name %q is also the name of the [[array]] at %s:%d%s",
				ErrValue, panel.ErrDuplicateName, de.Name, o.f.name, o.f.line(o.key), how))
		}
	case strings.HasPrefix(key, "part["):
		i, rest := splitIndex(key, "part[")
		src = l.partSrc[i]
		key = rest
	case strings.HasPrefix(key, "sites["):
		i, _ := splitIndex(key, "sites[")
		p := l.placements[i]
		return &registration.CSVError{File: p.File, Row: p.Row, Err: fe.Err}
	default:
		return &ParseError{File: l.job.File, Key: key, Err: fe.Err}
	}
	return src.err(key, fe.Err)
}

// splitIndex splits "array[3].pitch" into 3 and "pitch".
func splitIndex(key, prefix string) (int, string) {
	rest := key[len(prefix):]
	end := strings.IndexByte(rest, ']')
	i, _ := strconv.Atoi(rest[:end])
	rest = strings.TrimPrefix(rest[end+1:], ".")
	return i, rest
}

func (l *loader) buildStackup() error {
	if l.stackup == nil {
		if len(l.sections) > 0 {
			return l.sectionSrc[0].errf("", "%w: sections need a [stackup]", ErrMissing)
		}
		return nil
	}
	src := l.stackupSrc
	if len(l.stackup.Layers) == 0 {
		return src.errf("layers", "%w: the stackup lists no layers", ErrMissing)
	}
	names := map[string]bool{}
	for i, m := range l.stackup.Layers {
		key := fmt.Sprintf("layers[%d]", i)
		var layer section.Layer
		kinds := 0
		for _, kk := range []string{"copper", "core", "prepreg"} {
			if _, ok := m[kk]; ok {
				kinds++
			}
		}
		if kinds != 1 {
			return src.errf(key, "%w: each layer is exactly one of copper = \"NAME\", core = \"THICKNESS\" or prepreg = \"THICKNESS\"", ErrValue)
		}
		allowed := map[string]bool{}
		switch {
		case m["copper"] != nil:
			name, ok := m["copper"].(string)
			if !ok || name == "" {
				return src.errf(key+".copper", "%w: copper takes the layer's name, e.g. copper = \"L3\"", ErrValue)
			}
			if names[name] {
				return src.errf(key+".copper", "%w: layer %q is listed twice", ErrValue, name)
			}
			names[name] = true
			var err error
			if layer, err = copperLayer(src, key, name, m); err != nil {
				return err
			}
			allowed = map[string]bool{"copper": true, "thickness": true, "foil": true, "plating": true}
		default:
			kind := "core"
			if _, ok := m["prepreg"]; ok {
				kind = "prepreg"
			}
			t, err := quantity(src, key+"."+kind, m[kind], unit.Length, nil)
			if err != nil {
				return err
			}
			er, ok, err := number(src, key+".er", m["er"])
			if err != nil {
				return err
			}
			if !ok {
				return src.errf(key+".er", "%w: a dielectric needs er (relative permittivity)", ErrMissing)
			}
			name, err := dielectricName(src, key+".name", m["name"], names)
			if err != nil {
				return err
			}
			layer = section.Layer{Name: name, Kind: section.Dielectric, Thickness: t, Er: er, Core: kind == "core"}
			allowed = map[string]bool{kind: true, "er": true, "name": true}
		}
		for k := range m {
			if !allowed[k] {
				return src.errf(key+"."+k, "%w %q", ErrUnknownKey, k)
			}
		}
		if !(layer.Thickness > 0) && !(layer.Kind == section.Copper && layer.Thickness == 0) {
			k := key + ".thickness"
			if layer.Kind == section.Dielectric {
				k = key + "." + map[bool]string{true: "core", false: "prepreg"}[layer.Core]
			}
			return src.errf(k, "%w: thickness must be positive", ErrValue)
		}
		if layer.Kind == section.Dielectric && !(layer.Er >= 1) {
			return src.errf(key+".er", "%w: er must be at least 1", ErrValue)
		}
		l.job.Stackup.Layers = append(l.job.Stackup.Layers, layer)
	}
	if l.stackup.Mask != nil {
		m, err := solderMask(src, "mask", l.stackup.Mask)
		if err != nil {
			return err
		}
		l.job.Stackup.Mask = m
	}
	return nil
}

// copperLayer reads a copper layer given either by its finished thickness
// or by its foil (a length or a copper weight in oz) and plating steps.
func copperLayer(src source, key, name string, m map[string]any) (section.Layer, error) {
	layer := section.Layer{Name: name, Kind: section.Copper}
	_, hasFoil := m["foil"]
	_, hasPlating := m["plating"]
	if !hasFoil && !hasPlating {
		t, err := quantity(src, key+".thickness", m["thickness"], unit.Length, nil)
		layer.Thickness = t
		return layer, err
	}
	if _, ok := m["thickness"]; ok {
		return layer, src.errf(key+".thickness", "%w: give either thickness (finished) or foil with plating, not both", ErrValue)
	}
	if !hasFoil {
		return layer, src.errf(key+".foil", "%w: plating needs the base foil, e.g. foil = \"0.5 oz\"", ErrMissing)
	}
	foil, err := foilThickness(src, key+".foil", m["foil"])
	if err != nil {
		return layer, err
	}
	layer.Foil = foil
	if hasPlating {
		steps, ok := m["plating"].([]any)
		if !ok {
			return layer, src.errf(key+".plating", "%w: want a list of lengths, e.g. plating = [\"1.0 mil\", \"0.3 mil\"]", ErrValue)
		}
		for k, v := range steps {
			sk := fmt.Sprintf("%s.plating[%d]", key, k)
			p, err := quantity(src, sk, v, unit.Length, nil)
			if err != nil {
				return layer, err
			}
			if !(p > 0) {
				return layer, src.errf(sk, "%w: a plating step must be positive", ErrValue)
			}
			layer.Plating = append(layer.Plating, p)
		}
	}
	layer.Thickness = section.FinishedThickness(layer.Foil, layer.Plating)
	return layer, nil
}

// foilThickness reads a base foil: a length, or a copper weight in ounces
// per square foot ("0.5 oz") converted by section.CopperWeightThickness.
func foilThickness(src source, key string, v any) (float64, error) {
	s, ok := v.(string)
	if ok {
		if num, found := strings.CutSuffix(strings.TrimSpace(s), "oz"); found {
			oz, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
			if err != nil || math.IsNaN(oz) || math.IsInf(oz, 0) {
				return 0, src.errf(key, "%w: %q is not a copper weight such as \"0.5 oz\"", ErrValue, s)
			}
			if !(oz > 0) || oz > 100 {
				return 0, src.errf(key, "%w: copper weight %g oz must be positive and at most 100 oz", ErrValue, oz)
			}
			return section.CopperWeightThickness(oz), nil
		}
	}
	t, err := quantity(src, key, v, unit.Length, nil)
	if err != nil {
		var pe *ParseError
		if errors.As(err, &pe) {
			pe.Err = fmt.Errorf("%w (or a copper weight in oz, e.g. \"0.5 oz\")", pe.Err)
		}
		return 0, err
	}
	if !(t > 0) {
		return 0, src.errf(key, "%w: foil must be positive", ErrValue)
	}
	return t, nil
}

// dielectricName reads a dielectric's optional name; names (copper and
// dielectric alike) must be unique so that a parameter can address one layer.
func dielectricName(src source, key string, v any, names map[string]bool) (string, error) {
	if v == nil {
		return "", nil
	}
	name, ok := v.(string)
	if !ok || name == "" {
		return "", src.errf(key, "%w: name takes a non-empty string, e.g. name = \"K1\"", ErrValue)
	}
	if names[name] {
		return "", src.errf(key, "%w: layer name %q is used twice", ErrValue, name)
	}
	names[name] = true
	return name, nil
}

// solderMask reads [stackup] mask = { thickness, over_copper, er }.
func solderMask(src source, key string, m map[string]any) (*section.Mask, error) {
	for k := range m {
		if k != "thickness" && k != "over_copper" && k != "er" {
			return nil, src.errf(key+"."+k, "%w %q (mask keys: thickness, over_copper, er)", ErrUnknownKey, k)
		}
	}
	var mask section.Mask
	for _, f := range []struct {
		k string
		v *float64
	}{{"thickness", &mask.OverLaminate}, {"over_copper", &mask.OverCopper}} {
		t, err := quantity(src, key+"."+f.k, m[f.k], unit.Length, nil)
		if err != nil {
			return nil, err
		}
		if !(t > 0) {
			return nil, src.errf(key+"."+f.k, "%w: mask thickness must be positive", ErrValue)
		}
		*f.v = t
	}
	er, ok, err := number(src, key+".er", m["er"])
	if err != nil {
		return nil, err
	}
	if !ok {
		return nil, src.errf(key+".er", "%w: the mask needs er (relative permittivity)", ErrMissing)
	}
	if !(er >= 1) {
		return nil, src.errf(key+".er", "%w: er must be at least 1", ErrValue)
	}
	mask.Er = er
	return &mask, nil
}

// stackupKey turns the key of a section.FieldError within the stackup into
// the job file's: a dielectric's thickness is written as its core = or
// prepreg = value ("layers[3].thickness" is "layers[3].prepreg").
func (l *loader) stackupKey(key string) string {
	rest, ok := strings.CutSuffix(key, ".thickness")
	if !ok || !strings.HasPrefix(rest, "layers[") {
		return key
	}
	i, _ := splitIndex(rest, "layers[")
	if i < 0 || i >= len(l.job.Stackup.Layers) {
		return key
	}
	if ly := l.job.Stackup.Layers[i]; ly.Kind == section.Dielectric {
		return rest + "." + map[bool]string{true: "core", false: "prepreg"}[ly.Core]
	}
	return key
}

func (l *loader) buildSections() error {
	j := l.job
	seen := map[string]bool{}
	for i, rs := range l.sections {
		src := l.sectionSrc[i]
		if rs.Name == "" {
			return src.errf("name", "%w: a section needs a name", ErrMissing)
		}
		if seen[rs.Name] {
			return src.errf("name", "%w: section %q is defined twice", ErrValue, rs.Name)
		}
		seen[rs.Name] = true
		s := &section.Section{Name: rs.Name, Stackup: j.Stackup, Grounds: rs.Grounds}
		if len(rs.Grounds) != 1 {
			// The board's solder mask coats its outer layers; a stripline's
			// field ends at its two grounds, so the mask is outside it
			// (and a job may hold stripline and microstrip sections alike).
			s.Stackup.Mask = nil
		}
		if len(rs.Traces) != 2 {
			return src.errf("traces", "%w: a section has two traces, upper first", ErrValue)
		}
		zero := 0.0
		for k, rt := range rs.Traces {
			key := fmt.Sprintf("traces[%d]", k)
			if rt.Layer == "" {
				return src.errf(key+".layer", "%w: each trace names its copper layer", ErrMissing)
			}
			w, err := quantity(src, key+".width", rt.Width, unit.Length, nil)
			if err != nil {
				return err
			}
			e, err := quantity(src, key+".etch", rt.Etch, unit.Length, &zero)
			if err != nil {
				return err
			}
			x, err := quantity(src, key+".x", rt.X, unit.Length, &zero)
			if err != nil {
				return err
			}
			s.Traces[k] = section.Trace{Layer: rt.Layer, Width: w, Etch: e, X: x}
		}
		var err error
		if s.Frequency, err = quantity(src, "frequency", rs.Frequency, unit.Frequency, nil); err != nil {
			return err
		}
		switch v := rs.Length.(type) {
		case string:
			if strings.EqualFold(strings.TrimSpace(v), "quarter-wave") {
				s.Length = 0
				break
			}
			if s.Length, err = quantity(src, "length", v, unit.Length, nil); err != nil {
				return err
			}
			if !(s.Length > 0) {
				return src.errf("length", "%w: the coupled length must be positive", ErrValue)
			}
		case nil:
			s.Length = 0
		default:
			return src.errf("length", "%w: want \"quarter-wave\" or a length such as \"640 mil\"", ErrValue)
		}
		fifty := 50.0
		if s.ZRef, err = quantity(src, "z_ref", rs.ZRef, unit.Impedance, &fifty); err != nil {
			return err
		}
		// The nominal offset is x of the upper trace minus x of the lower
		// plus design_offset (section.NominalOffset): one quantity said two
		// ways. Given both, one would silently move the other, so a section
		// says it once.
		if rs.DesignOffset != nil {
			for k, rt := range rs.Traces {
				if rt.X != nil {
					xk := fmt.Sprintf("traces[%d].x", k)
					return src.errf("design_offset", "%w: give the intended offset once, as design_offset or as the traces' x, not both (%s is set on line %d)",
						ErrValue, src.key+"."+xk, src.f.line(src.key+"."+xk))
				}
			}
		}
		if s.DesignOffset, err = quantity(src, "design_offset", rs.DesignOffset, unit.Length, &zero); err != nil {
			return err
		}
		if rs.Spec == nil {
			return src.errf("spec", "%w: give spec = { coupling = \"-3.0 dB\", tolerance = \"0.25 dB\" }", ErrMissing)
		}
		for k := range rs.Spec {
			if k != "coupling" && k != "tolerance" {
				return src.errf("spec."+k, "%w %q", ErrUnknownKey, k)
			}
		}
		if s.Spec.Coupling, err = quantity(src, "spec.coupling", rs.Spec["coupling"], unit.Decibel, nil); err != nil {
			return err
		}
		if s.Spec.Tolerance, err = quantity(src, "spec.tolerance", rs.Spec["tolerance"], unit.Decibel, nil); err != nil {
			return err
		}
		if err := s.Validate(); err != nil {
			var fe *section.FieldError
			if errors.As(err, &fe) {
				if strings.HasPrefix(fe.Key, "stackup.") {
					return l.stackupSrc.err(l.stackupKey(strings.TrimPrefix(fe.Key, "stackup.")), fmt.Errorf("section %q: %w", s.Name, fe.Err))
				}
				return src.err(fe.Key, fe.Err)
			}
			return src.err("", err)
		}
		j.Sections = append(j.Sections, s)
		j.sectionSrc = append(j.sectionSrc, src)
	}
	return nil
}

func (l *loader) buildLayout() error {
	j := l.job
	for i, rp := range l.parts {
		src := l.partSrc[i]
		size, err := pair(src, "size", rp.Size, unit.Length, nil)
		if err != nil {
			return err
		}
		p := panel.Part{Name: rp.Name, Size: size}
		for k, rc := range rp.Couplers {
			key := fmt.Sprintf("couplers[%d]", k)
			at, err := pair(src, key+".at", rc.At, unit.Length, nil)
			if err != nil {
				return err
			}
			zero := 0.0
			a, err := quantity(src, key+".angle", rc.Angle, unit.Angle, &zero)
			if err != nil {
				return err
			}
			if err := checkTurn(a); err != nil {
				return src.err(key+".angle", err)
			}
			if rc.Section == "" {
				return src.errf(key+".section", "%w: each coupler names its section", ErrMissing)
			}
			if j.Section(rc.Section) == nil {
				return src.errf(key+".section", "%w: no section named %q", ErrValue, rc.Section)
			}
			name := rc.Name
			if name == "" {
				name = fmt.Sprintf("C%d", k+1)
			}
			p.Couplers = append(p.Couplers, panel.Coupler{Name: name, Section: rc.Section, At: at, Angle: a})
		}
		j.Layout.Parts = append(j.Layout.Parts, p)
	}
	for i, ra := range l.arrays {
		src := l.arraySrc[i]
		a := panel.Array{Name: ra.Name, Part: ra.Part, Coupon: ra.Product != nil && !*ra.Product}
		if len(ra.Count) != 2 {
			return src.errf("count", "%w: want count = [columns, rows]", ErrValue)
		}
		a.Count = [2]int{ra.Count[0], ra.Count[1]}
		one := panel.Vec{}
		var err error
		if a.Pitch, err = pair(src, "pitch", ra.Pitch, unit.Length, &one); err != nil {
			return err
		}
		if ra.Origin != nil && ra.Center != nil {
			return src.errf("origin", "%w: give center or origin, not both", ErrValue)
		}
		if ra.Origin != nil {
			a.UseOrigin = true
			if a.Origin, err = pair(src, "origin", ra.Origin, unit.Length, nil); err != nil {
				return err
			}
		} else if a.Center, err = pair(src, "center", ra.Center, unit.Length, &panel.Vec{}); err != nil {
			return err
		}
		zero := 0.0
		rot, err := quantity(src, "rotate", ra.Rotate, unit.Angle, &zero)
		if err != nil {
			return err
		}
		if err := checkTurn(rot); err != nil {
			return src.err("rotate", err)
		}
		deg := rot * 180 / math.Pi
		q := math.Round(deg / 90)
		if math.Abs(deg-90*q) > 1e-6 {
			return src.errf("rotate", "%w: parts turn by 0, 90, 180 or 270 deg", ErrValue)
		}
		a.Rotate = int(q) * 90
		j.Layout.Arrays = append(j.Layout.Arrays, a)
	}
	for _, p := range l.placements {
		if j.Section(p.Section) == nil {
			return &registration.CSVError{File: p.File, Row: p.Row, Column: "section", Err: fmt.Errorf("no section named %q", p.Section)}
		}
	}
	j.Layout.Placements = l.placements
	inst, sites, err := j.Layout.Expand()
	if err != nil {
		return l.layoutErr(err)
	}
	if len(sites) == 0 {
		return &ParseError{File: j.File, Key: "array", Err: fmt.Errorf("%w: the job places no coupler sites (add [[part]] and [[array]] tables or [[sites]])", ErrMissing)}
	}
	j.Instances, j.Sites = inst, sites
	return nil
}

// termKeys lists the job-file keys of the terms, for messages.
func termKeys() string {
	keys := make([]string, registration.NumTerms)
	for k := range keys {
		keys[k] = registration.TermKind(k).String()
	}
	return strings.Join(keys, ", ")
}

func (l *loader) buildModel() error {
	j := l.job
	m := &registration.Model{Datum: j.Layout.Panel.Datum}
	copper := map[string]bool{}
	for _, ly := range j.Stackup.Layers {
		if ly.Kind == section.Copper {
			copper[ly.Name] = true
		}
	}
	for i, raw := range l.contribs {
		src := l.contribSrc[i]
		var c registration.Contributor
		keys := make([]string, 0, len(raw))
		for k := range raw {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for _, k := range keys {
			v := raw[k]
			switch k {
			case "name":
				s, ok := v.(string)
				if !ok {
					return src.errf(k, "%w: want a string", ErrValue)
				}
				c.Name = s
			case "layers":
				arr, ok := v.([]any)
				if !ok || len(arr) == 0 {
					return src.errf(k, "%w: want a list of copper layer names, e.g. [\"L3\", \"L4\"]", ErrValue)
				}
				for n, e := range arr {
					s, ok := e.(string)
					if !ok {
						return src.errf(fmt.Sprintf("%s[%d]", k, n), "%w: want a layer name", ErrValue)
					}
					if len(copper) > 0 && !copper[s] {
						return src.errf(fmt.Sprintf("%s[%d]", k, n), "%w: no copper layer named %q in the stackup", ErrValue, s)
					}
					c.Layers = append(c.Layers, s)
				}
			case "weights":
				arr, ok := v.([]any)
				if !ok || len(arr) == 0 {
					return src.errf(k, "%w: want a list of numbers, one per layer, e.g. [1.0, -0.98]", ErrValue)
				}
				for n, e := range arr {
					var w float64
					switch x := e.(type) {
					case float64:
						w = x
					case int64:
						w = float64(x)
					default:
						return src.errf(fmt.Sprintf("%s[%d]", k, n), "%w: want a plain number (a weight has no unit)", ErrValue)
					}
					c.Weights = append(c.Weights, w)
				}
			case "site_sigma":
				x, err := quantity(src, k, v, unit.Length, nil)
				if err != nil {
					return err
				}
				if x < 0 {
					return src.errf(k, "%w: site_sigma must be non-negative", ErrValue)
				}
				if err := registration.CheckTerm(x, unit.Length); err != nil {
					return src.err(k, fmt.Errorf("%w: %w", ErrValue, err))
				}
				c.SiteSigma = x
			case "residual":
				s, ok := v.(string)
				if !ok {
					return src.errf(k, "%w: want the path of a residual grid CSV", ErrValue)
				}
				p := s
				if !filepath.IsAbs(p) {
					p = filepath.Join(src.f.dir, s)
				}
				fh, err := os.Open(p)
				if err != nil {
					return src.err(k, err)
				}
				g, err := registration.ReadGrid(fh, p)
				fh.Close()
				if err != nil {
					return err
				}
				c.Residual = g
			default:
				tk, ok := registration.TermByKey(k)
				if !ok {
					return src.errf(k, "%w %q (terms: %s; also name, layers, weights, site_sigma, residual)", ErrUnknownKey, k, termKeys())
				}
				t, err := parseTerm(src, k, v, tk.Info().Kind)
				if err != nil {
					return err
				}
				c.Terms[tk] = t
			}
		}
		if len(c.Layers) == 0 {
			return src.errf("layers", "%w: a contributor names the layers it moves", ErrMissing)
		}
		if c.Name == "" {
			c.Name = fmt.Sprintf("contributor %d", i+1)
		}
		m.Contributors = append(m.Contributors, c)
	}
	if err := m.Validate(); err != nil {
		var fe *registration.FieldError
		if errors.As(err, &fe) {
			i, rest := splitIndex(fe.Key, "contributor[")
			return l.contribSrc[i].err(rest, fe.Err)
		}
		return &ParseError{File: j.File, Err: err}
	}
	j.Model = m
	return nil
}

// parseTerm reads a term: a fixed value, { mean, sigma }, or
// { mean, half_width, dist = "uniform" }.
func parseTerm(src source, key string, v any, k unit.Kind) (registration.Term, error) {
	switch x := v.(type) {
	case string, int64, float64:
		mean, err := quantity(src, key, x, k, nil)
		if err != nil {
			return registration.Term{}, err
		}
		if err := registration.CheckTerm(mean, k); err != nil {
			return registration.Term{}, src.err(key, fmt.Errorf("%w: %w", ErrValue, err))
		}
		return registration.Term{Mean: mean}, nil
	case map[string]any:
		zero := 0.0
		for kk := range x {
			switch kk {
			case "mean", "sigma", "half_width", "dist":
			default:
				return registration.Term{}, src.errf(key+"."+kk, "%w %q (want mean, sigma, or half_width with dist = \"uniform\")", ErrUnknownKey, kk)
			}
		}
		mean, err := quantity(src, key+".mean", x["mean"], k, &zero)
		if err != nil {
			return registration.Term{}, err
		}
		dist := "normal"
		if d, ok := x["dist"]; ok {
			s, _ := d.(string)
			if s != "normal" && s != "uniform" {
				return registration.Term{}, src.errf(key+".dist", "%w: dist is \"normal\" or \"uniform\"", ErrValue)
			}
			dist = s
		}
		t := registration.Term{Mean: mean}
		switch dist {
		case "uniform":
			if _, ok := x["sigma"]; ok {
				return registration.Term{}, src.errf(key+".sigma", "%w: a uniform term takes half_width, not sigma", ErrValue)
			}
			h, err := quantity(src, key+".half_width", x["half_width"], k, nil)
			if err != nil {
				return registration.Term{}, err
			}
			t.Spread, t.Dist = h, registration.Uniform
		default:
			if _, ok := x["half_width"]; ok {
				return registration.Term{}, src.errf(key+".half_width", "%w: half_width needs dist = \"uniform\"", ErrValue)
			}
			s, err := quantity(src, key+".sigma", x["sigma"], k, &zero)
			if err != nil {
				return registration.Term{}, err
			}
			t.Spread = s
			if s > 0 {
				t.Dist = registration.Normal
			}
		}
		if t.Spread < 0 {
			return registration.Term{}, src.errf(key, "%w: sigma and half_width must be non-negative", ErrValue)
		}
		for _, b := range []struct {
			key string
			v   float64
		}{{".mean", t.Mean}, {map[bool]string{true: ".half_width", false: ".sigma"}[dist == "uniform"], t.Spread}} {
			if err := registration.CheckTerm(b.v, k); err != nil {
				return registration.Term{}, src.err(key+b.key, fmt.Errorf("%w: %w", ErrValue, err))
			}
		}
		return t, nil
	}
	return registration.Term{}, src.errf(key, "%w: want a value such as \"+150 ppm\" or { mean = ..., sigma = ... }", ErrValue)
}
