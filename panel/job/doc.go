// Package job reads and writes regdrift's job files.
//
// A job file (TOML) describes one panel: its outline, border and datum, the
// stackup, the coupled-line sections, the parts with their couplers and the
// step-and-repeat arrays that place them (or a placement CSV), and the
// registration error contributors. Load and Parse read one, with everything
// it includes, into a Job: the panel layout expanded to coupler sites, the
// sections, and the registration model, all SI.
//
// # Includes
//
// include = ["f.toml", ...] reads other files first, relative to the including
// file: a shared stackup, fitted contributors, a compensation. A single table
// ([panel], [stackup]) may be defined in one file only; arrays of tables
// ([[section]], [[contributor]], ...) add up, the included files' first.
//
// # Errors
//
// Bad input is a *ParseError holding the file, the 1-based line and the key
// path ("section[0].traces[1].width"); its Err is one of ErrUnknownKey,
// ErrMissing and ErrValue, or a *unit.Error for a value that does not parse,
// so callers sort errors with errors.As and errors.Is. The line of every key
// is found from the TOML syntax tree, inside this package. A bad placement
// or residual CSV file is a *registration.CSVError naming the row and column.
// What a program does with these (its exit status, say) is the program's
// choice; nothing here names a command or a flag.
//
// # Writing
//
// WriteContributors writes a measured lot (registration.Lot) as
// [[contributor]] tables and WriteCompensation an artwork compensation
// (registration.CompResult) as fixed contributors, with a unit on every
// value, so that a job includes them and Parse reads back what was written.
// The six affine terms are read and written by the term table of package
// registration (registration.TermKind.Info), so a term added there is read
// and written here with no change to this package.
package job
