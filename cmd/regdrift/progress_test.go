package main

import (
	"bytes"
	"errors"
	"strings"
	"testing"
	"time"
)

// TestProgress: the bar appears only on a terminal and only after a second.
func TestProgress(t *testing.T) {
	for _, tt := range []struct {
		name     string
		tty      bool
		age      time.Duration
		wantDraw bool
	}{
		{"terminal, long run", true, 2 * time.Second, true},
		{"terminal, short run", true, 0, false},
		{"not a terminal", false, 2 * time.Second, false},
	} {
		t.Run(tt.name, func(t *testing.T) {
			var buf bytes.Buffer
			p := newProgress(stdio{err: &buf, tty: tt.tty}, "Monte Carlo", "panels")
			p.start = p.start.Add(-tt.age)
			p.update(256, 1024)
			p.update(1024, 1024)
			p.finish()
			got := buf.String()
			if tt.wantDraw != (got != "") {
				t.Fatalf("output %q", got)
			}
			if tt.wantDraw && (!strings.Contains(got, " 25%") || !strings.Contains(got, "100%") || !strings.HasSuffix(got, "\n")) {
				t.Errorf("bar %q", got)
			}
		})
	}
}

// TestProgressStd: --json to something that is not a terminal turns the
// progress off even when stderr is a terminal; without --json it stays on.
func TestProgressStd(t *testing.T) {
	var out bytes.Buffer
	std := stdio{out: &out, err: &out, tty: true}
	if progressStd(std, true).tty {
		t.Error("progress with --json to a buffer")
	}
	if !progressStd(std, false).tty {
		t.Error("no progress without --json on a terminal")
	}
}

// TestStep: the ticking line of an uncounted step appears only on a
// terminal and only once the step has run for progressDelay; it is blanked
// at the end and the step's error is passed on.
func TestStep(t *testing.T) {
	errStep := errors.New("step failed")
	for _, tt := range []struct {
		name     string
		tty      bool
		length   time.Duration
		wantDraw bool
	}{
		{"terminal, long step", true, progressDelay + 300*time.Millisecond, true},
		{"terminal, short step", true, 0, false},
		{"not a terminal", false, progressDelay + 300*time.Millisecond, false},
	} {
		t.Run(tt.name, func(t *testing.T) {
			if testing.Short() && tt.length > 0 {
				t.Skip("sleeps over a second")
			}
			var buf bytes.Buffer
			err := step(stdio{err: &buf, tty: tt.tty}, "solving cross-sections", func() error {
				time.Sleep(tt.length)
				return errStep
			})
			if !errors.Is(err, errStep) {
				t.Errorf("error %v, want the step's", err)
			}
			got := buf.String()
			if tt.wantDraw != (got != "") {
				t.Fatalf("output %q", got)
			}
			if tt.wantDraw && (!strings.Contains(got, "solving cross-sections … 1 s") || !strings.HasSuffix(got, "\r")) {
				t.Errorf("line %q", got)
			}
		})
	}
}
