// Package history keeps lot after lot of registration fits in a database,
// charts each construction's material movement and recommends the artwork
// scale of the next lot.
//
// # The store
//
// A DB is one SQLite file (the pure-Go driver modernc.org/sqlite, so nothing
// needs installing), used only through database/sql with plain SQL so that
// a server database can take its place. Its schema is versioned: the table
// regdrift_history records each migration applied, Open brings an older
// file up to date in one transaction, and refuses a file of a newer schema
// (ErrNewerSchema), a file that is not SQLite or a SQLite database without
// that table (ErrNotHistory) before writing anything to it. The file is in
// write-ahead-logging mode and every transaction takes the write lock at
// its start and waits for it under a busy timeout, so several processes
// can add lots at once; each lot is added in one transaction, whole or not
// at all. The tables:
//
//	regdrift_history (version, migrated)
//	lot       (id, name UNIQUE, date)                       one row per lot
//	fit       (lot_id, panel, layer, ...)  key (lot_id, panel, layer)
//	          construction, role, model, targets, dof, the six terms as
//	          measured and their standard errors, sigma0, rms and max
//	          residual, outliers, applied_scale_x, applied_scale_y
//	lot_layer (lot_id, layer, ...)         key (lot_id, layer)
//	          per lot and layer: construction, role, date, panels, mean and
//	          sample standard deviation of each term of the material movement
//
// Terms are stored in SI as measured against CAD, beside the artwork scale
// each layer was built with; the material movement (registration.Applied:
// the measurement with the applied artwork taken out) is what lot_layer
// holds and every statistic uses. lot_layer is derived from fit in the same
// transaction, so charts and tables read one row per lot and layer instead
// of one per panel.
//
// Export writes one CSV row per panel and layer fit with units in the
// header; Import reads it back in one transaction. Values carry twelve
// significant digits, so export, import and export again is byte-identical.
//
// # Charts
//
// A Series is one construction's layer role (or one layer) lot by lot: per
// lot the mean and within-lot standard deviation of each term of the
// movement over its panels. NewTrend charts one term: an individuals chart
// with limits from the average moving range (Montgomery, Introduction to
// Statistical Quality Control, individuals and moving-range charts:
// σ̂ = MR̄/d₂, d₂ = 1.128), an EWMA chart with time-varying limits
// (same text, EWMA control chart), and the points that break a Western
// Electric rule (Statistical Quality Control Handbook, 1956). The centre
// line and σ̂ come from the whole series, a retrospective (phase I) chart:
// a step in the movement shows as runs on either side of the centre.
//
// # The scale table
//
// Table gives, per construction, role and axis, the artwork scale for the
// next lot from an EWMA run-to-run estimate of the movement (the controller
// of Ingolfsson & Sachs 1993, λ = ControllerLambda, see there for why), its
// standard error, the lots behind it, the latest lot and the chart signals
// among the latest lots (from a chart of the last ShiftBaseline lots, so a
// step absorbed long ago stops flagging). WriteTableCSV and WriteContributors write it for a
// spreadsheet and for a job to include.
//
// References and the sources of the test values are listed in REFERENCES.md.
package history
