package job

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
)

// tomlValue formats v (SI) of kind k in unit u with six significant digits,
// quoted, as the loader reads it back: tomlValue(-1.8e-4, unit.Strain, "ppm")
// is "-180 ppm" in quotes. Six digits keep the relative rounding error of a
// written value within 5e-6.
func tomlValue(v float64, k unit.Kind, u string) string {
	return strconv.Quote(strconv.FormatFloat(unit.In(v, k, u), 'g', 6, 64) + " " + u)
}

// WriteContributors writes a measured lot as [[contributor]] tables for a
// job's include, with a unit on every value: the contributors of
// registration.LotContributors, so that layers measured against the drilled
// holes on the same panels keep their pairing. A layer on its own gets one
// table, each term the fit estimated as { mean, sigma } — the lot mean and the
// panel-to-panel standard deviation — or its mean alone when one panel gives
// no spread; a group measured together gets a table of means per layer and
// the joint spread as weighted components. Values are in the term's display
// unit (registration.TermKind.Unit) under out. A lot measured relative to
// another layer ("L3-L4") moves its first layer. file names the measurement
// file and set the fit's settings, for the header comment; fits are the fits
// the lots were computed from, whose pooled residual scale is offered per
// layer as a commented-out site_sigma.
func WriteContributors(w io.Writer, file string, set *registration.FitSettings, fits []registration.Fit, lots []registration.Lot, out unit.Output) error {
	var b strings.Builder
	fmt.Fprintf(&b, "# Measured lot movement, fitted by regdrift fit from %s\n", file)
	fmt.Fprintf(&b, "# (%s model about the datum (%s, %s), robust: %s).\n", set.Model,
		unit.Format(set.Datum.X, unit.Length, out.Panel(), 3), unit.Format(set.Datum.Y, unit.Length, out.Panel(), 3), set.Robust)
	b.WriteString("# Each term is the lot mean and the panel-to-panel standard deviation of the\n" +
		"# fitted terms (which includes each fit's own estimation error). Include this\n" +
		"# file from a job (include = [\"FILE\"]) and leave out the job's own\n" +
		"# contributors for these layers, or they count twice. The job's datum must be\n" +
		"# the fit's datum.\n")
	lm := registration.LotContributors(fits, lots, LotLabel)
	for _, n := range lm.Notes {
		fmt.Fprintf(&b, "# Note: %s.\n", n)
	}
	for _, lc := range lm.Contributors {
		c := &lc.Contributor
		b.WriteString("\n[[contributor]]\n")
		if lc.Lot != nil {
			if upper, lower, rel := registration.SplitLayer(lc.Layer); rel {
				fmt.Fprintf(&b, "# measured relative to %s: this moves %s against %s (and against the drilled holes)\n", lower, upper, lower)
			}
		} else {
			b.WriteString("# one independent part of the layers' joint panel-to-panel movement: it moves\n" +
				"# each layer by its weight times the term, so the offset between two layers\n" +
				"# moves by the difference of their weights\n")
		}
		fmt.Fprintf(&b, "name   = %s\n", strconv.Quote(c.Name))
		q := make([]string, len(c.Layers))
		for i, l := range c.Layers {
			q[i] = strconv.Quote(l)
		}
		fmt.Fprintf(&b, "layers = [%s]\n", strings.Join(q, ", "))
		if c.Weights != nil {
			ws := make([]string, len(c.Weights))
			for i, x := range c.Weights {
				ws[i] = strconv.FormatFloat(x, 'g', 6, 64)
			}
			fmt.Fprintf(&b, "weights = [%s]\n", strings.Join(ws, ", "))
		}
		for k := registration.TermKind(0); k < registration.NumTerms; k++ {
			t := c.Terms[k]
			if lc.Lot != nil && !lc.Lot.Model.Estimates(k) || lc.Lot == nil && t.Dist == registration.Fixed {
				continue
			}
			u, kind := k.Unit(out), k.Info().Kind
			if t.Dist == registration.Fixed {
				fmt.Fprintf(&b, "%-8s = %s\n", k, tomlValue(t.Mean, kind, u))
			} else {
				fmt.Fprintf(&b, "%-8s = { mean = %s, sigma = %s }\n", k, tomlValue(t.Mean, kind, u), tomlValue(t.Spread, kind, u))
			}
		}
		if lc.Lot == nil {
			continue
		}
		// The pooled residual scale, σ0² = Σ dof·σ0_i² / Σ dof over the
		// layer's fits, is what the affine model leaves per target and axis;
		// it includes the measurement noise, so it is offered, not applied.
		var ss, dof float64
		for _, f := range fits {
			if f.Layer == lc.Layer && f.DOF > 0 {
				ss += float64(f.DOF) * f.Sigma0 * f.Sigma0
				dof += float64(f.DOF)
			}
		}
		if dof > 0 {
			fmt.Fprintf(&b, "# site_sigma = %s   # pooled fit residual per axis; includes measurement noise\n",
				tomlValue(math.Sqrt(ss/dof), unit.Length, out.Length()))
		}
		fmt.Fprintf(&b, "# residual = %s   # pooled non-affine residual map written by regdrift fit\n",
			strconv.Quote("residual-grid-"+lc.Layer+".csv"))
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// LotLabel names the contributor of a measured lot, "measured L3 (lot of 30
// panels)", as WriteContributors writes it.
func LotLabel(l *registration.Lot) string {
	return fmt.Sprintf("measured %s (lot of %d panels)", l.Layer, l.Panels)
}

// WriteCompensation writes an artwork compensation as fixed contributors for
// a job's include, one per layer: the net change of the layer's scale terms
// (registration.AxisComp.Net), which is what the model needs to map the
// compensated build, with the artwork factor in a comment. jobFile names the
// job the compensation was computed for, in the header comment.
func WriteCompensation(w io.Writer, jobFile string, res *registration.CompResult) error {
	var b strings.Builder
	fmt.Fprintf(&b, "# Artwork scale compensation recommended by regdrift comp for %s\n", jobFile)
	fmt.Fprintf(&b, "# (objective %s; common part: %s).\n", res.Objective, res.Common)
	b.WriteString("# Each block is the net change of the layer's scale term, (f − 1)(1 + s) for the\n" +
		"# artwork factor f and the layer's mean movement s; the factor itself is in the\n" +
		"# comment. Include this file in the job to map the compensated build.\n")
	sx, sy := registration.ScaleX.Info(), registration.ScaleY.Info()
	for _, l := range res.Layers {
		fmt.Fprintf(&b, "\n# %s: artwork factor X %.9f (%+.2f ppm), Y %.9f (%+.2f ppm)\n", l.Layer, l.X.Factor, l.X.Scale/1e-6, l.Y.Factor, l.Y.Scale/1e-6)
		fmt.Fprintf(&b, "[[contributor]]\nname    = %s\nlayers  = [%s]\n", strconv.Quote("artwork compensation "+l.Layer), strconv.Quote(l.Layer))
		fmt.Fprintf(&b, "%s = %s\n%s = %s\n", sx.Key, tomlValue(l.X.Net, sx.Kind, sx.Unit), sy.Key, tomlValue(l.Y.Net, sy.Kind, sy.Unit))
	}
	_, err := io.WriteString(w, b.String())
	return err
}
