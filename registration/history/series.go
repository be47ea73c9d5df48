package history

import (
	"context"
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
		fmt.Fprintf(&cols, ", s.mean_%s, s.sd_%s", k, k)
	}
	var where []string
	var args []any
	for _, c := range []struct{ col, v string }{{"s.construction", f.Construction}, {"s.role", f.Role}, {"s.layer", f.Layer}} {
		if c.v != "" {
			where = append(where, c.col+" = ?")
			args = append(args, c.v)
		}
	}
	q := "SELECT s.construction, s.role, s.layer, s.lot_id, s.lot, s.date, s.panels" + cols.String() +
		" FROM lot_layer s"
	if len(where) > 0 {
		q += " WHERE " + strings.Join(where, " AND ")
	}
	q += " ORDER BY s.construction, s.role, s.date, s.lot_id, s.layer"
	rows, err := d.db.QueryContext(ctx, q, args...)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", d.path, err)
	}
	defer rows.Close()
	var out []Series
	var cur *Series
	// acc pools the layers of one lot: Σn, Σn·mean and the sums of squares.
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
				// Pooled: within-layer squares plus the spread of the
				// layer means about the lot mean.
				ss := a.within[k] + a.sumsq[k] - float64(a.n)*mean*mean
				pt.SD[k] = math.Sqrt(math.Max(ss, 0) / float64(a.n-1))
			}
		}
		cur.Points = append(cur.Points, pt)
		a = acc{}
	}
	vals := make([]float64, 2*len(terms))
	dest := make([]any, 7+len(vals))
	var cons, role, layer, name, date string
	var lotID int64
	var panels int
	dest[0], dest[1], dest[2], dest[3], dest[4], dest[5], dest[6] = &cons, &role, &layer, &lotID, &name, &date, &panels
	for i := range vals {
		dest[7+i] = &vals[i]
	}
	for rows.Next() {
		if err := rows.Scan(dest...); err != nil {
			return nil, err
		}
		if cur == nil || cur.Construction != cons || cur.Role != role {
			if cur != nil {
				flush()
			}
			out = append(out, Series{Construction: cons, Role: role, Layer: f.Layer})
			cur = &out[len(out)-1]
		} else if lotID != pt.LotID {
			flush()
		}
		if a.n == 0 {
			pt = Point{LotID: lotID, Lot: name, Date: date}
		}
		if len(cur.Layers) == 0 || !contains(cur.Layers, layer) {
			cur.Layers = append(cur.Layers, layer)
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
		return nil, err
	}
	if cur != nil {
		flush()
	}
	return out, nil
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
