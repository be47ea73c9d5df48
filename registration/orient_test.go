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
