package history

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"strings"

	"github.com/regdrift/regdrift/registration"
)

// Filter selects the lots' layers a query reads. Empty fields select all.
type Filter struct {
	Construction, Role string
	// Layer selects one layer name; the series is then that layer's, not
	// its construction and role's.
	Layer string
}

// Point is one lot of a series: the mean and the within-lot sample standard
// deviation of each term of the material movement over the panels (and the
// layers of one construction and role) of the lot.
type Point struct {
	LotID    int64
	Lot      string
	Date     string
	N        int // fits behind the mean: panels times layers
	Mean, SD [registration.NumTerms]float64
}

// Series is the history of one construction and layer role (or one layer),
// one point per lot in order of date (and of storing, within a date).
type Series struct {
	Construction, Role string
	Layer              string // set when the filter chose one layer
	Layers             []string
	Points             []Point
}

// Values returns the lot means of term k.
func (s *Series) Values(k registration.TermKind) []float64 {
	v := make([]float64, len(s.Points))
	for i := range s.Points {
		v[i] = s.Points[i].Mean[k]
	}
	return v
}

// Series returns the series the filter selects, in order of construction
// and role, reading the terms asked for (all six when none are given).
func (d *DB) Series(ctx context.Context, f Filter, terms ...registration.TermKind) ([]Series, error) {
	return d.series(ctx, f, true, terms)
}

// series reads the series one by one: first which constructions and roles
// the filter selects, then each one's rows, a range of lot_layer's key
// read in order. Without names the points carry no lot name or date,
// which saves the driver a text value per row (most of a large table's
// cost); the callers fill in the few they show.
func (d *DB) series(ctx context.Context, f Filter, names bool, terms []registration.TermKind) ([]Series, error) {
	if len(terms) == 0 {
		for k := range registration.NumTerms {
			terms = append(terms, registration.TermKind(k))
		}
	}
	var cols strings.Builder
	for _, k := range terms {
		if k < 0 || k >= registration.NumTerms {
			panic(fmt.Sprintf("history: term %d out of range", k))
		}
		fmt.Fprintf(&cols, ", mean_%s, sd_%s", k, k)
	}
	var where []string
	var args []any
	for _, c := range []struct{ col, v string }{{"construction", f.Construction}, {"role", f.Role}, {"layer", f.Layer}} {
		if c.v != "" {
			where = append(where, c.col+" = ?")
			args = append(args, c.v)
		}
	}
	cond := ""
	if len(where) > 0 {
		cond = " WHERE " + strings.Join(where, " AND ")
	}
	// The constructions, roles and layers selected.
	rows, err := d.db.QueryContext(ctx, "SELECT DISTINCT construction, role, layer FROM lot_layer"+cond+" ORDER BY construction, role, layer", args...)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", d.path, err)
	}
	var out []Series
	for rows.Next() {
		var c, r, l string
		if err := rows.Scan(&c, &r, &l); err != nil {
			rows.Close()
			return nil, err
		}
		if n := len(out); n == 0 || out[n-1].Construction != c || out[n-1].Role != r {
			out = append(out, Series{Construction: c, Role: r, Layer: f.Layer})
		}
		out[len(out)-1].Layers = append(out[len(out)-1].Layers, l)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, err
	}
	head := "SELECT lot_id, panels"
	if names {
		head += ", lot, date"
	}
	q := head + cols.String() + " FROM lot_layer WHERE construction = ? AND role = ?"
	if f.Layer != "" {
		q += " AND layer = ?"
	}
	q += " ORDER BY date, lot_id, layer"
	stmt, err := d.db.PrepareContext(ctx, q)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", d.path, err)
	}
	defer stmt.Close()
	for i := range out {
		a := []any{out[i].Construction, out[i].Role}
		if f.Layer != "" {
			a = append(a, f.Layer)
		}
		if err := readSeries(ctx, stmt, a, names, terms, &out[i]); err != nil {
			return nil, fmt.Errorf("%s: %w", d.path, err)
		}
	}
	return out, nil
}

