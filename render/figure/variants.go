package figure

import (
	"fmt"
	"image/color"
	"io"

	"github.com/regdrift/regdrift/registration/drift"
	"github.com/regdrift/regdrift/render"
)

// Variants draws a comparison of placement variants (variants.png): one bar
// per variant for the parts it is expected to lose per panel, then one per
// array of each, coloured by variant. Losses rather than yields are drawn so
// that bars start at zero and the differences that decide between variants
// (a few parts of several hundred) are as long as the bars; the text at each
// bar gives the part yield and the good parts per panel. In a closed-form
// comparison a bar is the most the bounds allow to be lost, and the text
// gives both bounds. Coupon arrays are drawn grey: they count in no total.
// title names the design.
func Variants(w io.Writer, cmp *drift.VariantComparison, title string) error {
	b := render.BarChart{XLabel: "parts lost per panel (expected)"}
	how := fmt.Sprintf("%d panels each, seed %d", cmp.Trials, cmp.Seed)
	if cmp.Trials == 0 {
		how = "closed form, bars at the upper bound"
		b.XLabel = "parts lost per panel (at most, from the closed-form bounds)"
	}
	b.Title = fmt.Sprintf("Placement variants, parts lost per panel (%s)", how)
	if t := b.Title + ": " + title; len([]rune(t)) <= titleRunes {
		b.Title = t // the design's title only when it fits whole
	}
	for k, v := range cmp.Variants {
		col := render.Series(k)
		if v.GoodPartsPerPanel != nil {
			gp := v.GoodPartsPerPanel.Mean
			b.Labels = append(b.Labels, v.Name+": panel")
			b.Values = append(b.Values, float64(v.Parts)-gp)
			b.Texts = append(b.Texts, fmt.Sprintf("%.2f of %d lost, part yield %.3f %%", float64(v.Parts)-gp, v.Parts, 100**v.PartYieldMean))
		} else {
			lo, hi := v.GoodPartsBounds[0], v.GoodPartsBounds[1]
			b.Labels = append(b.Labels, v.Name+": panel")
			b.Values = append(b.Values, float64(v.Parts)-lo)
			b.Texts = append(b.Texts, fmt.Sprintf("%.2f–%.2f of %d lost, part yield %.3f–%.3f %%", float64(v.Parts)-hi, float64(v.Parts)-lo,
				v.Parts, 100*v.PartYieldBounds[0], 100*v.PartYieldBounds[1]))
		}
		b.Colors = append(b.Colors, col)
		for _, g := range v.Arrays {
			label := "  " + v.Name + " / " + g.Name
			var c color.Color = col
			if !g.Product {
				label += " (coupons, not counted)"
				c = color.RGBA{150, 150, 155, 255} // mid grey: visible, and no variant's colour
			}
			b.Labels = append(b.Labels, label)
			b.Colors = append(b.Colors, c)
			if g.GoodPartsMean != nil {
				lost := float64(g.Parts) - *g.GoodPartsMean
				b.Values = append(b.Values, lost)
				b.Texts = append(b.Texts, fmt.Sprintf("%.2f of %d lost, part yield %.3f %%", lost, g.Parts, 100**g.PartYieldMean))
			} else {
				b.Values = append(b.Values, float64(g.Parts)-g.GoodPartsBounds[0])
				b.Texts = append(b.Texts, fmt.Sprintf("%.2f–%.2f of %d lost", float64(g.Parts)-g.GoodPartsBounds[1],
					float64(g.Parts)-g.GoodPartsBounds[0], g.Parts))
			}
		}
	}
	// The texts are longer than the 12 % of the axis the chart leaves for
	// them: the longest bar takes 55 % of the width, the rest is for its text.
	var top float64
	for _, v := range b.Values {
		top = max(top, v)
	}
	if top > 0 {
		b.XMax = top / 0.55
	}
	return b.Render(2000, 0).EncodePNG(w)
}

// titleRunes is about as many characters as the bar chart's bold title
// holds across its 2000 pixels (a text size of width/64, characters about
// 0.55 of it wide, times 1.2 for the title): the design's title is left out
// of a longer one rather than cut.
const titleRunes = 88
