package history

import (
	"bytes"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"
	"time"

	_ "modernc.org/sqlite" // the pure-Go SQLite driver, registered as "sqlite"

	"github.com/regdrift/regdrift/registration"
)

// SchemaVersion is the schema this package writes. A database of a newer
// version is refused: its data may mean something this version cannot read.
const SchemaVersion = 1

// Errors of the store, for errors.Is.
var (
	ErrNotHistory   = errors.New("not a regdrift history")
	ErrNewerSchema  = errors.New("written by a newer regdrift")
	ErrIsDirectory  = errors.New("is a directory")
	ErrLotExists    = errors.New("lot already stored")
	ErrInvalidLot   = errors.New("invalid lot")
	ErrNoSuchLot    = errors.New("no such lot")
	errMissingTable = errors.New("missing table")
)

// DateLayout is the form of a lot date: an ISO 8601 calendar date.
const DateLayout = "2006-01-02"

// busyTimeout is how long a write waits for another process's write to
// finish before giving up. Adding one lot holds the write lock for a few
// milliseconds, so 30 s covers dozens of engineers adding lots at once.
const busyTimeout = 30 * time.Second

// DB is a registration history: one SQLite file holding every lot's fits.
// It is safe for use by several goroutines and by several processes on the
// same file.
type DB struct {
	db   *sql.DB
	path string
}

// sqliteMagic starts every SQLite 3 database file (SQLite file format,
// section 1.3, "The Database Header": the 16-byte header string).
var sqliteMagic = []byte("SQLite format 3\x00")

// Open opens the history at path, creating it (and its schema) when the file
// does not exist or is empty. A file that is not a SQLite database, a SQLite
// database without a regdrift history in it, or a history of a newer schema
// is refused with ErrNotHistory or ErrNewerSchema before anything is written
// to it; a directory is refused with ErrIsDirectory.
func Open(ctx context.Context, path string) (*DB, error) {
	if strings.ContainsAny(path, "?#") {
		return nil, fmt.Errorf("%s: a database path may not contain '?' or '#'", path)
	}
	if st, err := os.Stat(path); err == nil {
		if st.IsDir() {
			return nil, fmt.Errorf("%s: %w", path, ErrIsDirectory)
		}
		if st.Size() > 0 {
			if err := checkMagic(path); err != nil {
				return nil, err
			}
		}
	} else if !errors.Is(err, os.ErrNotExist) {
		return nil, err
	}
	// The busy timeout applies to every connection of the pool; _txlock
	// makes every transaction BEGIN IMMEDIATE, so that a writer takes the
	// write lock at once and waits for it under the busy timeout, instead of
	// failing when a read lock cannot be upgraded (SQLite, "File Locking And
	// Concurrency in SQLite Version 3", and the WAL notes on SQLITE_BUSY).
	// A 64 MB page cache per connection keeps the chart tables of a large
	// history in memory between queries (the default is 2 MB).
	dsn := fmt.Sprintf("%s?_pragma=busy_timeout(%d)&_pragma=cache_size(-65536)&_txlock=immediate", path, busyTimeout.Milliseconds())
	db, err := sql.Open("sqlite", dsn)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	d := &DB{db: db, path: path}
	if err := d.init(ctx); err != nil {
		db.Close()
		return nil, err
	}
	return d, nil
}

func checkMagic(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	head := make([]byte, len(sqliteMagic))
	if _, err := io.ReadFull(f, head); err != nil || !bytes.Equal(head, sqliteMagic) {
		return fmt.Errorf("%s: %w (not a SQLite database)", path, ErrNotHistory)
	}
	return nil
}

