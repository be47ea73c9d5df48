package main

import (
	"fmt"
	"strings"
	"sync"
	"time"
)

// Progress on stderr: a line redrawn in place, for the steps of a command
// that may take more than about a second (field solves, Monte Carlo,
// tolerance searches). It is drawn only when stderr is a terminal, and
// never while --json output goes to a pipe or a file (a script reading the
// JSON may be logging stderr too), and only once a step has run for
// progressDelay, so quick runs stay silent.

// progressDelay is how long a step runs before its progress line appears.
const progressDelay = time.Second

// progressStd returns std with progress turned off when json output goes
// to something that is not a terminal.
func progressStd(std stdio, json bool) stdio {
	if json && !isTerminal(std.out) {
		std.tty = false
	}
	return std
}

// progress draws a bar for a counted step (update) on stderr when it is a
// terminal and the step has taken over progressDelay.
type progress struct {
	std         stdio
	what, units string
	start       time.Time
	shown       bool
	last        time.Time
}

// newProgress starts the progress of a counted step: what is done, in units
// ("Monte Carlo", "panels").
func newProgress(std stdio, what, units string) *progress {
	return &progress{std: std, what: what, units: units, start: time.Now()}
}

// update reports done of total units; redraws are limited to ten a second
// (and the last one).
func (p *progress) update(done, total int) {
	if !p.std.tty || total <= 0 {
		return
	}
	now := time.Now()
	if now.Sub(p.start) < progressDelay || (p.shown && now.Sub(p.last) < 100*time.Millisecond && done < total) {
		return
	}
	p.shown, p.last = true, now
	const width = 30
	n := width * min(done, total) / total
	fmt.Fprintf(p.std.err, "\r%s [%s%s] %3d%% %d/%d %s", p.what, strings.Repeat("#", n), strings.Repeat(".", width-n),
		100*done/total, done, total, p.units)
}

// finish ends the line if one was drawn.
func (p *progress) finish() {
	if p.shown {
		fmt.Fprintln(p.std.err)
	}
}

// step runs f, a step whose length is not counted (a field solve behind one
// call), and shows "what … 3 s" on stderr, ticking, once it has run for
// progressDelay on a terminal. The line is cleared when f returns.
func step(std stdio, what string, f func() error) error {
	if !std.tty {
		return f()
	}
	shown := false // written by the ticker only, read after it has stopped
	start := time.Now()
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		t := time.NewTimer(progressDelay)
		defer t.Stop()
		for {
			select {
			case <-stop:
				return
			case <-t.C:
				shown = true
				fmt.Fprintf(std.err, "\r%s … %.0f s ", what, time.Since(start).Seconds())
				t.Reset(500 * time.Millisecond)
			}
		}
	}()
	err := f()
	close(stop)
	wg.Wait()
	if shown {
		// Blank the line: what follows starts at its left end.
		fmt.Fprintf(std.err, "\r%s\r", strings.Repeat(" ", len([]rune(what))+12))
	}
	return err
}
