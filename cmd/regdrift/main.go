package main

import (
	"context"
	_ "embed"
	"errors"
	"fmt"
	"io"
	"os"
	"runtime/debug"
	"strings"
	"syscall"

	"github.com/spf13/pflag"
)

// version is the program version, printed by "regdrift version" beside the
// module version and VCS revision the binary was built from.
const version = "0.1.0"

// stdio holds the streams a command uses, so that tests can replace them.
type stdio struct {
	in       io.Reader
	out, err io.Writer
	// tty reports whether err is a terminal, for progress output.
	tty bool
}

// options is one command's typed flag set: flags declares the flags on a
// fresh pflag.FlagSet, and run does the work with them parsed.
type options interface {
	flags(fs *pflag.FlagSet)
	run(ctx context.Context, std stdio, args []string) error
}

// command is one subcommand. Its usage line, summary and description come
// from the command's section of doc.go, so that -h, godoc and the README
// read the same text.
type command struct {
	name string
	// options returns a fresh option set, so that a command may run twice in one process (tests).
	options func() options
}

// commands is the command table, in the order the command list shows it.
var commands = []command{
	{"demo", func() options { return new(demoFlags) }},
	{"map", func() options { return new(mapFlags) }},
	{"sweep", func() options { return new(sweepFlags) }},
	{"tol", func() options { return new(tolFlags) }},
	{"fit", func() options { return new(fitFlags) }},
	{"comp", func() options { return new(compFlags) }},
	{"yield", func() options { return new(yieldFlags) }},
	{"report", func() options { return new(reportFlags) }},
	{"history", func() options { return new(historyFlags) }},
	{"version", func() options { return new(versionFlags) }},
}

func lookup(name string) (*command, bool) {
	for i := range commands {
		if commands[i].name == name {
			return &commands[i], true
		}
	}
	return nil, false
}

// Exit statuses.
const (
	exitOK        = 0
	exitFailure   = 1
	exitBadInput  = 2
	exitOutOfSpec = 3
	// exitCrash is a panic caught in the command: a defect of regdrift, never
	// bad input, so that scripts can tell the two apart (70 is EX_SOFTWARE of
	// BSD sysexits.h; an uncaught Go panic would exit 2, like bad input).
	exitCrash = 70
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

func realMain(args []string, in io.Reader, out, errw io.Writer) (code int) {
	defer func() {
		if r := recover(); r != nil {
			fmt.Fprintf(errw, "regdrift: internal error (please report it with the input that caused it): %v\n%s", r, debug.Stack())
			code = exitCrash
		}
	}()
	ctx, stop := withSignals(context.Background())
	defer func() {
		if s := stop(); s != nil && code != exitOK && code != exitCrash {
			// The run was cut short by a signal: whatever it returned, say
			// so and exit as a shell reports a signalled command (128 + n).
			fmt.Fprintf(errw, "regdrift: interrupted (%v); no output written\n", s)
			code = 128 + int(s.(syscall.Signal))
		}
	}()
	std := stdio{in: in, out: out, err: errw, tty: isTerminal(errw)}
	if len(args) == 0 {
		printUsage(errw)
		return exitBadInput
	}
	name := args[0]
	switch name {
	case "-h", "--help", "help":
		if len(args) > 1 {
			if c, ok := lookup(args[1]); ok {
				fmt.Fprint(out, helpText(c))
				return exitOK
			}
		}
		printUsage(out)
		return exitOK
	case "-v", "--version":
		name = "version"
	}
	c, ok := lookup(name)
	if !ok {
		fmt.Fprintf(errw, "regdrift: unknown command %q\n\n", name)
		printUsage(errw)
		return exitBadInput
	}
	err := invoke(ctx, c, std, args[1:])
	if errors.Is(err, pflag.ErrHelp) {
		fmt.Fprint(out, helpText(c))
		return exitOK
	}
	if err != nil && interrupted.Load() {
		return exitFailure // the deferred signal report gives the status
	}
	var fe *flagError
	if errors.As(err, &fe) {
		fmt.Fprintf(errw, "regdrift %s: %v\nusage: regdrift %s\nrun 'regdrift %s -h' for help\n", c.name, fe.err, docFor(c.name).usage, c.name)
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
// An output directory that cannot be written is bad input before any work starts.
func invoke(ctx context.Context, c *command, std stdio, args []string) error {
	opts := c.options()
	fs := newFlagSet(c.name, opts)
	fs.SetOutput(io.Discard)
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, pflag.ErrHelp) {
			return err
		}
		return &flagError{err}
	}
	if f := fs.Lookup("out"); f != nil {
		if err := checkOutDir(f.Value.String()); err != nil {
			return badInput(fmt.Errorf("-o: %w", err))
		}
	}
	return opts.run(ctx, std, fs.Args())
}

func newFlagSet(name string, opts options) *pflag.FlagSet {
	fs := pflag.NewFlagSet(name, pflag.ContinueOnError)
	fs.SortFlags = false
	opts.flags(fs)
	return fs
}

// helpText is the -h text of c: its section of doc.go and its flags.
func helpText(c *command) string {
	d := docFor(c.name)
	var b strings.Builder
	fmt.Fprintf(&b, "usage: regdrift %s\n\n%s\n", d.usage, d.short)
	if d.long != "" {
		fmt.Fprintf(&b, "\n%s\n", d.long)
	}
	if u := newFlagSet(c.name, c.options()).FlagUsages(); u != "" {
		fmt.Fprintf(&b, "\nflags:\n%s", u)
	}
	return b.String()
}

// printUsage prints the overview of doc.go: what the program does, the
// command list, exit statuses and the caution.
func printUsage(w io.Writer) {
	fmt.Fprint(w, docOverview())
}

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

// versionFlags is the version command, which takes no flags.
type versionFlags struct{}

func (*versionFlags) flags(*pflag.FlagSet) {}

func (*versionFlags) run(ctx context.Context, std stdio, args []string) error {
	if len(args) > 0 {
		return usageErr("version takes no arguments")
	}
	fmt.Fprintf(std.out, "regdrift %s\n", versionString())
	return nil
}

// versionString is the program version with the module version and the VCS
// revision recorded in the build information, when the binary has them.
func versionString() string {
	s := version
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return s
	}
	if v := bi.Main.Version; v != "" && v != "(devel)" {
		s += " (module " + v + ")"
	}
	var rev, modified string
	for _, kv := range bi.Settings {
		switch kv.Key {
		case "vcs.revision":
			rev = kv.Value
		case "vcs.modified":
			if kv.Value == "true" {
				modified = ", modified"
			}
		}
	}
	if rev != "" {
		if len(rev) > 12 {
			rev = rev[:12]
		}
		s += " (revision " + rev + modified + ")"
	}
	return s
}