// init checks what the file holds, switches it to write-ahead logging and
// brings the schema up to date. Nothing is written before the checks pass.
func (d *DB) init(ctx context.Context) error {
	v, err := d.version(ctx)
	if err != nil {
		return err
	}
	if v > SchemaVersion {
		return fmt.Errorf("%s: %w (schema version %d; this regdrift reads up to %d)", d.path, ErrNewerSchema, v, SchemaVersion)
	}
	// Write-ahead logging lets readers go on while one process writes, and
	// writers queue on the busy timeout (SQLite, "Write-Ahead Logging").
	// The mode is stored in the file, so this is a no-op after the first
	// open.
	var mode string
	if err := d.db.QueryRowContext(ctx, "PRAGMA journal_mode=WAL").Scan(&mode); err != nil {
		return fmt.Errorf("%s: %w", d.path, err)
	}
	if v == SchemaVersion {
		return nil
	}
	return d.migrate(ctx)
}

// version returns the schema version recorded in the file: 0 for a new,
// empty database. A database with tables but no version table is not a
// history.
func (d *DB) version(ctx context.Context) (int, error) {
	rows, err := d.db.QueryContext(ctx, "SELECT name FROM sqlite_master WHERE type = 'table'")
	if err != nil {
		if strings.Contains(err.Error(), "not a database") {
			return 0, fmt.Errorf("%s: %w (not a SQLite database)", d.path, ErrNotHistory)
		}
		return 0, fmt.Errorf("%s: %w", d.path, err)
	}
	var tables []string
	for rows.Next() {
		var n string
		if err := rows.Scan(&n); err != nil {
			rows.Close()
			return 0, err
		}
		tables = append(tables, n)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return 0, err
	}
	if len(tables) == 0 {
		return 0, nil
	}
	found := false
	for _, t := range tables {
		found = found || t == "regdrift_history"
	}
	if !found {
		return 0, fmt.Errorf("%s: %w (a SQLite database with the tables %s)", d.path, ErrNotHistory, strings.Join(tables, ", "))
	}
	var v int
	if err := d.db.QueryRowContext(ctx, "SELECT max(version) FROM regdrift_history").Scan(&v); err != nil {
		return 0, fmt.Errorf("%s: %w (reading the schema version: %v)", d.path, ErrNotHistory, err)
	}
	return v, nil
}

// migrations[i] brings the schema from version i to i+1. Each runs in one
// transaction with the version row it records, so a schema is never half
// migrated.
var migrations = [][]string{
	{
		// One row per migration applied.
		`CREATE TABLE regdrift_history (
			version  INTEGER NOT NULL PRIMARY KEY,
			migrated TEXT NOT NULL
		)`,
		`CREATE TABLE lot (
			id   INTEGER PRIMARY KEY,
			name TEXT NOT NULL UNIQUE,
			date TEXT NOT NULL
		)`,
		`CREATE INDEX lot_by_date ON lot (date, id)`,
		// One row per panel and layer fit, the terms as measured (SI: m,
		// rad, strain) and the artwork scale the layer was built with.
		`CREATE TABLE fit (
			lot_id       INTEGER NOT NULL REFERENCES lot (id),
			seq          INTEGER NOT NULL,
			panel        TEXT NOT NULL,
			layer        TEXT NOT NULL,
			construction TEXT NOT NULL,
			role         TEXT NOT NULL,
			model        TEXT NOT NULL,
			targets      INTEGER NOT NULL,
			dof          INTEGER NOT NULL,
			offset_x REAL NOT NULL, offset_y REAL NOT NULL, rotation REAL NOT NULL,
			scale_x  REAL NOT NULL, scale_y  REAL NOT NULL, skew     REAL NOT NULL,
			se_offset_x REAL, se_offset_y REAL, se_rotation REAL,
			se_scale_x  REAL, se_scale_y  REAL, se_skew     REAL,
			sigma0       REAL NOT NULL,
			rms_residual REAL NOT NULL,
			max_residual REAL NOT NULL,
			outliers     TEXT NOT NULL,
			applied_scale_x REAL NOT NULL,
			applied_scale_y REAL NOT NULL,
			PRIMARY KEY (lot_id, panel, layer)
		) WITHOUT ROWID`,
		// Per lot and layer, the mean and sample standard deviation over the
		// panels of each term of the material movement (the measured scale
		// with the applied artwork scale taken out): what the charts and the
		// scale table read, so that they need not scan every fit. The lot's
		// name and date are repeated here so that a chart reads one table.
		`CREATE TABLE lot_layer (
			construction TEXT NOT NULL,
			role         TEXT NOT NULL,
			date         TEXT NOT NULL,
			lot_id       INTEGER NOT NULL REFERENCES lot (id),
			layer        TEXT NOT NULL,
			lot          TEXT NOT NULL,
			panels       INTEGER NOT NULL,
			mean_offset_x REAL NOT NULL, mean_offset_y REAL NOT NULL, mean_rotation REAL NOT NULL,
			mean_scale_x  REAL NOT NULL, mean_scale_y  REAL NOT NULL, mean_skew     REAL NOT NULL,
			sd_offset_x REAL NOT NULL, sd_offset_y REAL NOT NULL, sd_rotation REAL NOT NULL,
			sd_scale_x  REAL NOT NULL, sd_scale_y  REAL NOT NULL, sd_skew     REAL NOT NULL,
			PRIMARY KEY (construction, role, date, lot_id, layer)
		) WITHOUT ROWID`,
		// The key above stores the rows in the order the charts read them
		// (a series is one range of the table, read straight through);
		// this index keeps (lot, layer) unique and finds a lot's rows.
		`CREATE UNIQUE INDEX lot_layer_by_lot ON lot_layer (lot_id, layer)`,
		// Lists the series (construction, role, layer) in order without
		// sorting every row.
		`CREATE INDEX lot_layer_series ON lot_layer (construction, role, layer)`,
	},
}

