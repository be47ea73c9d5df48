package fitreport

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"runtime"
	"strconv"
	"strings"
	"sync"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// Report is a finished fit of one measurement file: every panel-and-layer
// fit, the lot statistics per layer and each layer's pooled residual grid.
type Report struct {
	File     string // the measurement file, as messages name it
	Settings registration.FitSettings
	Fits     []registration.Fit
	Lots     []registration.Lot
	Grids    map[string]*registration.Grid // by layer; nil for a layer without one
	// Joint is the lots as contributors (registration.LotContributors):
	// the layers measured together on the same panels and the notes.
	Joint *registration.LotModel
	// Differences holds, per pair of layers measured together, the lot
	// statistics of the per-panel differences ("L3-L4").
	Differences []registration.Lot
	// Applied is the artwork each layer was built with (SetApplied); nil
	// means CAD size and no artwork table in the summary.
	Applied registration.AppliedSet
	// Set is the targets fitted, whose groups the fits refer to.
	Set *registration.TargetSet
}

// Close closes the report's target set (registration.TargetSet.Close):
// the per-target outputs can no longer be written.
func (r *Report) Close() error { return r.Set.Close() }

// New fits the targets ts (read from file) with set: every panel and layer
// (registration.FitSet), the lot statistics, and per layer the pooled
// residuals on grid × grid nodes. The report keeps ts: the fits refer to
// its groups for their per-target results.
func New(file string, ts *registration.TargetSet, set registration.FitSettings, grid int) (*Report, error) {
	fits, err := registration.FitSet(ts, &set)
	if err != nil {
		return nil, err
	}
	r := &Report{File: file, Settings: set, Fits: fits, Lots: registration.LotStats(fits), Grids: map[string]*registration.Grid{}, Set: ts}
	// The layers' grids are independent: one goroutine each, at most
	// GOMAXPROCS at once.
	grids := make([]*registration.Grid, len(r.Lots))
	errs := make([]error, len(r.Lots))
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	var wg sync.WaitGroup
	for i, l := range r.Lots {
		wg.Go(func() {
			sem <- struct{}{}
			defer func() { <-sem }()
			grids[i], errs[i] = registration.PooledResiduals(fits, l.Layer, grid, grid)
		})
	}
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	for i, l := range r.Lots {
		r.Grids[l.Layer] = grids[i]
	}
	r.Joint = registration.LotContributors(fits, r.Lots, func(l *registration.Lot) string { return "measured " + l.Layer })
	r.Differences = r.Joint.Differences(fits)
	return r, nil
}

// Terms holds the terms, keyed in JSON by the term table with their SI unit
// ("offset_x_m", "rotation_rad", "scale_x"), in term order; nil is a term
// that was not estimated (or a standard error without redundancy).
type Terms [registration.NumTerms]*float64

// MarshalJSON writes the terms in term order.
func (t Terms) MarshalJSON() ([]byte, error) {
	b := []byte{'{'}
	for k, v := range t {
		if k > 0 {
			b = append(b, ',')
		}
		key, _ := json.Marshal(registration.TermKind(k).JSONKey())
		val, err := json.Marshal(v)
		if err != nil {
			return nil, err
		}
		b = append(append(append(b, key...), ':'), val...)
	}
	return append(b, '}'), nil
}

// UnmarshalJSON reads terms by their keys; a key not present is nil.
func (t *Terms) UnmarshalJSON(data []byte) error {
	var m map[string]*float64
	if err := json.Unmarshal(data, &m); err != nil {
		return err
	}
	for k := range t {
		t[k] = m[registration.TermKind(k).JSONKey()]
	}
	return nil
}

// newTerms keeps the terms model m estimates (the others 0 with
// zeroUnfitted, else nil) and drops non-finite ones.
func newTerms(v [registration.NumTerms]float64, m registration.FitModel, zeroUnfitted bool) Terms {
	var p Terms
	for k := range v {
		x := v[k]
		if !m.Estimates(registration.TermKind(k)) {
			if !zeroUnfitted {
				continue
			}
			x = 0
		}
		if math.IsNaN(x) || math.IsInf(x, 0) {
			continue
		}
		p[k] = &x
	}
	return p
}

// FitJSON is one panel-and-layer fit of the summary.
type FitJSON struct {
	Panel    string   `json:"panel"`
	Layer    string   `json:"layer"`
	Targets  int      `json:"targets"`
	DOF      int      `json:"dof"`
	Terms    Terms    `json:"terms"`
	StdErr   Terms    `json:"stderr"`
	Sigma0M  *float64 `json:"sigma0_m"`
	RMSM     float64  `json:"rms_m"`
	MaxM     float64  `json:"max_m"`
	Outliers []string `json:"outliers"`
}

