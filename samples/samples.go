// Package samples holds the demo jobs and measurement files, embedded so that
// "regdrift demo" runs with no files around it. Every scenario here is
// invented for the demo; none is a reference value.
package samples

import "embed"

// FS holds the sample files: *.toml jobs and *.csv measurement, placement and
// residual files.
//
//go:embed *.toml *.csv
var FS embed.FS