func (d *DB) migrate(ctx context.Context) error {
	tx, err := d.db.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("%s: %w", d.path, err)
	}
	defer tx.Rollback()
	// Another process may have migrated the file since the check: read the
	// version again under the write lock.
	v := 0
	var has int
	if err := tx.QueryRowContext(ctx, "SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = 'regdrift_history'").Scan(&has); err != nil {
		return err
	}
	if has > 0 {
		if err := tx.QueryRowContext(ctx, "SELECT max(version) FROM regdrift_history").Scan(&v); err != nil {
			return err
		}
	}
	if v > SchemaVersion {
		return fmt.Errorf("%s: %w (schema version %d; this regdrift reads up to %d)", d.path, ErrNewerSchema, v, SchemaVersion)
	}
	now := time.Now().UTC().Format(time.RFC3339)
	for ; v < SchemaVersion; v++ {
		for _, s := range migrations[v] {
			if _, err := tx.ExecContext(ctx, s); err != nil {
				return fmt.Errorf("%s: migrating to schema %d: %w", d.path, v+1, err)
			}
		}
		if _, err := tx.ExecContext(ctx, "INSERT INTO regdrift_history (version, migrated) VALUES (?, ?)", v+1, now); err != nil {
			return err
		}
	}
	return tx.Commit()
}

// Close closes the database.
func (d *DB) Close() error { return d.db.Close() }

// Path returns the file the history is stored in.
func (d *DB) Path() string { return d.path }

// Lot is one lot: its name, the date it was built, and one fit per panel and
// layer.
type Lot struct {
	Name string
	Date string // DateLayout
	Fits []FitRecord
}

// FitRecord is one panel's and layer's fit as the history keeps it.
type FitRecord struct {
	Panel, Layer string
	// Construction names the build of the layer's material (laminate, core
	// thickness, copper weights, lamination cycle); Role names the layer's
	// place in it ("core top", "core bottom"). Lots are compared per
	// construction and role.
	Construction, Role string
	Model              registration.FitModel
	Targets, DOF       int
	// Terms are the terms as measured against CAD (SI); StdErr their
	// standard errors, NaN without redundancy.
	Terms, StdErr      [registration.NumTerms]float64
	Sigma0, RMS, Max   float64 // m
	Outliers           []string
	AppliedX, AppliedY float64 // the artwork scale the layer was built with (see registration.Applied)
}