// LotJSON is one layer's lot statistics of the summary.
type LotJSON struct {
	Layer  string `json:"layer"`
	Panels int    `json:"panels"`
	Mean   Terms  `json:"mean"`
	Sigma  Terms  `json:"sigma"`
}

// Summary is the JSON summary of a report.
type Summary struct {
	File   string     `json:"file"`
	Model  string     `json:"model"`
	Robust string     `json:"robust"`
	DatumM [2]float64 `json:"datum_m"`
	Fits   []FitJSON  `json:"fits"`
	Lot    []LotJSON  `json:"lot"`
	// Differences are the per-panel differences of layers measured on the
	// same panels, "L3-L4", as lot statistics.
	Differences []LotJSON `json:"differences"`
	Notes       []string  `json:"notes"`
	// Artwork is, with an applied artwork, each layer's material movement
	// and the setting that cancels it (Artwork).
	Artwork []ArtworkJSON `json:"artwork,omitempty"`
}

// Summary returns the JSON summary of r.
func (r *Report) Summary() *Summary {
	set := r.Settings
	s := &Summary{File: r.File, Model: set.Model.String(), Robust: set.Robust.String(),
		DatumM: [2]float64{set.Datum.X, set.Datum.Y}}
	for _, f := range r.Fits {
		fj := FitJSON{Panel: f.Panel, Layer: f.Layer, Targets: f.N, DOF: f.DOF,
			Terms: newTerms(f.Terms, f.Model, true), StdErr: newTerms(f.StdErr, f.Model, false),
			RMSM: f.RMS, MaxM: f.Max, Outliers: f.Outliers}
		if f.Outliers == nil {
			fj.Outliers = []string{}
		}
		if f.DOF > 0 {
			s0 := f.Sigma0
			fj.Sigma0M = &s0
		}
		s.Fits = append(s.Fits, fj)
	}
	for _, l := range r.Lots {
		s.Lot = append(s.Lot, LotJSON{Layer: l.Layer, Panels: l.Panels,
			Mean: newTerms(l.Mean, l.Model, true), Sigma: newTerms(l.SD, l.Model, false)})
	}
	s.Differences = []LotJSON{}
	for _, l := range r.Differences {
		s.Differences = append(s.Differences, LotJSON{Layer: l.Layer, Panels: l.Panels,
			Mean: newTerms(l.Mean, l.Model, true), Sigma: newTerms(l.SD, l.Model, false)})
	}
	s.Notes = []string{}
	if r.Joint != nil {
		s.Notes = append(s.Notes, r.Joint.Notes...)
	}
	if r.Applied != nil {
		for _, a := range r.Artworks() {
			s.Artwork = append(s.Artwork, a.JSON())
		}
	}
	return s
}

// cell formats v with d decimals, "" for NaN.
func cell(v float64, d int) string { return string(appendCell(nil, v, d)) }

// appendCell appends cell(v, d) to b.
func appendCell(b []byte, v float64, d int) []byte {
	if math.IsNaN(v) {
		return b
	}
	return strconv.AppendFloat(b, v, 'f', d, 64)
}

