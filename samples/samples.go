// Package samples holds the demo jobs and measurement files, embedded so that
// "regdrift demo" runs with no files around it. Every scenario here is
// invented for the demo; none is a reference value.
//
// Files named *.inc.toml are not jobs on their own: other samples include
// them (the topology comparison's shared panel and process file).
package samples

import "embed"

// FS holds the sample files: *.toml jobs and *.csv measurement, placement and
// residual files.
//
//go:embed *.toml *.csv
var FS embed.FS
