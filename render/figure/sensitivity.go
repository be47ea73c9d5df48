package figure

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// Sensitivity draws, at the design offset of s, the coupling change each
// parameter causes over its excursion, ranked as given (drift.Impacts), one
// bar per parameter: to the right a rise of coupling for a rise of the
// parameter, to the left a fall, in two colours (sensitivity.png).
func Sensitivity(w io.Writer, s *section.Section, imp []drift.Impact, u unit.Output) error {
	b := render.BarChart{
		Title: fmt.Sprintf("Section %s: coupling change at the design offset (%.3g %s) over each parameter's excursion",
			s.Name, s.NominalOffset()/u.LengthSI(), u.Length()),
		XLabel: "coupling change [dB]  (right: coupling rises as the parameter rises; a − excursion reverses the sign)",
	}
	for _, im := range imp {
		b.Labels = append(b.Labels, fmt.Sprintf("%s ±%s", im.Parameter, excursionText(im, u)))
		b.Values = append(b.Values, im.ChangeDB)
		b.Texts = append(b.Texts, fmt.Sprintf("%+.3g dB", im.ChangeDB))
		var col color.Color = render.Series(0)
		if im.ChangeDB < 0 {
			col = render.Series(1)
		}
		b.Colors = append(b.Colors, col)
	}
	if len(imp) == 0 || allZero(imp) {
		b.XMax = 1
	}
	return b.Render(1800, 0).EncodePNG(w)
}

// excursionText writes an excursion in the output length unit, or as εr.
func excursionText(im drift.Impact, u unit.Output) string {
	if im.Per == "er" {
		return fmt.Sprintf("%.3g", im.Excursion)
	}
	return fmt.Sprintf("%.3g %s", im.Excursion/u.LengthSI(), u.Length())
}

func allZero(imp []drift.Impact) bool {
	for _, im := range imp {
		if math.Abs(im.ChangeDB) > 0 {
			return false
		}
	}
	return true
}