// readSeries reads one series' rows and pools the layers of each lot: the
// mean over all their fits, and the SD from the within-layer squares plus
// the spread of the layer means about the lot mean.
func readSeries(ctx context.Context, stmt *sql.Stmt, args []any, names bool, terms []registration.TermKind, s *Series) error {
	rows, err := stmt.QueryContext(ctx, args...)
	if err != nil {
		return err
	}
	defer rows.Close()
	type acc struct {
		n      int
		sum    [registration.NumTerms]float64
		within [registration.NumTerms]float64 // Σ (n−1)·sd²
		sumsq  [registration.NumTerms]float64 // Σ n·mean²
	}
	var a acc
	var pt Point
	flush := func() {
		if a.n == 0 {
			return
		}
		pt.N = a.n
		for _, k := range terms {
			mean := a.sum[k] / float64(a.n)
			pt.Mean[k] = mean
			if a.n > 1 {
				ss := a.within[k] + a.sumsq[k] - float64(a.n)*mean*mean
				pt.SD[k] = math.Sqrt(math.Max(ss, 0) / float64(a.n-1))
			}
		}
		s.Points = append(s.Points, pt)
		a = acc{}
	}
	var lotID int64
	var panels int
	var name, date string
	dest := []any{&lotID, &panels}
	if names {
		dest = append(dest, &name, &date)
	}
	vals := make([]float64, 2*len(terms))
	for i := range vals {
		dest = append(dest, &vals[i])
	}
	for rows.Next() {
		if err := rows.Scan(dest...); err != nil {
			return err
		}
		if lotID != pt.LotID {
			flush()
		}
		if a.n == 0 {
			pt = Point{LotID: lotID, Lot: name, Date: date}
		}
		for j, k := range terms {
			m, sd := vals[2*j], vals[2*j+1]
			a.sum[k] += float64(panels) * m
			a.sumsq[k] += float64(panels) * m * m
			a.within[k] += float64(panels-1) * sd * sd
		}
		a.n += panels
	}
	if err := rows.Err(); err != nil {
		return err
	}
	flush()
	return nil
}

// ScaleTable returns the scale table (Table) of the series the filter
// selects, reading only what the table needs.
func (d *DB) ScaleTable(ctx context.Context, f Filter) ([]TableRow, error) {
	ss, err := d.series(ctx, f, false, []registration.TermKind{registration.ScaleX, registration.ScaleY})
	if err != nil {
		return nil, err
	}
	// Name the lots the table shows: each series' last and the lots of
	// the signals.
	stmt, err := d.db.PrepareContext(ctx, "SELECT name, date FROM lot WHERE id = ?")
	if err != nil {
		return nil, err
	}
	defer stmt.Close()
	for i := range ss {
		pts := ss[i].Points
		for j := range pts {
			if j < len(pts)-ShiftWindow {
				continue
			}
			if err := stmt.QueryRowContext(ctx, pts[j].LotID).Scan(&pts[j].Lot, &pts[j].Date); err != nil {
				return nil, fmt.Errorf("%s: %w", d.path, err)
			}
		}
	}
	return Table(ss), nil
}

func contains(s []string, v string) bool {
	for _, x := range s {
		if x == v {
			return true
		}
	}
	return false
}

// LotCount returns the number of lots stored.
func (d *DB) LotCount(ctx context.Context) (int, error) {
	var n int
	err := d.db.QueryRowContext(ctx, "SELECT count(*) FROM lot").Scan(&n)
	return n, err
}

// FitCount returns the number of panel and layer fits stored.
func (d *DB) FitCount(ctx context.Context) (int, error) {
	var n int
	err := d.db.QueryRowContext(ctx, "SELECT count(*) FROM fit").Scan(&n)
	return n, err
}

// IntegrityCheck runs SQLite's integrity check and returns its report, "ok"
// for a sound file.
func (d *DB) IntegrityCheck(ctx context.Context) (string, error) {
	var s string
	err := d.db.QueryRowContext(ctx, "PRAGMA integrity_check").Scan(&s)
	return s, err
}
