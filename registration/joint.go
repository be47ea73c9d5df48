package registration

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// MinLotPanels is the fewest panels whose spread a fit reports without a
// warning. The sample standard deviation of n normal values has a relative
// standard error of about 1/√(2(n−1)) (Taylor, An Introduction to Error
// Analysis, 2nd ed., §5.7, eq. 5.46): 35 % at five panels, 71 % at two.
const MinLotPanels = 5

// LotContributor is one contributor of a measured lot with what it stands
// for: Layer is the lot's layer for a contributor of one lot (its means, or
// its means and spread), or "" for a joint spread component of a group.
type LotContributor struct {
	Contributor
	Layer string
	Lot   *Lot // the lot of Layer; nil for a joint component
}

// LotModel is a measured lot turned into contributors, with notes on how.
type LotModel struct {
	Contributors []LotContributor
	// Groups lists the layers written jointly, each group measured on the
	// same panels, in order of first appearance.
	Groups [][]string
	Notes  []string
}

// Differences returns, for each pair of layers of each of lm's groups, the
// lot statistics of the per-panel differences of their fitted terms, as a
// Lot whose layer is "A-B": what the offset between the two layers does
// from panel to panel, free of the drill error both share.
func (lm *LotModel) Differences(fits []Fit) []Lot {
	by := map[[2]string]*Fit{}
	var panels []string
	seen := map[string]bool{}
	for i := range fits {
		f := &fits[i]
		by[[2]string{f.Panel, f.Layer}] = f
		if !seen[f.Panel] {
			seen[f.Panel] = true
			panels = append(panels, f.Panel)
		}
	}
	var out []Lot
	for _, g := range lm.Groups {
		for a := 0; a < len(g); a++ {
			for b := a + 1; b < len(g); b++ {
				var diffs []Fit
				for _, p := range panels {
					fa, fb := by[[2]string{p, g[a]}], by[[2]string{p, g[b]}]
					if fa == nil || fb == nil {
						continue
					}
					d := Fit{Panel: p, Layer: g[a] + "-" + g[b], Model: fa.Model}
					for k := range d.Terms {
						d.Terms[k] = fa.Terms[k] - fb.Terms[k]
					}
					diffs = append(diffs, d)
				}
				out = append(out, LotStats(diffs)...)
			}
		}
	}
	return out
}

// LotContributors turns the lots fitted from fits into contributors that keep
// the panel-by-panel pairing of layers measured together.
//
// Layers measured against the drilled holes on the same panels share each
// panel's own drill error, so their fitted terms are correlated; writing each
// layer's spread as an independent contributor would count the shared part
// twice in the offset between them. Such a group is written as one fixed
// contributor per layer holding its lot means, plus, per estimated term, one
// normal contributor per principal component of the term's layer-to-layer
// covariance over the panels: C = V·Λ·Vᵀ (Golub & Van Loan, Matrix
// Computations, 4th ed., §8.1), each component moving the layers by the
// weights V[:, j] with σ = √λ_j. The components are independent and
// reproduce C exactly, so every pair's relative offset has the spread of the
// per-panel differences and each layer its own spread against the holes. The
// weights are scaled so that the largest is +1 and σ scaled to match. A two-
// layer group gives, per term, a common component (weights near 1, 1) and a
// difference component (near 1, −1).
//
// A layer measured relative to another ("L3-L4"), or on panels no other layer
// shares, is written as today: one contributor with its means and spreads
// (Lot.Contributor). label names a lot's contributor.
func LotContributors(fits []Fit, lots []Lot, label func(*Lot) string) *LotModel {
	out := &LotModel{}
	panels := map[string][]string{} // by layer, sorted
	for i := range fits {
		f := &fits[i]
		panels[f.Layer] = append(panels[f.Layer], f.Panel)
	}
	groups := map[string][]int{} // panel set → indexes into lots
	var order []string
	for i := range lots {
		l := &lots[i]
		if _, _, rel := SplitLayer(l.Layer); rel || l.Panels < 2 {
			continue
		}
		p := slices.Clone(panels[l.Layer])
		slices.Sort(p)
		key := strings.Join(p, "\x00")
		if _, ok := groups[key]; !ok {
			order = append(order, key)
		}
		groups[key] = append(groups[key], i)
	}
	joint := map[int]bool{}
	for _, key := range order {
		g := groups[key]
		if len(g) < 2 {
			continue
		}
		for _, i := range g {
			joint[i] = true
		}
	}
	for i := range lots {
		l := &lots[i]
		if !joint[i] {
			out.Contributors = append(out.Contributors, LotContributor{Contributor: l.Contributor(label(l)), Layer: l.Layer, Lot: l})
			switch {
			case l.Panels == 1:
				out.Notes = append(out.Notes, fmt.Sprintf("%s: one panel, so no panel-to-panel sigma is written (the lot's spread is unknown; only its mean is used)", l.Layer))
			case l.Panels < MinLotPanels:
				out.Notes = append(out.Notes, fmt.Sprintf("%s: only %d panels, so its sigma is poorly known (relative standard error about %.0f %%)", l.Layer, l.Panels, 100/math.Sqrt(2*float64(l.Panels-1))))
			}
			continue
		}
		means := l.Contributor(label(l))
		for k := range means.Terms {
			means.Terms[k].Spread, means.Terms[k].Dist = 0, Fixed
		}
		out.Contributors = append(out.Contributors, LotContributor{Contributor: means, Layer: l.Layer, Lot: l})
	}
	for _, key := range order {
		g := groups[key]
		if len(g) < 2 {
			continue
		}
		out.Contributors = append(out.Contributors, jointComponents(fits, lots, g)...)
		names := make([]string, len(g))
		for j, i := range g {
			names[j] = lots[i].Layer
		}
		out.Groups = append(out.Groups, names)
		n := lots[g[0]].Panels
		note := fmt.Sprintf("%s measured on the same %d panels: written jointly (the means per layer, the spread as components over the layers), so the offset between them has the spread of the per-panel differences", strings.Join(names, ", "), n)
		if n < MinLotPanels {
			note += fmt.Sprintf("; only %d panels, so the sigmas are poorly known (relative standard error about %.0f %%)", n, 100/math.Sqrt(2*float64(n-1)))
		}
		out.Notes = append(out.Notes, note)
	}
	return out
}

