package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// childMain runs the command line in args (separated by newlines) as the
// whole process, writing each output file slowly so that a signal can arrive
// between files. The test binary runs itself this way (see TestMain).
func childMain(args string) {
	fileHook = func(string) { time.Sleep(300 * time.Millisecond) }
	os.Exit(realMain(strings.Split(args, "\n"), os.Stdin, os.Stdout, os.Stderr))
}

// TestSignalMidWrite signals a child run while it writes its files: it must
// exit 128+n, say it was interrupted, and leave neither outputs nor
// temporary files in -o.
func TestSignalMidWrite(t *testing.T) {
	if testing.Short() {
		t.Skip("runs child processes")
	}
	cache := cacheDir(t)
	// Warm the cache, so that the child spends its time writing.
	if code, _, errw := run(t, "map", "testdata/small.toml", "-o", t.TempDir()); code != 0 {
		t.Fatal(errw)
	}
	for _, tt := range []struct {
		sig  syscall.Signal
		code int
	}{{syscall.SIGINT, 130}, {syscall.SIGTERM, 143}, {syscall.SIGHUP, 129}} {
		out := t.TempDir()
		cmd := exec.Command(os.Args[0], "-test.run=^$")
		cmd.Env = append(os.Environ(), "REGDRIFT_TEST_CHILD="+strings.Join([]string{"map", "testdata/small.toml", "-o", out, "--cache-dir", cache}, "\n"))
		var stderr strings.Builder
		cmd.Stderr = &stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		// Wait for the first temporary file, then signal.
		deadline := time.Now().Add(30 * time.Second)
		for !hasTemp(out) && time.Now().Before(deadline) {
			time.Sleep(10 * time.Millisecond)
		}
		cmd.Process.Signal(tt.sig)
		err := cmd.Wait()
		code := 0
		if ee, ok := err.(*exec.ExitError); ok {
			code = ee.ExitCode()
		}
		if code != tt.code {
			t.Errorf("%v: exit %d, want %d (%s)", tt.sig, code, tt.code, stderr.String())
		}
		if !strings.Contains(stderr.String(), "interrupted") {
			t.Errorf("%v: stderr does not say interrupted: %s", tt.sig, stderr.String())
		}
		if ents, _ := os.ReadDir(out); len(ents) != 0 {
			var names []string
			for _, e := range ents {
				names = append(names, e.Name())
			}
			t.Errorf("%v: left in -o: %v", tt.sig, names)
		}
	}
}

func hasTemp(dir string) bool {
	m, _ := filepath.Glob(filepath.Join(dir, "*"+tempMarker+"*"))
	return len(m) > 0
}