// NewFitRecord returns the record of fit f of a layer of the given
// construction and role, built with the artwork scales ax, ay.
func NewFitRecord(f *registration.Fit, construction, role string, ax, ay float64) FitRecord {
	return FitRecord{
		Panel: f.Panel, Layer: f.Layer, Construction: construction, Role: role,
		Model: f.Model, Targets: f.N, DOF: f.DOF, Terms: f.Terms, StdErr: f.StdErr,
		Sigma0: f.Sigma0, RMS: f.RMS, Max: f.Max, Outliers: f.Outliers,
		AppliedX: ax, AppliedY: ay,
	}
}

// Movement returns the material movement: the measured terms with the
// applied artwork scale taken out of the scales (registration.MaterialScale).
func (r *FitRecord) Movement() [registration.NumTerms]float64 {
	m := r.Terms
	m[registration.ScaleX] = registration.MaterialScale(r.Terms[registration.ScaleX], r.AppliedX)
	m[registration.ScaleY] = registration.MaterialScale(r.Terms[registration.ScaleY], r.AppliedY)
	return m
}

// Validate checks a lot before it is stored.
func (l *Lot) Validate() error {
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%w: lot %q: %s", ErrInvalidLot, l.Name, fmt.Sprintf(format, args...))
	}
	if strings.TrimSpace(l.Name) == "" || l.Name != strings.TrimSpace(l.Name) {
		return bad("a lot needs a name without leading or trailing spaces")
	}
	if _, err := time.Parse(DateLayout, l.Date); err != nil {
		return bad("date %q: want YYYY-MM-DD", l.Date)
	}
	if len(l.Fits) == 0 {
		return bad("no fits")
	}
	type key struct{ panel, layer string }
	seen := map[key]bool{}
	cons := map[string][2]string{}
	for i := range l.Fits {
		f := &l.Fits[i]
		k := key{f.Panel, f.Layer}
		if seen[k] {
			return bad("panel %q, layer %q appears twice", f.Panel, f.Layer)
		}
		seen[k] = true
		if f.Panel == "" || f.Layer == "" || f.Construction == "" || f.Role == "" {
			return bad("panel %q, layer %q: panel, layer, construction and role must not be empty", f.Panel, f.Layer)
		}
		if c, ok := cons[f.Layer]; ok && c != [2]string{f.Construction, f.Role} {
			return bad("layer %q is %q (%s) on one panel and %q (%s) on panel %q", f.Layer, c[0], c[1], f.Construction, f.Role, f.Panel)
		}
		cons[f.Layer] = [2]string{f.Construction, f.Role}
		// Standard errors may be NaN (no redundancy); nothing else may.
		vals := append([]float64{f.Sigma0, f.RMS, f.Max, f.AppliedX, f.AppliedY}, f.Terms[:]...)
		for _, v := range append(vals, f.StdErr[:]...) {
			if math.IsInf(v, 0) {
				return bad("panel %q, layer %q: infinite value", f.Panel, f.Layer)
			}
		}
		for _, v := range vals {
			if math.IsNaN(v) {
				return bad("panel %q, layer %q: NaN value", f.Panel, f.Layer)
			}
		}
		if f.Targets < 0 {
			return bad("panel %q, layer %q: negative target count", f.Panel, f.Layer)
		}
		if !(f.AppliedX > -0.5 && f.AppliedX < 0.5 && f.AppliedY > -0.5 && f.AppliedY < 0.5) {
			return bad("panel %q, layer %q: applied artwork scale outside ±50 %%", f.Panel, f.Layer)
		}
	}
	return nil
}

// Add stores a lot in one transaction: the lot is stored whole or not at
// all. A lot of the same name already stored is refused with ErrLotExists
// unless replace, which deletes it first in the same transaction.
func (d *DB) Add(ctx context.Context, l *Lot, replace bool) error {
	return d.addLots(ctx, []*Lot{l}, replace)
}

// AddLots stores lots in one transaction: all of them or none.
func (d *DB) AddLots(ctx context.Context, lots []*Lot, replace bool) error {
	return d.addLots(ctx, lots, replace)
}

