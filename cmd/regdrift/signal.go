package main

import (
	"context"
	"errors"
	"os"
	"os/signal"
	"sync/atomic"
	"syscall"
)

// stopSignals are the signals that stop a run cleanly: every temporary file
// is removed, no partial output set is left, and the exit status is 128 plus
// the signal number (130 for SIGINT, 143 for SIGTERM, 129 for SIGHUP).
var stopSignals = []os.Signal{syscall.SIGINT, syscall.SIGTERM, syscall.SIGHUP}

// interrupted is set when a stop signal arrives. The writers of outputs
// check it between files and before committing, since writing takes no
// context; signals are process-wide, so one flag serves.
var interrupted atomic.Bool

// errInterrupted is returned by output writing after a stop signal.
var errInterrupted = errors.New("interrupted")

// withSignals returns a context cancelled by the first stop signal. stop
// ends the signal handling and returns the signal that arrived, or nil. A
// second signal after the first gets the default action (the process ends
// at once), for a user who does not want to wait for the clean-up.
func withSignals(parent context.Context) (ctx context.Context, stop func() os.Signal) {
	ctx, cancel := context.WithCancel(parent)
	sigc := make(chan os.Signal, 1)
	signal.Notify(sigc, stopSignals...)
	var got atomic.Value
	done := make(chan struct{})
	go func() {
		select {
		case s := <-sigc:
			got.Store(s)
			interrupted.Store(true)
			signal.Stop(sigc)
			cancel()
		case <-done:
		}
	}()
	return ctx, func() os.Signal {
		close(done)
		signal.Stop(sigc)
		cancel()
		if s, ok := got.Load().(os.Signal); ok {
			return s
		}
		return nil
	}
}