// jointComponents returns the principal components of the lots g (indexes
// into lots, drill-referenced layers measured on the same panels): per term
// each estimates, one normal contributor per component of non-zero variance.
func jointComponents(fits []Fit, lots []Lot, g []int) []LotContributor {
	layers := make([]string, len(g))
	col := map[string]int{}
	for j, i := range g {
		layers[j] = lots[i].Layer
		col[lots[i].Layer] = j
	}
	// One row per panel, in order of first appearance.
	row := map[string]int{}
	var vals [][NumTerms][]float64 // [panel][term][layer]
	for i := range fits {
		f := &fits[i]
		j, ok := col[f.Layer]
		if !ok {
			continue
		}
		r, ok := row[f.Panel]
		if !ok {
			r = len(vals)
			row[f.Panel] = r
			var v [NumTerms][]float64
			for k := range v {
				v[k] = make([]float64, len(g))
			}
			vals = append(vals, v)
		}
		for k := range f.Terms {
			vals[r][k][j] = f.Terms[k]
		}
	}
	n, m := len(vals), len(g)
	model := lots[g[0]].Model
	var out []LotContributor
	for k := TermKind(0); k < NumTerms; k++ {
		if !model.Estimates(k) {
			continue
		}
		c := mat.NewSymDense(m, nil)
		for a := 0; a < m; a++ {
			for b := a; b < m; b++ {
				ma, mb := lots[g[a]].Mean[k], lots[g[b]].Mean[k]
				var s float64
				for r := 0; r < n; r++ {
					s += (vals[r][k][a] - ma) * (vals[r][k][b] - mb)
				}
				c.SetSym(a, b, s/float64(n-1))
			}
		}
		var eig mat.EigenSym
		if !eig.Factorize(c, true) {
			continue // not reached for a finite symmetric matrix
		}
		lam := eig.Values(nil)
		var vec mat.Dense
		eig.VectorsTo(&vec)
		trace := mat.Trace(c)
		// Largest component first, so that the common movement leads.
		for j := m - 1; j >= 0; j-- {
			if !(lam[j] > 1e-12*trace) {
				continue
			}
			w := make([]float64, m)
			big := 0
			for a := 0; a < m; a++ {
				w[a] = vec.At(a, j)
				if math.Abs(w[a]) > math.Abs(w[big]) {
					big = a
				}
			}
			scale := w[big]
			for a := range w {
				w[a] /= scale
			}
			comp := Contributor{
				Name:    fmt.Sprintf("measured %s %s, component %d of %d (lot of %d panels)", strings.Join(layers, "+"), k, m-j, m, n),
				Layers:  slices.Clone(layers),
				Weights: w,
			}
			comp.Terms[k] = Term{Spread: math.Sqrt(lam[j]) * math.Abs(scale), Dist: Normal}
			out = append(out, LotContributor{Contributor: comp})
		}
	}
	return out
}