// addLots stores lots in one transaction.
func (d *DB) addLots(ctx context.Context, lots []*Lot, replace bool) error {
	for _, l := range lots {
		if err := l.Validate(); err != nil {
			return err
		}
	}
	tx, err := d.db.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("%s: %w", d.path, err)
	}
	defer tx.Rollback()
	w, err := newWriter(ctx, tx)
	if err != nil {
		return err
	}
	defer w.close()
	for _, l := range lots {
		if err := w.add(ctx, l, replace); err != nil {
			return err
		}
	}
	if err := tx.Commit(); err != nil {
		return fmt.Errorf("%s: %w", d.path, err)
	}
	return nil
}

// writer holds the prepared statements of one transaction that adds lots.
type writer struct {
	tx             *sql.Tx
	find, lot, sum *sql.Stmt
	del            []*sql.Stmt
	fits           map[int]*sql.Stmt // INSERT of n fit rows, by n
}

// fitBatch is the most fit rows one INSERT writes: one statement per 64
// rows instead of one per row cuts the per-statement cost of database/sql
// and the driver, which is most of an add (27 values a row, 1728 a
// statement, far below SQLite's limit of 32766).
const fitBatch = 64

// fitStmt returns the prepared INSERT of n fit rows.
func (w *writer) fitStmt(ctx context.Context, n int) (*sql.Stmt, error) {
	if s := w.fits[n]; s != nil {
		return s, nil
	}
	row := "(" + strings.TrimSuffix(strings.Repeat("?, ", 27), ", ") + ")"
	q := "INSERT INTO fit (" + fitColumns + ") VALUES " + strings.TrimSuffix(strings.Repeat(row+", ", n), ", ")
	s, err := w.tx.PrepareContext(ctx, q)
	if err != nil {
		return nil, err
	}
	w.fits[n] = s
	return s, nil
}

const fitColumns = `lot_id, seq, panel, layer, construction, role, model, targets, dof,
	offset_x, offset_y, rotation, scale_x, scale_y, skew,
	se_offset_x, se_offset_y, se_rotation, se_scale_x, se_scale_y, se_skew,
	sigma0, rms_residual, max_residual, outliers, applied_scale_x, applied_scale_y`

func newWriter(ctx context.Context, tx *sql.Tx) (*writer, error) {
	w := &writer{tx: tx, fits: map[int]*sql.Stmt{}}
	var err error
	prep := func(q string) *sql.Stmt {
		if err != nil {
			return nil
		}
		var s *sql.Stmt
		s, err = tx.PrepareContext(ctx, q)
		return s
	}
	w.find = prep("SELECT id FROM lot WHERE name = ?")
	w.lot = prep("INSERT INTO lot (name, date) VALUES (?, ?)")
	w.sum = prep(`INSERT INTO lot_layer (lot_id, layer, construction, role, date, lot, panels,
		mean_offset_x, mean_offset_y, mean_rotation, mean_scale_x, mean_scale_y, mean_skew,
		sd_offset_x, sd_offset_y, sd_rotation, sd_scale_x, sd_scale_y, sd_skew)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`)
	for _, t := range []string{"fit", "lot_layer", "lot"} {
		col := "lot_id"
		if t == "lot" {
			col = "id"
		}
		w.del = append(w.del, prep("DELETE FROM "+t+" WHERE "+col+" = ?"))
	}
	if err != nil {
		w.close()
		return nil, err
	}
	return w, nil
}

func (w *writer) close() {
	for _, s := range append([]*sql.Stmt{w.find, w.lot, w.sum}, w.del...) {
		if s != nil {
			s.Close()
		}
	}
	for _, s := range w.fits {
		s.Close()
	}
}

func nullable(v float64) any {
	if math.IsNaN(v) {
		return nil
	}
	return v
}

