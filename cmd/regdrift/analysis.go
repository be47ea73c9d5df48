package main

import (
	"context"
	"fmt"
	"math"
	"sort"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/render"
)

// lengthUnit is the output unit choice of --units (unit.Output), with its
// names and sizes at hand.
type lengthUnit struct {
	unit.Output
	name   string  // "mil" or "um"
	factor float64 // metres per unit
	panel  string  // unit of panel coordinates: "in" or "mm"
	pfac   float64
}

func parseUnits(s string) (lengthUnit, error) {
	o, err := unit.ParseOutput(s)
	if err != nil {
		return lengthUnit{}, usageErr("--units: %v", err)
	}
	return lengthUnit{o, o.Length(), o.LengthSI(), o.Panel(), o.PanelSI()}, nil
}

// siteResult is the drift analysis of one site.
type siteResult struct {
	Site    panel.Site
	Section int // index into Job.Sections
	Row     registration.Row
	Stats   registration.Stats
	// Offset is the mean across-line offset, design offset included; Along the
	// mean along-line offset.
	Offset, Along float64
	Coupling      float64 // dB at the mean offset
	Drift         float64 // dB, Coupling minus the coupling at the design offset
	Margin        float64 // dB to the nearer spec limit; negative outside the spec
	InSpec        bool
	CouplingLo    float64 // dB at mean − 3σ
	CouplingHi    float64 // dB at mean + 3σ
	// WorstDrift is the drift of the coupling farthest from the design value
	// over the offsets within mean ± 3σ.
	WorstDrift float64
}

// analysis is the drift map of a job: the solved curves and every site.
type analysis struct {
	job      *Job
	rel      []*registration.Relative // per section
	curves   []*section.Curve         // per section; nil for a section no site uses
	nominal  []float64                // coupling at the design offset, per section
	sites    []siteResult
	cacheHit []bool
	span     []float64 // per section: largest |mean| + 3σ of the across offset over its sites
	used     []bool    // per section: whether any site uses it
	// scale, when set, fixes the colour range of map.png, so that maps of
	// several jobs compare on one scale.
	scale *[2]float64
}

// newAnalysis evaluates the registration part of every site: sensitivity
// rows and closed-form offset statistics. No field solve happens here.
func newAnalysis(j *Job) *analysis {
	a := &analysis{job: j, rel: make([]*registration.Relative, len(j.Sections)),
		curves: make([]*section.Curve, len(j.Sections)), nominal: make([]float64, len(j.Sections)),
		cacheHit: make([]bool, len(j.Sections)), span: make([]float64, len(j.Sections)),
		used: make([]bool, len(j.Sections))}
	secIndex := map[string]int{}
	for i, s := range j.Sections {
		secIndex[s.Name] = i
		a.rel[i] = j.Model.Relative(s.Traces[0].Layer, s.Traces[1].Layer)
	}
	a.sites = make([]siteResult, len(j.Sites))
	for k, s := range j.Sites {
		si := secIndex[s.Section]
		r := &a.sites[k]
		r.Site, r.Section = s, si
		r.Row = a.rel[si].Row(s.Pos, s.U)
		r.Stats = a.rel[si].Stats(r.Row)
		r.Offset = j.Sections[si].NominalOffset() + r.Stats.MeanAcross
		r.Along = r.Stats.MeanAlong
		a.span[si] = math.Max(a.span[si], math.Abs(r.Stats.MeanAcross)+3*r.Stats.SDAcross)
		a.used[si] = true
	}
	return a
}

// offsets returns the sweep offsets of section i: covering ±3σ of its worst
// site with a tenth to spare, and at least ±5 mil about the design offset.
func (a *analysis) offsets(i int) []float64 {
	return section.DefaultOffsets(a.job.Sections[i], a.span[i]*1.1)
}

// analyse evaluates every site of the job; the curves are solved (or read from
// the cache) over the range the sites need.
func analyse(ctx context.Context, j *Job, sf *solverFlags) (*analysis, error) {
	set, err := sf.settings()
	if err != nil {
		return nil, err
	}
	a := newAnalysis(j)
	for i, s := range j.Sections {
		if !a.used[i] {
			continue
		}
		c, hit, err := section.CachedSweep(ctx, s, a.offsets(i), set, sf.cacheDir, sf.noCache)
		if err != nil {
			return nil, fmt.Errorf("section %q: %w", s.Name, err)
		}
		a.curves[i], a.cacheHit[i] = c, hit
		a.nominal[i] = c.Coupling(s.NominalOffset())
	}
	for k := range a.sites {
		r := &a.sites[k]
		s := j.Sections[r.Section]
		c := a.curves[r.Section]
		r.Coupling = c.Coupling(r.Offset)
		r.Drift = r.Coupling - a.nominal[r.Section]
		r.Margin = specMargin(s.Spec, r.Coupling)
		r.InSpec = r.Margin >= 0
		r.CouplingLo = c.Coupling(r.Offset - 3*r.Stats.SDAcross)
		r.CouplingHi = c.Coupling(r.Offset + 3*r.Stats.SDAcross)
		r.WorstDrift = worstDrift(c, a.nominal[r.Section], r.Offset, r.Stats.SDAcross)
	}
	return a, nil
}

// specMargin returns the distance in dB from coupling c to the nearer limit of
// the spec, positive inside it.
func specMargin(sp section.Spec, c float64) float64 {
	return sp.Tolerance - math.Abs(c-sp.Coupling)
}

// worst returns the indices of the n sites with the smallest margin (largest
// |drift| breaking ties), in order.
func (a *analysis) worst(n int) []int {
	idx := make([]int, len(a.sites))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(p, q int) bool {
		sp, sq := &a.sites[idx[p]], &a.sites[idx[q]]
		if sp.Margin != sq.Margin {
			return sp.Margin < sq.Margin
		}
		return math.Abs(sp.Drift) > math.Abs(sq.Drift)
	})
	if n < len(idx) {
		idx = idx[:n]
	}
	return idx
}

// inSpec counts the sites inside their coupling spec.
func (a *analysis) inSpec() int {
	n := 0
	for i := range a.sites {
		if a.sites[i].InSpec {
			n++
		}
	}
	return n
}

// worstDrift returns the largest drift from the design coupling nom over the
// offsets within mean ± 3σ, keeping its sign. The curve is sampled at 17
// points across the interval; its ends are the extremes for a monotone curve,
// and a centred pair's single peak is the design value itself, so this finds
// the worst case to well within a colour step.
func worstDrift(c *section.Curve, nom, mean, sd float64) float64 {
	lo, hi := mean-3*sd, mean+3*sd
	worst := 0.0
	for k := 0; k <= 16; k++ {
		d := c.Coupling(lo+(hi-lo)*float64(k)/16) - nom
		if math.Abs(d) > math.Abs(worst) {
			worst = d
		}
	}
	return worst
}

// toRect converts a panel rectangle for drawing.
func toRect(r panel.Rect) render.Rect {
	return render.Rect{Min: render.Point{X: r.Min.X, Y: r.Min.Y}, Max: render.Point{X: r.Max.X, Y: r.Max.Y}}
}

// zone is a region of a panel map drawn for its own couplers.
type zone interface{ bounds() panel.Rect }

// zoneAt returns the first zone that contains p; the last zone is the
// default for points in none of them.
func zoneAt[Z zone](zones []Z, p panel.Vec) *Z {
	for k := range zones {
		if zones[k].bounds().Contains(p) {
			return &zones[k]
		}
	}
	return &zones[len(zones)-1]
}
