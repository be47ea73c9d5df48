package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/spf13/pflag"
)

// TestDocCoversCommands checks that every command of the table has its
// section in doc.go (usage line, summary) and that the overview lists
// exactly the commands of the table, in its order.
func TestDocCoversCommands(t *testing.T) {
	docOverview()
	if len(docs.commands) != len(commands) {
		t.Errorf("doc.go has %d command sections, the table %d commands", len(docs.commands), len(commands))
	}
	var listed []string
	in := false
	for _, l := range strings.Split(docOverview(), "\n") {
		switch {
		case l == "The commands are:":
			in = true
		case in && strings.HasPrefix(l, "\t"):
			listed = append(listed, strings.Fields(l)[0])
		case in && len(listed) > 0 && l == "":
			in = false
		}
	}
	for i, c := range commands {
		d := docFor(c.name)
		if !strings.HasPrefix(d.usage, c.name) {
			t.Errorf("%s: usage line %q does not start with the command name", c.name, d.usage)
		}
		if d.short == "" || !strings.HasSuffix(d.short, ".") {
			t.Errorf("%s: summary %q: want one sentence", c.name, d.short)
		}
		if i >= len(listed) || listed[i] != c.name {
			t.Errorf("overview command list %v does not match the table at %d (%s)", listed, i, c.name)
		}
		var out, errw bytes.Buffer
		if code := realMain([]string{c.name, "-h"}, nil, &out, &errw); code != exitOK {
			t.Errorf("%s -h: exit %d", c.name, code)
		}
		if !strings.HasPrefix(out.String(), "usage: regdrift "+d.usage+"\n") {
			t.Errorf("%s -h does not start with its usage line:\n%s", c.name, out.String())
		}
	}
}

// TestReadmeUsage checks that the README shows the command list of doc.go
// verbatim, so that the two cannot drift apart.
func TestReadmeUsage(t *testing.T) {
	readme, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	ov := docOverview()
	i := strings.Index(ov, "The commands are:\n\n")
	j := strings.Index(ov, "\n\nRun 'regdrift COMMAND -h'")
	if i < 0 || j < i {
		t.Fatal("doc.go overview has no command list")
	}
	list := ov[i+len("The commands are:\n\n") : j]
	var want strings.Builder
	for _, l := range strings.Split(list, "\n") {
		want.WriteString("regdrift " + strings.TrimPrefix(l, "\t") + "\n")
	}
	if !strings.Contains(string(readme), want.String()) {
		t.Errorf("README.md does not hold the command list of doc.go; want the block\n%s", want.String())
	}
}

func TestVersion(t *testing.T) {
	var out, errw bytes.Buffer
	if code := realMain([]string{"version"}, nil, &out, &errw); code != exitOK {
		t.Fatalf("exit %d: %s", code, errw.String())
	}
	if !strings.HasPrefix(out.String(), "regdrift "+version) {
		t.Errorf("version printed %q", out.String())
	}
}

// panicFlags is a command that panics, for TestPanicExitStatus.
type panicFlags struct{}

func (*panicFlags) flags(*pflag.FlagSet) {}
func (*panicFlags) run(context.Context, stdio, []string) error {
	var m map[string]int
	m["x"]++ // a nil-map write: a defect, not bad input
	return nil
}

// TestPanicExitStatus: a panic exits with its own status, not bad input's.
func TestPanicExitStatus(t *testing.T) {
	commands = append(commands, command{"panic-test", func() options { return new(panicFlags) }})
	defer func() { commands = commands[:len(commands)-1] }()
	var out, errw bytes.Buffer
	code := realMain([]string{"panic-test"}, nil, &out, &errw)
	if code != exitCrash || code == exitBadInput {
		t.Errorf("exit %d, want %d", code, exitCrash)
	}
	if !strings.Contains(errw.String(), "internal error") {
		t.Errorf("stderr: %s", errw.String())
	}
}

// TestAccuracyFloor: an accuracy the solver cannot reach is a usage error
// before any solve (it used to fail as "context canceled", exit 1).
func TestAccuracyFloor(t *testing.T) {
	code, _, errw := run(t, "sweep", "testdata/small.toml", "--accuracy", "0.0001%", "-o", t.TempDir())
	if code != exitBadInput || !strings.Contains(errw, "--accuracy") {
		t.Errorf("exit %d, want 2 naming --accuracy: %s", code, errw)
	}
}

// TestCacheWarning: a cache that cannot be written is a warning on stderr,
// not a failed run.
func TestCacheWarning(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "cache-is-a-file")
	os.WriteFile(file, []byte("x"), 0o644)
	var out, errw bytes.Buffer
	code := realMain([]string{"sweep", "testdata/small.toml", "--cache-dir", file, "-o", t.TempDir()}, nil, &out, &errw)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, errw.String())
	}
	if !strings.Contains(errw.String(), "warning") {
		t.Errorf("no cache warning on stderr: %q", errw.String())
	}
}

// TestCountCaps: counts that pass their syntax but would run for a quarter of
// an hour are usage errors before any solve.
func TestCountCaps(t *testing.T) {
	for _, args := range [][]string{
		{"sweep", "testdata/small.toml", "--offsets", "-5mil:5mil:0.0001mil"},
		{"tol", "testdata/small.toml", "--widen", "0mil:4mil:0.00004mil"},
		{"yield", "testdata/small.toml", "--trials", "99999999999999999999"},
		{"yield", "testdata/small.toml", "--trials", "2000000000"},
	} {
		code, _, errw := run(t, append(args, "-o", t.TempDir())...)
		if code != exitBadInput || !(strings.Contains(errw, "at most") || strings.Contains(errw, "want 1 to")) {
			t.Errorf("%v: exit %d, want 2 with the cap: %s", args, code, errw)
		}
	}
}