func (w *writer) add(ctx context.Context, l *Lot, replace bool) error {
	var id int64
	switch err := w.find.QueryRowContext(ctx, l.Name).Scan(&id); {
	case err == nil:
		if !replace {
			return fmt.Errorf("lot %q: %w (give replace to store it again)", l.Name, ErrLotExists)
		}
		for _, s := range w.del {
			if _, err := s.ExecContext(ctx, id); err != nil {
				return err
			}
		}
	case !errors.Is(err, sql.ErrNoRows):
		return err
	}
	res, err := w.lot.ExecContext(ctx, l.Name, l.Date)
	if err != nil {
		return err
	}
	if id, err = res.LastInsertId(); err != nil {
		return err
	}
	args := make([]any, 0, 27*fitBatch)
	for i0 := 0; i0 < len(l.Fits); i0 += fitBatch {
		i1 := min(i0+fitBatch, len(l.Fits))
		args = args[:0]
		for i := i0; i < i1; i++ {
			f := &l.Fits[i]
			t, s := f.Terms, f.StdErr
			args = append(args, id, i, f.Panel, f.Layer, f.Construction, f.Role, f.Model.String(), f.Targets, f.DOF,
				t[0], t[1], t[2], t[3], t[4], t[5],
				nullable(s[0]), nullable(s[1]), nullable(s[2]), nullable(s[3]), nullable(s[4]), nullable(s[5]),
				f.Sigma0, f.RMS, f.Max, strings.Join(f.Outliers, outlierSep), f.AppliedX, f.AppliedY)
		}
		st, err := w.fitStmt(ctx, i1-i0)
		if err != nil {
			return err
		}
		if _, err := st.ExecContext(ctx, args...); err != nil {
			return fmt.Errorf("lot %q, fits %d to %d: %w", l.Name, i0+1, i1, err)
		}
	}
	if testHookAfterFits != nil {
		testHookAfterFits()
	}
	for _, s := range summarise(l) {
		m, sd := s.mean, s.sd
		_, err := w.sum.ExecContext(ctx, id, s.layer, s.construction, s.role, l.Date, l.Name, s.panels,
			m[0], m[1], m[2], m[3], m[4], m[5], sd[0], sd[1], sd[2], sd[3], sd[4], sd[5])
		if err != nil {
			return fmt.Errorf("lot %q, layer %q: %w", l.Name, s.layer, err)
		}
	}
	return nil
}

// testHookAfterFits, when set by a test, runs in the middle of adding a lot:
// after its fits are written and before its summaries and the commit.
var testHookAfterFits func()

// outlierSep separates the outlier target names in the fit table and the
// export.
const outlierSep = ";"

// layerSummary is one lot's layer: the mean and the sample standard
// deviation over its panels of each term of the material movement.
type layerSummary struct {
	layer, construction, role string
	panels                    int
	mean, sd                  [registration.NumTerms]float64
}

// summarise returns the lot's layers in order of first appearance
// (Validate has checked that each layer has one construction and role).
func summarise(l *Lot) []layerSummary {
	var order []string
	by := map[string][]*FitRecord{}
	for i := range l.Fits {
		f := &l.Fits[i]
		if _, ok := by[f.Layer]; !ok {
			order = append(order, f.Layer)
		}
		by[f.Layer] = append(by[f.Layer], f)
	}
	out := make([]layerSummary, 0, len(order))
	for _, layer := range order {
		fs := by[layer]
		s := layerSummary{layer: layer, construction: fs[0].Construction, role: fs[0].Role, panels: len(fs)}
		var mv [][registration.NumTerms]float64
		for _, f := range fs {
			mv = append(mv, f.Movement())
		}
		for k := range s.mean {
			var sum float64
			for _, m := range mv {
				sum += m[k]
			}
			mean := sum / float64(len(mv))
			var ss float64
			for _, m := range mv {
				ss += (m[k] - mean) * (m[k] - mean)
			}
			s.mean[k] = mean
			if len(mv) > 1 {
				s.sd[k] = math.Sqrt(ss / float64(len(mv)-1))
			}
		}
		out = append(out, s)
	}
	return out
}
