// Command regdrift maps layer-to-layer misregistration across a PCB production
// panel onto the coupling of broadside-coupled stripline couplers.
//
// Usage:
//
//	regdrift map    JOB  [-o DIR] [--units mil|um] [--show drift|worst|offset|sigma|margin] [--width PX] [--json]
//	regdrift sweep  JOB  [--section NAME] [--offsets FROM:TO:STEP] [--accuracy 0.1%] [-o DIR] [--json]
//	regdrift tol    JOB  [--section NAME] [--widen FROM:TO:STEP] [--widen-trace upper|lower] [--json]
//	regdrift fit    TARGETS.csv [--model affine|similarity|translation] [--robust] [-o DIR] [--contributors FILE] [--json]
//	regdrift comp   JOB  [--targets TARGETS.csv] [--objective worst|rms] [--drill-budget 2mil] [--max 600ppm] [--step 5ppm] [-o DIR] [--json]
//	regdrift yield  JOB  [--trials N] [--seed S] [-o DIR] [--json]
//	regdrift demo   [-o DIR]
//	regdrift version
//
// Exit status: 0 success (also for -h), 1 a failure while running, 2 bad input
// or usage, 3 out of spec (only with --strict).
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"strings"

	"github.com/spf13/pflag"
)

// version is the program version, printed by "regdrift version".
const version = "0.1.0"

// stdio holds the streams a command uses, so that tests can replace them.
type stdio struct {
	in       io.Reader
	out, err io.Writer
	// tty reports whether err is a terminal, for progress output.
	tty bool
}

// command is one subcommand.
type command struct {
	name  string // "map"
	usage string // "map JOB [flags]"
	short string // one line for the command list
	long  string // paragraphs for -h
	order int    // position in the command list
	// flags is built fresh for each run, so that tests may run a command twice.
	flags func(fs *pflag.FlagSet) any
	run   func(ctx context.Context, std stdio, opts any, args []string) error
}

var commands = map[string]*command{}

// register adds c to the command table; each command's file calls it from init.
func register(c *command) {
	if _, dup := commands[c.name]; dup {
		panic("regdrift: command registered twice: " + c.name)
	}
	commands[c.name] = c
}

// Exit statuses.
const (
	exitOK        = 0
	exitFailure   = 1
	exitBadInput  = 2
	exitOutOfSpec = 3
)

// errBadInput marks errors caused by the user's input: exit status 2.
var errBadInput = errors.New("bad input")

// errOutOfSpec is returned with --strict when the analysis found sites out of spec.
var errOutOfSpec = errors.New("out of spec")

type badInputError struct{ err error }

func (e *badInputError) Error() string        { return e.err.Error() }
func (e *badInputError) Unwrap() error        { return e.err }
func (e *badInputError) Is(target error) bool { return target == errBadInput }

// badInput marks err as a user-input error (exit status 2). It returns nil for nil.
func badInput(err error) error {
	if err == nil || errors.Is(err, errBadInput) {
		return err
	}
	return &badInputError{err}
}

// usageErr is a bad-input error about the command line.
func usageErr(format string, args ...any) error {
	return badInput(fmt.Errorf(format, args...))
}

func main() {
	os.Exit(realMain(os.Args[1:], os.Stdin, os.Stdout, os.Stderr))
}

func realMain(args []string, in io.Reader, out, errw io.Writer) int {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	std := stdio{in: in, out: out, err: errw, tty: isTerminal(errw)}
	if len(args) == 0 {
		printUsage(errw)
		return exitBadInput
	}
	name := args[0]
	switch name {
	case "-h", "--help", "help":
		if len(args) > 1 {
			if c, ok := commands[args[1]]; ok {
				fs := newFlagSet(c)
				fmt.Fprint(out, helpText(c, fs))
				return exitOK
			}
		}
		printUsage(out)
		return exitOK
	case "-v", "--version":
		name = "version"
	}
	c, ok := commands[name]
	if !ok {
		fmt.Fprintf(errw, "regdrift: unknown command %q\n\n", name)
		printUsage(errw)
		return exitBadInput
	}
	err := invoke(ctx, c, std, args[1:])
	if errors.Is(err, pflag.ErrHelp) {
		fmt.Fprint(out, helpText(c, newFlagSet(c)))
		return exitOK
	}
	var fe *flagError
	if errors.As(err, &fe) {
		fmt.Fprintf(errw, "regdrift %s: %v\nusage: regdrift %s\nrun 'regdrift %s -h' for help\n", c.name, fe.err, c.usage, c.name)
		return exitBadInput
	}
	switch {
	case err == nil:
		return exitOK
	case errors.Is(err, errOutOfSpec):
		fmt.Fprintf(errw, "regdrift %s: %v\n", c.name, err)
		return exitOutOfSpec
	case errors.Is(err, errBadInput):
		fmt.Fprintf(errw, "regdrift %s: %v\n", c.name, err)
		return exitBadInput
	default:
		fmt.Fprintf(errw, "regdrift %s: %v\n", c.name, err)
		return exitFailure
	}
}

// flagError is a command line that pflag could not parse.
type flagError struct{ err error }

func (e *flagError) Error() string        { return e.err.Error() }
func (e *flagError) Unwrap() error        { return e.err }
func (e *flagError) Is(target error) bool { return target == errBadInput }

// invoke parses args with c's flags and runs c. A -h returns pflag.ErrHelp.
func invoke(ctx context.Context, c *command, std stdio, args []string) error {
	fs := pflag.NewFlagSet(c.name, pflag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.SortFlags = false
	var opts any
	if c.flags != nil {
		opts = c.flags(fs)
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, pflag.ErrHelp) {
			return err
		}
		return &flagError{err}
	}
	return c.run(ctx, std, opts, fs.Args())
}

func newFlagSet(c *command) *pflag.FlagSet {
	fs := pflag.NewFlagSet(c.name, pflag.ContinueOnError)
	fs.SortFlags = false
	if c.flags != nil {
		c.flags(fs)
	}
	return fs
}

func helpText(c *command, fs *pflag.FlagSet) string {
	var b strings.Builder
	fmt.Fprintf(&b, "usage: regdrift %s\n\n%s\n", c.usage, c.short)
	if c.long != "" {
		fmt.Fprintf(&b, "\n%s\n", strings.TrimSpace(c.long))
	}
	if u := fs.FlagUsages(); u != "" {
		fmt.Fprintf(&b, "\nflags:\n%s", u)
	}
	return b.String()
}

func printUsage(w io.Writer) {
	fmt.Fprintf(w, "regdrift maps layer-to-layer misregistration across a PCB panel onto the\ncoupling of broadside-coupled stripline couplers.\n\nusage: regdrift COMMAND [flags]\n\ncommands:\n")
	var list []*command
	for _, c := range commands {
		list = append(list, c)
	}
	sort.Slice(list, func(i, j int) bool {
		if list[i].order != list[j].order {
			return list[i].order < list[j].order
		}
		return list[i].name < list[j].name
	})
	for _, c := range list {
		fmt.Fprintf(w, "  %-8s %s\n", c.name, c.short)
	}
	fmt.Fprintf(w, "\nrun 'regdrift COMMAND -h' for a command's flags.\nResults are engineering estimates: check them against coupon measurements and\nthe fabricator's qualified process data.\n")
}

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

func init() {
	register(&command{
		name: "version", usage: "version", short: "print the version", order: 100,
		run: func(ctx context.Context, std stdio, _ any, args []string) error {
			if len(args) > 0 {
				return usageErr("version takes no arguments")
			}
			fmt.Fprintf(std.out, "regdrift %s\n", version)
			return nil
		},
	})
}
