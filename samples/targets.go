package samples

import (
	"fmt"
	"io"
	"math/rand/v2"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration"
)

// TargetLayer is the invented movement of one layer across a lot: each panel
// draws every term from a normal distribution with the given mean and
// standard deviation (SI: m, rad, strain).
type TargetLayer struct {
	Layer    string
	Mean, SD [registration.NumTerms]float64
}

// Misread is a target whose measurement is planted wrong, as if the
// inspection machine had locked onto a burr or a scratch.
type Misread struct {
	Panel, Layer, Target string
	Error                panel.Vec // added to the true displacement, m
}

// TargetLot describes an invented measurement set.
type TargetLot struct {
	Panels int
	// Grid positions of the targets along x and y, panel frame, m.
	X, Y   []float64
	Layers []TargetLayer
	Noise  float64 // measurement noise per axis, one sigma, m
	Misses []Misread
	Seed   uint64
}

const (
	mil = 25.4e-6
	in  = 25.4e-3
	ppm = 1e-6
	// urad is a microradian.
	urad = 1e-6
)

// TwoCoreLot is the invented lot behind twocore-targets.csv, for the demo job
// two-core.toml (18 x 24 in panel, datum at the centre): five panels, a 4 x 4
// grid of targets per layer inside the 0.8 in border, layers L3 (face of core
// CA) and L4 (face of core CB) measured against the drilled tooling. The
// means differ a little from the job's assumed movement, as a measured lot
// would; L4 also carries the lamination shift and turn of CB against CA.
// Two targets are misread.
func TwoCoreLot() TargetLot {
	return TargetLot{
		Panels: 5,
		X:      []float64{-7.5 * in, -2.5 * in, 2.5 * in, 7.5 * in},
		Y:      []float64{-10.5 * in, -3.5 * in, 3.5 * in, 10.5 * in},
		Layers: []TargetLayer{
			{Layer: "L3",
				Mean: [registration.NumTerms]float64{0.1 * mil, -0.2 * mil, 4 * urad, -272 * ppm, -184 * ppm, 3 * urad},
				SD:   [registration.NumTerms]float64{0.35 * mil, 0.35 * mil, 8 * urad, 30 * ppm, 25 * ppm, 6 * urad}},
			{Layer: "L4",
				Mean: [registration.NumTerms]float64{0.6 * mil, -0.4 * mil, 18 * urad, -141 * ppm, -238 * ppm, -5 * urad},
				SD:   [registration.NumTerms]float64{0.8 * mil, 0.8 * mil, 25 * urad, 30 * ppm, 25 * ppm, 6 * urad}},
		},
		Noise: 0.08 * mil,
		Misses: []Misread{
			{Panel: "P3", Layer: "L4", Target: "T07", Error: panel.Vec{X: 2.5 * mil}},
			{Panel: "P5", Layer: "L3", Target: "T14", Error: panel.Vec{Y: -3.0 * mil}},
		},
		Seed: 2026,
	}
}

// Write writes the lot as a measurement file (CSV with units in the header:
// positions in inches, displacements in mils to 0.1 µin) from a
// math/rand/v2 PCG source seeded with lot.Seed, so the output is the same on
// every machine. For each panel and layer it draws the terms, then each
// target's displacement is the affine field at its position plus noise.
func (lot TargetLot) Write(w io.Writer) error {
	rng := rand.New(rand.NewPCG(lot.Seed, 1))
	if _, err := fmt.Fprintf(w, "# Invented demo measurement set (not reference data), written by\n"+
		"# samples.TwoCoreLot().Write: %d panels, %d targets per layer, noise %.2f mil.\n"+
		"panel,layer,target,x [in],y [in],dx [mil],dy [mil]\n",
		lot.Panels, len(lot.X)*len(lot.Y), lot.Noise/mil); err != nil {
		return err
	}
	for p := 1; p <= lot.Panels; p++ {
		pname := fmt.Sprintf("P%d", p)
		for _, l := range lot.Layers {
			var v [registration.NumTerms]float64
			for k := range v {
				v[k] = l.Mean[k] + l.SD[k]*rng.NormFloat64()
			}
			n := 0
			for _, y := range lot.Y {
				for _, x := range lot.X {
					n++
					name := fmt.Sprintf("T%02d", n)
					pos := panel.Vec{X: x, Y: y}
					d := registration.Displace(v, pos, panel.Vec{})
					d.X += lot.Noise * rng.NormFloat64()
					d.Y += lot.Noise * rng.NormFloat64()
					for _, m := range lot.Misses {
						if m.Panel == pname && m.Layer == l.Layer && m.Target == name {
							d = d.Add(m.Error)
						}
					}
					if _, err := fmt.Fprintf(w, "%s,%s,%s,%.2f,%.2f,%.4f,%.4f\n", pname, l.Layer, name, x/in, y/in, d.X/mil, d.Y/mil); err != nil {
						return err
					}
				}
			}
		}
	}
	return nil
}
