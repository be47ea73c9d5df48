package main

import (
	"errors"
	"fmt"
	"strconv"

	"github.com/spf13/pflag"

	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration/drift"
)

// The flags several commands share are declared here, once, so that their
// names, defaults and help read the same in every command.

// defaultOutDir is where a run's files go without -o.
const defaultOutDir = "regdrift-out"

// addOutDir declares -o/--out, the output directory.
func addOutDir(fs *pflag.FlagSet, p *string) {
	fs.StringVarP(p, "out", "o", defaultOutDir, "output directory (created if missing; the files of a run appear together or not at all)")
}

// outputFlags are the flags of a command that writes files and a summary:
// the output directory, the length unit of its outputs and the JSON switch.
type outputFlags struct {
	out   string // output directory
	units string // "mil" or "um"
	json  bool   // JSON summary on stdout instead of the table
}

func (f *outputFlags) add(fs *pflag.FlagSet) {
	addOutDir(fs, &f.out)
	fs.StringVar(&f.units, "units", "mil", "output length unit: mil or um (panel axes in in or mm)")
	fs.BoolVar(&f.json, "json", false, "print the JSON summary to stdout instead of the table")
}

// addStrict declares --strict; when says what makes the run exit with status 3.
func addStrict(fs *pflag.FlagSet, p *bool, when string) {
	fs.BoolVar(p, "strict", false, "exit with status 3 when "+when)
}

// solverFlags are the cross-section solver options every job command takes.
type solverFlags struct {
	accuracy string
	noCache  bool
	cacheDir string
}

func (f *solverFlags) add(fs *pflag.FlagSet) {
	fs.StringVar(&f.accuracy, "accuracy", "0.1%", "convergence target of the field solve in C, as a percentage")
	fs.BoolVar(&f.noCache, "no-cache", false, "solve the cross-sections again instead of reading the cache")
	fs.StringVar(&f.cacheDir, "cache-dir", "", "directory of the solve cache (default: the user cache directory)")
}

// settings returns the solver settings; bad values are usage errors. Cache
// warnings (a damaged entry recomputed, an entry that could not be written)
// go to std.err: the solve succeeded, so they do not fail the run.
func (f *solverFlags) settings(std stdio) (*drift.Settings, error) {
	acc, err := parsePercent(f.accuracy)
	if err != nil {
		return nil, usageErr("--accuracy: %v", err)
	}
	if acc < section.MinAccuracy {
		return nil, usageErr("--accuracy: %s is finer than the solver can reach (%.2g %% at best)", f.accuracy, 100*section.MinAccuracy)
	}
	warn := func(w error) { fmt.Fprintf(std.err, "regdrift: warning: %v\n", w) }
	return &drift.Settings{Accuracy: acc, CacheDir: f.cacheDir, NoCache: f.noCache, CacheWarning: warn}, nil
}

func parsePercent(s string) (float64, error) {
	var v float64
	var pct string
	n, _ := fmt.Sscanf(s, "%g%s", &v, &pct)
	if n < 1 || (n == 2 && pct != "%") || n == 1 {
		return 0, fmt.Errorf("%q: want a percentage such as 0.1%%", s)
	}
	if !(v > 0 && v < 10) {
		return 0, fmt.Errorf("%q: want a value between 0 and 10%%", s)
	}
	return v / 100, nil
}

// maxTrials bounds --trials: ten million panels of a few thousand sites is
// minutes of Monte Carlo, and the standard error of a yield is already below
// 1e-4 long before.
const maxTrials = 10_000_000

// addTrials declares --trials, the panels of a Monte Carlo, taking 1 to
// maxTrials with a message that says which when the count is out of range.
func addTrials(fs *pflag.FlagSet, p *int, usage string) {
	*p = 10000
	fs.Var((*trialsValue)(p), "trials", usage)
}

type trialsValue int

func (v *trialsValue) String() string { return strconv.Itoa(int(*v)) }
func (v *trialsValue) Type() string   { return "int" }
func (v *trialsValue) Set(s string) error {
	n, err := strconv.ParseInt(s, 10, 64)
	switch {
	case errors.Is(err, strconv.ErrRange) || (err == nil && (n < 1 || n > maxTrials)):
		return fmt.Errorf("want 1 to %d panels", maxTrials)
	case err != nil:
		return errors.New("want a whole number of panels")
	}
	*v = trialsValue(n)
	return nil
}
