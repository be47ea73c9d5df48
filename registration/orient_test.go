package registration

import (
	"math"
	"testing"

	"github.com/regdrift/regdrift/panel"
)

// TestOrient uses an analytic job: the upper layer's only error is a normal
// scale, 200 ppm sigma in x and 20 ppm in y, about the panel centre. Lines
// along y at (x0, y0) are offset across by −sx·x0 (σ = 200 ppm·|x0|), lines
// along x by sy·y0 (σ = 20 ppm·|y0|), so each site's yield for ±a is
// 2Φ(a/σ) − 1 and lines along x — along the axis with the larger error —
// must win.
func TestOrient(t *testing.T) {
	m := &Model{Contributors: []Contributor{{Name: "core", Layers: []string{"A"}, Terms: [NumTerms]Term{
		ScaleX: {Spread: 200 * ppm, Dist: Normal},
		ScaleY: {Spread: 20 * ppm, Dist: Normal},
	}}}}
	a := 1.5 * mil
	pos := []panel.Vec{{X: 6 * inch, Y: 9 * inch}, {X: -7 * inch, Y: 4 * inch}, {X: 2 * inch, Y: -10 * inch}}
	build := func(u panel.Vec) *Yield {
		var sites []YieldSite
		for _, p := range pos {
			sites = append(sites, YieldSite{Pos: p, U: u, Upper: "A", Lower: "B", Allowed: Interval{-a, a}, Part: -1})
		}
		return NewYield(m, sites, 0)
	}
	want := func(u panel.Vec) (mean, worst float64) {
		worst = 1
		for _, p := range pos {
			sd := 20 * ppm * math.Abs(p.Y) // lines along x: across is y
			if u.Y != 0 {
				sd = 200 * ppm * math.Abs(p.X)
			}
			y := 2*NormalCDF(a/sd) - 1
			mean += y / float64(len(pos))
			worst = math.Min(worst, y)
		}
		return mean, worst
	}
	all := []int{0, 1, 2}
	// A group whose yield is 100 % either way is not worth turning.
	if o := build(panel.Vec{Y: 1}).Orient(nil); o.Better() {
		t.Error("an empty group should not call for a turn")
	}
	for _, tt := range []struct {
		name       string
		u          panel.Vec
		wantBetter bool
	}{
		{"lines-along-y", panel.Vec{Y: 1}, true},
		{"lines-along-x", panel.Vec{X: 1}, false},
	} {
		t.Run(tt.name, func(t *testing.T) {
			o := build(tt.u).Orient(all)
			if o.Better() != tt.wantBetter {
				t.Errorf("Better() = %v (as placed %.4f, turned %.4f), want %v", o.Better(), o.AsPlaced.Mean, o.Turned.Mean, tt.wantBetter)
			}
			pm, pw := want(tt.u)
			tm, tw := want(tt.u.Perp())
			for _, c := range []struct {
				name      string
				got, want float64
			}{{"as placed mean", o.AsPlaced.Mean, pm}, {"as placed worst", o.AsPlaced.Worst, pw},
				{"turned mean", o.Turned.Mean, tm}, {"turned worst", o.Turned.Worst, tw}} {
				if math.Abs(c.got-c.want) > 1e-12 {
					t.Errorf("%s = %.15g, analytic %.15g", c.name, c.got, c.want)
				}
			}
		})
	}
}

// TestTurnThreshold: a turn is recommended only for a gain above both the
// stated minimum and the Monte Carlo resolution; the gains are exact in
// binary so that the comparisons sit exactly where the table says.
func TestTurnThreshold(t *testing.T) {
	for _, tt := range []struct {
		name                      string
		gain, minGain, resolution float64
		want                      bool
	}{
		{"0.07 % gain, default threshold", 0.0007, 0, 0, false},
		{"gain just over the default", OrientMinGain * 1.01, 0, 0, true},
		{"gain under the resolution", 0.01, 0.005, 0.02, false},
		{"gain over both", 0.03, 0.005, 0.02, true},
		{"gain at the threshold", 0.25, 0.25, 0, false},
		{"a loss", -0.1, 0, 0, false},
	} {
		t.Run(tt.name, func(t *testing.T) {
			o := Orientation{AsPlaced: OrientYield{Mean: 0.5}, Turned: OrientYield{Mean: 0.5 + tt.gain}}
			if got := o.Recommend(tt.minGain, tt.resolution); got != tt.want {
				t.Errorf("gain %g, min %g, resolution %g: turn = %v, want %v", o.Gain(), tt.minGain, tt.resolution, got, tt.want)
			}
		})
	}
	if th := TurnThreshold(0, 0); th != OrientMinGain {
		t.Errorf("default threshold %g, want OrientMinGain %g", th, OrientMinGain)
	}
}

// TestGroupResolution: twice the mean binomial standard error
// √(p(1−p)/N) of the group's sites (Feller, An Introduction to Probability
// Theory and Its Applications, vol. 1, 3rd ed., ch. IX.2: the variance of a
// binomial count is Npq). For 100 panels and yields 0.9 and 0.5 the errors
// are 0.03 and 0.05, so the resolution is 2·0.04 = 0.08.
func TestGroupResolution(t *testing.T) {
	r := &MCResult{Trials: 100, SiteGood: []int64{90, 50, 100}}
	if got := r.GroupResolution([]int{0, 1}); math.Abs(got-0.08) > 1e-15 {
		t.Errorf("resolution %.17g, want 0.08", got)
	}
	// A site always good has no error; an empty group no resolution.
	if got := r.GroupResolution([]int{2}); got != 0 {
		t.Errorf("resolution of a certain site %g", got)
	}
	if got := r.GroupResolution(nil); got != 0 {
		t.Errorf("resolution of no sites %g", got)
	}
}
