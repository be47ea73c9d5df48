package drift

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
)

// Excursions are the stated changes of each kind of parameter over which
// sweep reports the coupling change at the design offset: a first-order
// estimate, CouplingSensitivity × excursion, that ranks what matters.
type Excursions struct {
	// Thickness is the excursion of a dielectric's or the mask's thickness:
	// a fraction of it when ThicknessRelative, else a length, m.
	Thickness         float64
	ThicknessRelative bool
	Er                float64 // of a dielectric's or the mask's εr
	Width             float64 // of a trace's foot width, m
	Etch              float64 // of a trace's undercut per side, m
	Copper            float64 // of a copper layer's finished thickness, m
}

// DefaultExcursions are ±10 % of a thickness, ±0.1 εr, ±0.5 mil of width and
// of etch, ±0.3 mil of copper: common fabrication tolerances stated on
// drawings (common practice), not a property of any one process.
var DefaultExcursions = Excursions{Thickness: 0.10, ThicknessRelative: true, Er: 0.1,
	Width: 0.5 * unit.Mil, Etch: 0.5 * unit.Mil, Copper: 0.3 * unit.Mil}

// ErrExcursion is wrapped by every error of ParseExcursions and CheckExcursions.
var ErrExcursion = errors.New("bad excursion")

// ParseExcursions reads a list "thickness=5%,er=0.05,width=0.3mil" on top
// of DefaultExcursions: thickness takes a percentage or a length, er a
// plain number, width, etch and copper a length. Every excursion must be
// positive.
func ParseExcursions(s string) (Excursions, error) {
	ex := DefaultExcursions
	if strings.TrimSpace(s) == "" {
		return ex, nil
	}
	for _, item := range strings.Split(s, ",") {
		k, v, ok := strings.Cut(strings.TrimSpace(item), "=")
		k, v = strings.TrimSpace(k), strings.TrimSpace(v)
		if !ok || v == "" {
			return ex, fmt.Errorf("%w: %q: want KIND=VALUE, e.g. thickness=5%%", ErrExcursion, item)
		}
		var x float64
		var err error
		switch k {
		case "thickness":
			if num, pct := strings.CutSuffix(v, "%"); pct {
				x, err = strconv.ParseFloat(strings.TrimSpace(num), 64)
				x /= 100
				ex.ThicknessRelative = true
				if err == nil && !(x < 1) {
					return ex, fmt.Errorf("%w: thickness=%s: a relative excursion must be below 100 %%", ErrExcursion, v)
				}
			} else {
				x, err = unit.Parse(v, unit.Length)
				ex.ThicknessRelative = false
			}
			ex.Thickness = x
		case "er":
			x, err = strconv.ParseFloat(v, 64)
			ex.Er = x
		case "width", "etch", "copper":
			x, err = unit.Parse(v, unit.Length)
			switch k {
			case "width":
				ex.Width = x
			case "etch":
				ex.Etch = x
			default:
				ex.Copper = x
			}
		default:
			return ex, fmt.Errorf("%w: unknown kind %q (kinds: thickness, er, width, etch, copper)", ErrExcursion, k)
		}
		if err != nil {
			return ex, fmt.Errorf("%w: %s=%s: %v", ErrExcursion, k, v, err)
		}
		if !(x > 0) || math.IsInf(x, 0) {
			return ex, fmt.Errorf("%w: %s=%s: an excursion must be positive and finite", ErrExcursion, k, v)
		}
	}
	return ex, nil
}

// Of returns the excursion of parameter p of section s (m, or units of εr).
func (ex Excursions) Of(s *section.Section, p section.Param) float64 {
	switch p.Kind {
	case section.ParamThickness, section.ParamMaskLaminate, section.ParamMaskCopper:
		if !ex.ThicknessRelative {
			return ex.Thickness
		}
		return ex.Thickness * paramValue(s, p)
	case section.ParamEr, section.ParamMaskEr:
		return ex.Er
	case section.ParamWidth:
		return ex.Width
	case section.ParamEtch:
		return ex.Etch
	case section.ParamCopper:
		return ex.Copper
	}
	return 0
}

// paramValue returns the present value of a thickness, width or εr parameter.
func paramValue(s *section.Section, p section.Param) float64 {
	switch p.Kind {
	case section.ParamThickness, section.ParamCopper:
		return s.Stackup.Layers[p.Layer].Thickness
	case section.ParamEr:
		return s.Stackup.Layers[p.Layer].Er
	case section.ParamMaskLaminate:
		return s.Stackup.Mask.OverLaminate
	case section.ParamMaskCopper:
		return s.Stackup.Mask.OverCopper
	case section.ParamMaskEr:
		return s.Stackup.Mask.Er
	case section.ParamWidth:
		w := math.Inf(1)
		name := s.Stackup.Layers[p.Layer].Name
		for _, t := range s.Traces {
			if t.Layer == name {
				w = math.Min(w, t.Width)
			}
		}
		return w
	}
	return math.NaN()
}

