package report

import (
	"encoding/json"
	"errors"
	"fmt"
	"html/template"
	"math"
	"strings"

	"github.com/regdrift/regdrift/render"
)

// Transform says where a picture shows the panel: the panel rectangle
// Panel, in panel coordinates, is drawn onto the pixel rectangle Pixels of
// the image, linearly in each axis. Pixel coordinates have fractions and
// follow image.Image: pixel (i, j) covers [i, i+1) x [j, j+1), j down the
// image. With FlipY, Panel.Max.Y is drawn at Pixels.Min.Y (panel y up, as
// regdrift's maps are drawn); without it, Panel.Min.Y is.
//
// The zero value maps nothing; a Transform must come from whoever drew the
// picture, as ViewTransform takes it from a render.View.
type Transform struct {
	Panel  render.Rect // panel coordinates shown, metres
	Pixels render.Rect // where they are drawn, in image pixels
	FlipY  bool        // panel y up, image y down
}

// ViewTransform returns the transform with which v draws the panel: its
// extent onto the pixels v.Pixel gives for the extent's corners.
func ViewTransform(v *render.View) Transform {
	ext := v.Extent()
	x0, y0 := v.Pixel(render.Point{X: ext.Min.X, Y: ext.Max.Y})
	x1, y1 := v.Pixel(render.Point{X: ext.Max.X, Y: ext.Min.Y})
	return Transform{Panel: ext, Pixels: render.Rect{Min: render.Point{X: x0, Y: y0}, Max: render.Point{X: x1, Y: y1}}, FlipY: true}
}

// Valid reports whether t maps a rectangle of positive size onto one.
func (t Transform) Valid() bool {
	return t.Panel.Dx() > 0 && t.Panel.Dy() > 0 && t.Pixels.Dx() > 0 && t.Pixels.Dy() > 0 &&
		!math.IsInf(t.Panel.Dx()+t.Panel.Dy()+t.Pixels.Dx()+t.Pixels.Dy(), 0)
}

// Pixel returns the image position of the panel point p.
func (t Transform) Pixel(p render.Point) (x, y float64) {
	fx := (p.X - t.Panel.Min.X) / t.Panel.Dx()
	fy := (p.Y - t.Panel.Min.Y) / t.Panel.Dy()
	if t.FlipY {
		fy = 1 - fy
	}
	return t.Pixels.Min.X + fx*t.Pixels.Dx(), t.Pixels.Min.Y + fy*t.Pixels.Dy()
}

// Point returns the panel point drawn at image position (x, y): the
// inverse of Pixel.
func (t Transform) Point(x, y float64) render.Point {
	fx := (x - t.Pixels.Min.X) / t.Pixels.Dx()
	fy := (y - t.Pixels.Min.Y) / t.Pixels.Dy()
	if t.FlipY {
		fy = 1 - fy
	}
	return render.Point{X: t.Panel.Min.X + fx*t.Panel.Dx(), Y: t.Panel.Min.Y + fy*t.Panel.Dy()}
}

// PanelMap is a picture of the panel in which the reader can look a site
// up: pointing at the picture shows the nearest site's values, a click
// marks that site, and a search box finds a site by name and marks it. The
// values are shown as the caller formats them, so that they read as in the
// caller's tables and files.
type PanelMap struct {
	// ID is the element id of the map; "" makes one from the section's.
	ID string
	// PNG is the picture; Alt and Caption as for Figure.
	PNG          []byte
	Alt, Caption string
	// Transform says where Sites are drawn in PNG.
	Transform Transform
	// Fields name the values shown for a site, in order, after its name.
	Fields []Field
	// Sites are the sites that can be looked up.
	Sites []Site
}

// Field is one value shown for a site on a PanelMap.
type Field struct {
	Label string `json:"label"` // "offset ± σ"
	Unit  string `json:"unit"`  // "mil"; "" only for a value that is not a number
}

// Site is one site on a PanelMap.
type Site struct {
	Name string
	// At is the site's position in panel coordinates, metres.
	At render.Point
	// Values are the site's values as printed, one per Field.
	Values []string
}

// mapData is a PanelMap as the template draws it.
type mapData struct {
	ID     string
	Figure figureData
	// Data is the JSON the script reads: the panel's pixel rectangle, the
	// fields and, per site, its name, pixel position and values.
	Data template.JS
}

// mapJSON is the site data embedded in the page. Sites are arrays, not
// objects, to keep a 10,000-site panel small: [name, x, y, values...],
// x and y in image pixels.
type mapJSON struct {
	Width  int             `json:"width"`  // image size, pixels
	Height int             `json:"height"` //
	Area   [4]float64      `json:"area"`   // the panel's pixel rectangle: x0, y0, x1, y1
	Fields []Field         `json:"fields"` //
	Sites  [][]interface{} `json:"sites"`  //
}

// pixelDecimals is how finely site positions are given to the script: a
// tenth of a pixel is far below what a pointer resolves.
const pixelDecimals = 10

func (m *PanelMap) block() (string, any, error) {
	if strings.TrimSpace(m.Alt) == "" {
		return "", nil, errors.New("panel map has no alt text")
	}
	if !m.Transform.Valid() {
		return "", nil, fmt.Errorf("panel map: transform %+v maps no area", m.Transform)
	}
	fig, err := pngData(m.PNG, m.Alt, m.Caption)
	if err != nil {
		return "", nil, err
	}
	for _, f := range m.Fields {
		if strings.TrimSpace(f.Label) == "" {
			return "", nil, errors.New("panel map field has no label")
		}
	}
	t := m.Transform
	js := mapJSON{Width: fig.Width, Height: fig.Height, Fields: m.Fields,
		Area:  [4]float64{t.Pixels.Min.X, t.Pixels.Min.Y, t.Pixels.Max.X, t.Pixels.Max.Y},
		Sites: make([][]interface{}, len(m.Sites))}
	if js.Fields == nil {
		js.Fields = []Field{}
	}
	round := func(v float64) float64 { return math.Round(v*pixelDecimals) / pixelDecimals }
	for i, s := range m.Sites {
		if len(s.Values) != len(m.Fields) {
			return "", nil, fmt.Errorf("panel map site %q has %d values for %d fields", s.Name, len(s.Values), len(m.Fields))
		}
		x, y := t.Pixel(s.At)
		if math.IsNaN(x) || math.IsNaN(y) || math.IsInf(x, 0) || math.IsInf(y, 0) {
			return "", nil, fmt.Errorf("panel map site %q is at %v", s.Name, s.At)
		}
		row := make([]interface{}, 0, 3+len(s.Values))
		row = append(row, s.Name, round(x), round(y))
		for _, v := range s.Values {
			row = append(row, v)
		}
		js.Sites[i] = row
	}
	// encoding/json writes <, > and & as \u escapes, so the text cannot end
	// the <script> element it sits in.
	b, err := json.Marshal(js)
	if err != nil {
		return "", nil, err
	}
	return "panelmap", mapData{ID: m.ID, Figure: fig, Data: template.JS(b)}, nil
}