// WriteFitCSV writes one row per fit (fit.csv): terms and their standard
// errors in the output units of the term table, sigma0, rms, max and the
// outliers.
func (r *Report) WriteFitCSV(w io.Writer, u unit.Output) error {
	cw := csv.NewWriter(w)
	header := []string{"panel", "layer", "model", "targets", "dof"}
	for k := registration.TermKind(0); k < registration.NumTerms; k++ {
		header = append(header, fmt.Sprintf("%s [%s]", k, k.Unit(u)))
	}
	for k := registration.TermKind(0); k < registration.NumTerms; k++ {
		header = append(header, fmt.Sprintf("%s_se [%s]", k, k.Unit(u)))
	}
	L := " [" + u.Length() + "]"
	header = append(header, "sigma0"+L, "rms"+L, "max"+L, "outliers")
	if err := cw.Write(header); err != nil {
		return err
	}
	lf := u.LengthSI()
	for _, f := range r.Fits {
		rec := []string{f.Panel, f.Layer, f.Model.String(), strconv.Itoa(f.N), strconv.Itoa(f.DOF)}
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			rec = append(rec, cell(unit.In(f.Terms[k], k.Info().Kind, k.Unit(u)), 4))
		}
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			v := unit.In(f.StdErr[k], k.Info().Kind, k.Unit(u))
			if !f.Model.Estimates(k) {
				v = math.NaN()
			}
			rec = append(rec, cell(v, 4))
		}
		s0 := f.Sigma0
		if f.DOF <= 0 {
			s0 = math.NaN()
		}
		rec = append(rec, cell(s0/lf, 4), cell(f.RMS/lf, 4), cell(f.Max/lf, 4), strings.Join(f.Outliers, ";"))
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteResidualsCSV writes one row per target (residuals.csv): position,
// measured, fitted and residual displacement, and whether it was rejected.
//
// The rows are made from the fits' groups, never held for the whole file:
// runs of residualChunk rows are formatted into buffers by GOMAXPROCS
// goroutines and written in order, a few runs per worker at a time, so the
// memory is that of those buffers and of the groups of those runs, loaded
// for them and released after, and the bytes are those of one writer.
func (r *Report) WriteResidualsCSV(w io.Writer, u unit.Output) error {
	cw := csv.NewWriter(w)
	L, P := "["+u.Length()+"]", "["+u.Panel()+"]"
	header := []string{"panel", "layer", "target", "x " + P, "y " + P, "dx " + L, "dy " + L,
		"fit_dx " + L, "fit_dy " + L, "res_dx " + L, "res_dy " + L, "outlier"}
	if err := cw.Write(header); err != nil {
		return err
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return err
	}
	type chunk struct {
		f      *registration.Fit
		lo, hi int
		buf    *bytes.Buffer
	}
	var chunks []*chunk
	for k := range r.Fits {
		f := &r.Fits[k]
		for lo := 0; lo < f.Len(); lo += residualChunk {
			chunks = append(chunks, &chunk{f: f, lo: lo, hi: min(lo+residualChunk, f.Len())})
		}
	}
	lf, pf := u.LengthSI(), u.PanelSI()
	format := func(c *chunk) {
		cw := csv.NewWriter(c.buf)
		f, g := c.f, c.f.Group
		rec := make([]string, 0, len(header))
		var num []byte
		for i := c.lo; i < c.hi; i++ {
			p, d, m := g.Pos(i), g.D(i), f.Fitted(i)
			res := panel.Vec{X: d.X - m.X, Y: d.Y - m.Y} // Fit.Residual, without fitting twice
			// The eight numbers are formatted into one string and cut
			// into cells: one allocation a row, not eight.
			var ends [8]int
			num = num[:0]
			for k, v := range [8]float64{p.X / pf, p.Y / pf, d.X / lf, d.Y / lf, m.X / lf, m.Y / lf, res.X / lf, res.Y / lf} {
				num = appendCell(num, v, 4)
				ends[k] = len(num)
			}
			str := string(num)
			rec = append(rec[:0], f.Panel, f.Layer, g.Name(i))
			for k, e := range ends {
				a := 0
				if k > 0 {
					a = ends[k-1]
				}
				rec = append(rec, str[a:e])
			}
			rec = append(rec, strconv.FormatBool(f.Outlier(i)))
			cw.Write(rec) // a bytes.Buffer does not fail
		}
		cw.Flush()
	}
	workers := runtime.GOMAXPROCS(0)
	batch := 2 * workers
	bufs := make([]bytes.Buffer, batch) // reused from batch to batch
	// The groups of the batch's chunks are loaded here, in order, and each
	// is released after the batch that holds its last chunk.
	var held []*registration.TargetGroup
	defer func() {
		for _, g := range held {
			g.Release()
		}
	}()
	for b := 0; b < len(chunks); b += batch {
		part := chunks[b:min(b+batch, len(chunks))]
		for j, c := range part {
			bufs[j].Reset()
			c.buf = &bufs[j]
			if g := c.f.Group; len(held) == 0 || held[len(held)-1] != g {
				if err := g.Load(); err != nil {
					return err
				}
				held = append(held, g)
			}
		}
		var wg sync.WaitGroup
		next := make(chan *chunk)
		for range min(workers, len(part)) {
			wg.Go(func() {
				for c := range next {
					format(c)
				}
			})
		}
		for _, c := range part {
			next <- c
		}
		close(next)
		wg.Wait()
		for _, c := range part {
			if _, err := w.Write(c.buf.Bytes()); err != nil {
				return err
			}
			c.buf = nil
		}
		// Only the group of the batch's last chunk can have chunks left.
		for _, g := range held[:len(held)-1] {
			g.Release()
		}
		held = append(held[:0], held[len(held)-1])
	}
	return nil
}

// residualChunk is the number of residuals.csv rows one goroutine formats
// at a time: about 0.5 MB of text.
const residualChunk = 4096

// WriteGridCSV writes a residual grid in the format registration.ReadGrid
// reads.
func WriteGridCSV(w io.Writer, g *registration.Grid, u unit.Output) error {
	cw := csv.NewWriter(w)
	L, P := "["+u.Length()+"]", "["+u.Panel()+"]"
	if err := cw.Write([]string{"x " + P, "y " + P, "dx " + L, "dy " + L}); err != nil {
		return err
	}
	lf, pf := u.LengthSI(), u.PanelSI()
	for j, y := range g.Y {
		for i, x := range g.X {
			if err := cw.Write([]string{cell(x/pf, 6), cell(y/pf, 6), cell(g.DX[j][i]/lf, 5), cell(g.DY[j][i]/lf, 5)}); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}