// CheckExcursions reports an excursion that would take a parameter of s out
// of its physical range: a thickness or width to zero or below (for a width,
// the far-face width Width − 2·Etch), an εr below 1. Etch is not checked:
// its excursion is a first-order estimate either way of the undercut.
func CheckExcursions(s *section.Section, ex Excursions) error {
	for _, p := range s.Params() {
		d := ex.Of(s, p)
		v := paramValue(s, p)
		switch p.Kind {
		case section.ParamEr, section.ParamMaskEr:
			if v-d < 1 {
				return fmt.Errorf("%w: er ±%g would take %s (%g) below 1", ErrExcursion, d, p.Key, v)
			}
		case section.ParamWidth:
			name := s.Stackup.Layers[p.Layer].Name
			for _, t := range s.Traces {
				if t.Layer == name && t.Width-2*t.Etch-d <= 0 {
					return fmt.Errorf("%w: width ±%.3g mil would make %s (%.3g mil at the foot, %.3g mil at the far face) non-positive",
						ErrExcursion, d/unit.Mil, p.Key, t.Width/unit.Mil, (t.Width-2*t.Etch)/unit.Mil)
				}
			}
		case section.ParamEtch:
		default:
			if v-d <= 0 {
				return fmt.Errorf("%w: ±%.3g mil would make %s (%.3g mil) non-positive", ErrExcursion, d/unit.Mil, p.Key, v/unit.Mil)
			}
		}
	}
	return nil
}

// SensitivityRow is one parameter's derivatives at one offset (JSON form):
// per metre for a length ("per": "m"), per unit of εr ("per": "er").
type SensitivityRow struct {
	OffsetM       float64    `json:"offset_m"`
	Parameter     string     `json:"parameter"`
	Per           string     `json:"per"`
	CouplingDB    float64    `json:"d_coupling_db"`
	DirectivityDB float64    `json:"d_directivity_db"`
	ZLineOhm      [2]float64 `json:"d_z_line_ohm"`
	EpsEff        [2]float64 `json:"d_eps_eff"`
}

// Impact is the coupling change at the design offset that one parameter
// causes over its excursion, to first order (JSON form; SI).
type Impact struct {
	Parameter string  `json:"parameter"`
	Per       string  `json:"per"`       // "m" or "er"
	Excursion float64 `json:"excursion"` // m, or units of εr
	// CouplingDB is dCoupling/dp at the design offset, dB per m or per εr.
	CouplingDB float64 `json:"d_coupling_db"`
	// ChangeDB is CouplingDB × Excursion: the change for +Excursion (−
	// Excursion gives the opposite sign to first order).
	ChangeDB float64 `json:"coupling_change_db"`
}

func per(p section.Param) string {
	if p.Kind.IsLength() {
		return "m"
	}
	return "er"
}

// SensitivityRows returns every solved point's sensitivities in order of
// offset, then of parameter (nil for a curve without sensitivities).
func SensitivityRows(c *section.Curve) []SensitivityRow {
	var out []SensitivityRow
	for _, pt := range c.Points {
		for _, sn := range pt.Sens {
			out = append(out, SensitivityRow{OffsetM: pt.Offset, Parameter: sn.Param.Key, Per: per(sn.Param),
				CouplingDB: sn.CouplingDB, DirectivityDB: sn.DirectivityDB, ZLineOhm: sn.ZLine, EpsEff: sn.EpsEff})
		}
	}
	return out
}

// Impacts returns, at the design offset of s, the coupling change each
// parameter of curve c causes over its excursion, largest magnitude first
// (ties in parameter order). The derivative is the curve's interpolant.
func Impacts(s *section.Section, c *section.Curve, ex Excursions) []Impact {
	nom := s.NominalOffset()
	var out []Impact
	for k, p := range c.Params() {
		d := ex.Of(s, p)
		g := c.CouplingSensitivity(k, nom)
		out = append(out, Impact{Parameter: p.Key, Per: per(p), Excursion: d, CouplingDB: g, ChangeDB: g * d})
	}
	sort.SliceStable(out, func(i, j int) bool { return math.Abs(out[i].ChangeDB) > math.Abs(out[j].ChangeDB) })
	return out
}

// WriteSensitivityCSV writes one row per solved offset and parameter of c
// (sensitivity.csv). A length parameter's derivatives go in the columns per
// length unit of u, an εr's in the columns per unit εr; the other pair is
// empty, so that every cell's unit is the one in its header.
func WriteSensitivityCSV(w io.Writer, c *section.Curve, u unit.Output) error {
	cw := csv.NewWriter(w)
	lu := u.Length()
	header := []string{"offset [" + lu + "]", "parameter"}
	for _, q := range []struct{ name, unit string }{
		{"d_coupling", "dB"}, {"d_directivity", "dB"}, {"d_z_line1", "ohm"}, {"d_z_line2", "ohm"},
		{"d_eps_eff_mode1", "1"}, {"d_eps_eff_mode2", "1"},
	} {
		header = append(header, fmt.Sprintf("%s [%s/%s]", q.name, q.unit, lu), fmt.Sprintf("%s [%s per unit er]", q.name, q.unit))
	}
	if err := cw.Write(header); err != nil {
		return err
	}
	for _, pt := range c.Points {
		for _, sn := range pt.Sens {
			scale, col := 1.0, 1 // εr: per unit, second column of each pair
			if sn.Param.Kind.IsLength() {
				scale, col = u.LengthSI(), 0 // per m × m per unit length
			}
			rec := make([]string, len(header))
			rec[0], rec[1] = fixed(pt.Offset/u.LengthSI(), 4), sn.Param.Key
			for q, v := range []float64{sn.CouplingDB, sn.DirectivityDB, sn.ZLine[0], sn.ZLine[1], sn.EpsEff[0], sn.EpsEff[1]} {
				rec[2+2*q+col] = strconv.FormatFloat(v*scale, 'g', 6, 64)
			}
			if err := cw.Write(rec); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}
