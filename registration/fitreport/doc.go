// Package fitreport holds the forms a fit of measured registration targets
// is written in: the JSON summary of every panel-and-layer fit and of the
// lot, fit.csv (terms and standard errors per fit), residuals.csv (measured,
// fitted and residual displacement per target) and the pooled residual grid
// of a layer in the format registration.ReadGrid reads back. Terms are named
// and united by the term table of package registration.
package fitreport
