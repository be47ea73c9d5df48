package history

import (
	"bufio"
	"context"
	"database/sql"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// The export format: one row per panel and layer fit, units in the header.
// Terms are as measured against CAD; the applied artwork scale is given
// beside them, so the material movement can be recomputed anywhere.
var exportColumns = []struct {
	name string
	kind unit.Kind
	unit string // "" for a column without a unit
}{
	{"lot", 0, ""}, {"date", 0, ""}, {"panel", 0, ""}, {"layer", 0, ""},
	{"construction", 0, ""}, {"role", 0, ""}, {"model", 0, ""}, {"targets", 0, ""}, {"dof", 0, ""},
	{"offset_x", unit.Length, "mil"}, {"offset_y", unit.Length, "mil"}, {"rotation", unit.Angle, "urad"},
	{"scale_x", unit.Strain, "ppm"}, {"scale_y", unit.Strain, "ppm"}, {"skew", unit.Strain, "ppm"},
	{"se_offset_x", unit.Length, "mil"}, {"se_offset_y", unit.Length, "mil"}, {"se_rotation", unit.Angle, "urad"},
	{"se_scale_x", unit.Strain, "ppm"}, {"se_scale_y", unit.Strain, "ppm"}, {"se_skew", unit.Strain, "ppm"},
	{"sigma0", unit.Length, "mil"}, {"rms", unit.Length, "mil"}, {"max", unit.Length, "mil"},
	{"applied_scale_x", unit.Strain, "ppm"}, {"applied_scale_y", unit.Strain, "ppm"},
	{"outliers", 0, ""},
}

// exportComment heads every export; Import skips it like any comment.
const exportComment = "# regdrift history: one row per panel and layer fit; terms as measured against CAD, " +
	"the artwork scale each layer was built with in applied_scale_x/y; outliers separated by ';'"

// exportDigits is the number of significant digits of every value. Twelve
// digits keep far more than any measurement resolves, and make an export of
// an import of an export byte-identical: a value read back and converted to
// SI and back differs from the 12-digit decimal by a few units in the 16th
// digit, which rounds to the same 12 digits.
const exportDigits = 12

func formatValue(v float64, kind unit.Kind, u string) string {
	if math.IsNaN(v) {
		return ""
	}
	return strconv.FormatFloat(unit.In(v, kind, u), 'g', exportDigits, 64)
}

// Export writes every fit as CSV, lots in order of date and of storing,
// fits in the order they were added.
func (d *DB) Export(ctx context.Context, w io.Writer) error {
	bw := bufio.NewWriter(w)
	cw := csv.NewWriter(bw)
	fmt.Fprintln(bw, exportComment)
	header := make([]string, len(exportColumns))
	for i, c := range exportColumns {
		header[i] = c.name
		if c.unit != "" {
			header[i] += " [" + c.unit + "]"
		}
	}
	if err := cw.Write(header); err != nil {
		return err
	}
	rows, err := d.db.QueryContext(ctx, `SELECT l.name, l.date, f.panel, f.layer, f.construction, f.role, f.model, f.targets, f.dof,
		f.offset_x, f.offset_y, f.rotation, f.scale_x, f.scale_y, f.skew,
		f.se_offset_x, f.se_offset_y, f.se_rotation, f.se_scale_x, f.se_scale_y, f.se_skew,
		f.sigma0, f.rms_residual, f.max_residual, f.applied_scale_x, f.applied_scale_y, f.outliers
		FROM fit f JOIN lot l ON l.id = f.lot_id ORDER BY l.date, l.id, f.seq`)
	if err != nil {
		return fmt.Errorf("%s: %w", d.path, err)
	}
	defer rows.Close()
	var s [7]string
	var targets, dof int
	var v [17]sql.NullFloat64
	var outliers string
	dest := []any{&s[0], &s[1], &s[2], &s[3], &s[4], &s[5], &s[6], &targets, &dof}
	for i := range v {
		dest = append(dest, &v[i])
	}
	dest = append(dest, &outliers)
	rec := make([]string, len(exportColumns))
	for rows.Next() {
		if err := rows.Scan(dest...); err != nil {
			return err
		}
		copy(rec, s[:])
		rec[7], rec[8] = strconv.Itoa(targets), strconv.Itoa(dof)
		for i := range v {
			c := exportColumns[9+i]
			x := math.NaN()
			if v[i].Valid {
				x = v[i].Float64
			}
			rec[9+i] = formatValue(x, c.kind, c.unit)
		}
		rec[len(rec)-1] = outliers
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	if err := rows.Err(); err != nil {
		return err
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return err
	}
	return bw.Flush()
}

// ReadExport reads an export (any units of the right kind in the header) and
// returns its lots in order of first appearance, each lot's fits in file
// order. Errors are *registration.CSVError values naming the row and column.
func ReadExport(r io.Reader, file string) ([]*Lot, error) {
	rows, err := registration.NewCSVRows(r, file, "of a regdrift history export")
	if err != nil {
		return nil, err
	}
	header := rows.Header
	kinds := map[string]unit.Kind{}
	for _, c := range exportColumns {
		if c.unit != "" {
			kinds[c.name] = c.kind
		}
	}
	idx, cols, err := unit.ParseHeader(header, kinds)
	if err != nil {
		return nil, &registration.CSVError{File: file, Row: 1, Err: err}
	}
	for _, c := range exportColumns {
		if _, ok := idx[c.name]; !ok {
			return nil, &registration.CSVError{File: file, Row: 1, Column: c.name, Err: fmt.Errorf("%w (want the columns of a regdrift history export)", registration.ErrMissingColumn)}
		}
	}
	var lots []*Lot
	byName := map[string]*Lot{}
	type key struct{ lot, panel, layer string }
	seen := map[key]int{}
	cons := map[[2]string][2]string{}
	for {
		rec, line, err := rows.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		cell := func(name string) string { return rec[idx[name]] }
		cerr := func(col string, format string, args ...any) error {
			return &registration.CSVError{File: file, Row: line, Column: col, Err: fmt.Errorf(format, args...)}
		}
		var f FitRecord
		for _, c := range []struct {
			name string
			p    *string
		}{{"lot", nil}, {"date", nil}, {"panel", &f.Panel}, {"layer", &f.Layer}, {"construction", &f.Construction}, {"role", &f.Role}} {
			v := cell(c.name)
			if strings.TrimSpace(v) == "" || v != strings.TrimSpace(v) {
				return nil, cerr(c.name, "%q: want a value without leading or trailing spaces", v)
			}
			if c.p != nil {
				*c.p = v
			}
		}
		name, date := cell("lot"), cell("date")
		if f.Model, err = registration.ParseFitModel(cell("model")); err != nil {
			return nil, cerr("model", "%v", err)
		}
		for _, c := range []struct {
			name string
			p    *int
		}{{"targets", &f.Targets}, {"dof", &f.DOF}} {
			n, err := strconv.Atoi(cell(c.name))
			if err != nil || n < 0 && c.name == "targets" {
				return nil, cerr(c.name, "%q: want a whole number", cell(c.name))
			}
			*c.p = n
		}
		num := func(name string, optional bool) (float64, error) {
			i := idx[name]
			if optional && strings.TrimSpace(rec[i]) == "" {
				return math.NaN(), nil
			}
			return registration.Cell(file, line, cols[i], rec[i])
		}
		for k := range registration.NumTerms {
			t := registration.TermKind(k).String()
			if f.Terms[k], err = num(t, false); err != nil {
				return nil, err
			}
			if f.StdErr[k], err = num("se_"+t, true); err != nil {
				return nil, err
			}
		}
		for _, c := range []struct {
			name string
			p    *float64
		}{{"sigma0", &f.Sigma0}, {"rms", &f.RMS}, {"max", &f.Max}, {"applied_scale_x", &f.AppliedX}, {"applied_scale_y", &f.AppliedY}} {
			if *c.p, err = num(c.name, false); err != nil {
				return nil, err
			}
		}
		if o := cell("outliers"); o != "" {
			f.Outliers = strings.Split(o, outlierSep)
		}
		l := byName[name]
		if l == nil {
			l = &Lot{Name: name, Date: date}
			byName[name] = l
			lots = append(lots, l)
		} else if l.Date != date {
			return nil, cerr("date", "lot %q is dated %s on an earlier row", name, l.Date)
		}
		k := key{name, f.Panel, f.Layer}
		if first, dup := seen[k]; dup {
			return nil, cerr("layer", "%v: lot %q, panel %q, layer %q is also on row %d", registration.ErrDuplicate, name, f.Panel, f.Layer, first)
		}
		seen[k] = line
		ck := [2]string{name, f.Layer}
		if c, ok := cons[ck]; ok && c != [2]string{f.Construction, f.Role} {
			return nil, cerr("construction", "lot %q, layer %q is %q (%s) on an earlier row", name, f.Layer, c[0], c[1])
		}
		cons[ck] = [2]string{f.Construction, f.Role}
		one := Lot{Name: name, Date: date, Fits: []FitRecord{f}}
		if err := one.Validate(); err != nil {
			return nil, cerr("", "%v", err)
		}
		l.Fits = append(l.Fits, f)
	}
	if len(lots) == 0 {
		return nil, &registration.CSVError{File: file, Err: errors.New("no fits after the header")}
	}
	return lots, nil
}

// Import stores the lots of an export in one transaction: all of them or,
// on any error, none. A lot already stored is refused unless replace.
func (d *DB) Import(ctx context.Context, r io.Reader, file string, replace bool) (int, error) {
	lots, err := ReadExport(r, file)
	if err != nil {
		return 0, err
	}
	if err := d.addLots(ctx, lots, replace); err != nil {
		return 0, err
	}
	return len(lots), nil
}
