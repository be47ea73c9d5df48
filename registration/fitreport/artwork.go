package fitreport

import (
	"errors"
	"fmt"
	"math"

	"github.com/regdrift/regdrift/registration"
)

// Artwork is one measured layer's artwork scale per axis (x, y; strain): the
// scale it was built with, the lot's mean measured scale, the material
// movement (measured with the applied artwork taken out,
// registration.MaterialScale), the setting that cancels that movement
// (registration.Setting), the change from the applied artwork,
// (1 + setting)/(1 + applied) − 1, and the standard error of the lot mean
// (panel-to-panel σ over √panels; 0 for one panel). A relative layer
// ("L3-L4") carries the artwork of the upper layer seen from the lower one
// (registration.AppliedSet.For).
type Artwork struct {
	Layer                                    string
	Panels                                   int
	Applied, Measured, Movement, Setting, SE [2]float64
	Change                                   [2]float64
}

// ErrAppliedLayer is an applied-compensation layer that no lot measures.
var ErrAppliedLayer = errors.New("the targets have no such layer")

// SetApplied records the artwork each layer was built with and returns the
// per-layer artwork table. A layer of applied that no lot measures (alone or
// in a pair) is an error naming its row of file.
func (r *Report) SetApplied(applied registration.AppliedSet, file string) ([]Artwork, error) {
	measured := registration.MeasuredLayers(r.Lots)
	for _, l := range applied.Layers() {
		if !measured[l] {
			a := applied[l]
			if a.Row > 0 {
				return nil, &registration.CSVError{File: file, Row: a.Row, Column: "layer", Err: fmt.Errorf("%w %q", ErrAppliedLayer, l)}
			}
			return nil, fmt.Errorf("%s: layer %q: %w", file, l, ErrAppliedLayer)
		}
	}
	r.Applied = applied
	return r.Artworks(), nil
}

// Artworks returns the artwork table of every lot under r.Applied (every
// layer at CAD size when it is nil).
func (r *Report) Artworks() []Artwork {
	var out []Artwork
	for _, l := range r.Lots {
		ax, ay, _ := r.Applied.For(l.Layer)
		a := Artwork{Layer: l.Layer, Panels: l.Panels, Applied: [2]float64{ax, ay}}
		for i, k := range []registration.TermKind{registration.ScaleX, registration.ScaleY} {
			if !l.Model.Estimates(k) {
				continue
			}
			a.Measured[i] = l.Mean[k]
			a.Movement[i] = registration.MaterialScale(l.Mean[k], a.Applied[i])
			a.Setting[i] = registration.Setting(a.Movement[i])
			a.Change[i] = registration.RelativeScale(a.Setting[i], a.Applied[i])
			if l.Panels > 1 {
				a.SE[i] = l.SD[k] / math.Sqrt(float64(l.Panels))
			}
		}
		out = append(out, a)
	}
	return out
}

// ArtworkJSON is one layer's artwork scale in the summary, ppm.
type ArtworkJSON struct {
	Layer          string  `json:"layer"`
	Panels         int     `json:"panels"`
	AppliedXPPM    float64 `json:"applied_x_ppm"`
	AppliedYPPM    float64 `json:"applied_y_ppm"`
	MeasuredXPPM   float64 `json:"measured_x_ppm"`
	MeasuredYPPM   float64 `json:"measured_y_ppm"`
	MovementXPPM   float64 `json:"movement_x_ppm"`
	MovementYPPM   float64 `json:"movement_y_ppm"`
	SettingXPPM    float64 `json:"setting_x_ppm"`
	SettingYPPM    float64 `json:"setting_y_ppm"`
	SettingFactorX float64 `json:"setting_factor_x"`
	SettingFactorY float64 `json:"setting_factor_y"`
	ChangeXPPM     float64 `json:"change_x_ppm"`
	ChangeYPPM     float64 `json:"change_y_ppm"`
	SEXPPM         float64 `json:"se_x_ppm"`
	SEYPPM         float64 `json:"se_y_ppm"`
}

// JSON returns a in the summary's form.
func (a Artwork) JSON() ArtworkJSON {
	const ppm = 1e-6
	return ArtworkJSON{Layer: a.Layer, Panels: a.Panels,
		AppliedXPPM: a.Applied[0] / ppm, AppliedYPPM: a.Applied[1] / ppm,
		MeasuredXPPM: a.Measured[0] / ppm, MeasuredYPPM: a.Measured[1] / ppm,
		MovementXPPM: a.Movement[0] / ppm, MovementYPPM: a.Movement[1] / ppm,
		SettingXPPM: a.Setting[0] / ppm, SettingYPPM: a.Setting[1] / ppm,
		SettingFactorX: 1 + a.Setting[0], SettingFactorY: 1 + a.Setting[1],
		ChangeXPPM: a.Change[0] / ppm, ChangeYPPM: a.Change[1] / ppm,
		SEXPPM: a.SE[0] / ppm, SEYPPM: a.SE[1] / ppm}
}
