// Package figure draws regdrift's figures from the results of package
// drift: the panel maps (map.png, yield.png, comp.png), the plots of a
// section's coupling curve (sweep.png, tol.png) and the yield study's charts
// (parts.png, budget.png), and the fit of measured registration targets
// (fit.png).
//
// Every panel map starts from one preamble (newPanelMap, drawPanel): the
// panel outline, the border of the usable area, the part outlines where they
// are large enough to see, and axes in inches or millimetres as the unit.Output
// says (axisUnit; fit.png uses the same axes). Every per-pixel field is computed by drift.Evaluator.Value
// over the analysis's zones (drift.Analysis.Zones): over each array its own
// coupler kinds, elsewhere the most common kind of the panel; the bar drawn
// for each site takes the same quantity from the site's own evaluation.
//
// One colour convention: every panel figure is dark at its bad end (large
// drift, small margin, low yield, a site's window used up), so that a reader
// who has learnt one map reads the next.
package figure
