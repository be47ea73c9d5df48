package main

import (
	"fmt"
	"io"
	"math"
	"text/tabwriter"

	"github.com/regdrift/regdrift/registration/drift"
)

// printSources writes the worst site's drift split by source, when the job
// has [[variation]] terms: registration, the variation terms together, and
// the term that moves it most.
func printSources(w io.Writer, ds *drift.DriftSources) {
	if ds == nil {
		return
	}
	fmt.Fprintf(w, "  its drift: registration %+.4f dB, variation terms %+.4f dB (σ %.4f dB)", ds.RegistrationDB, ds.VariationDB, ds.VariationSDDB)
	k := -1
	for i, t := range ds.Terms {
		if k < 0 || math.Abs(t.DriftDB) > math.Abs(ds.Terms[k].DriftDB) {
			k = i
		}
	}
	if k >= 0 {
		fmt.Fprintf(w, "; largest term %q %+.4f dB", ds.Terms[k].Name, ds.Terms[k].DriftDB)
	}
	fmt.Fprintln(w)
}

// printLinearity writes the linearity check of the process model and its
// warning, if any.
func printLinearity(w io.Writer, l *drift.Linearity) {
	if l == nil {
		return
	}
	fmt.Fprintln(w, l.String())
	if l.Warning != "" {
		fmt.Fprintf(w, "warning: %s\n", l.Warning)
	}
}

// printCouplingBudget writes the coupling budget of a yield study with
// variation terms: registration and variation terms ranked together.
func printCouplingBudget(w io.Writer, cb *drift.CouplingBudget) {
	if cb == nil {
		return
	}
	fmt.Fprintf(w, "\ncoupling budget (share of the coupling variance, registration and variation terms together):\n")
	at := map[string]float64{}
	for _, r := range cb.AtWorst {
		at[r.Source+"\x00"+r.Name] = r.Share
	}
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "  source\tterm\tpanel\tsd [dB]\tat %s\n", cb.WorstSite)
	for _, r := range cb.Panel[:min(10, len(cb.Panel))] {
		fmt.Fprintf(tw, "  %s\t%s\t%.1f %%\t%.4f\t%.1f %%\n", r.Source, r.Name, 100*r.Share, r.SDDB, 100*at[r.Source+"\x00"+r.Name])
	}
	tw.Flush()
}
