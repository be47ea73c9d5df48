package main

import (
	"fmt"
	"io"
	"math"

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
