package main

import (
	"errors"
	"io"
	"io/fs"
	"os"

	"github.com/regdrift/regdrift/panel/job"
	"github.com/regdrift/regdrift/registration"
)

// Job is a loaded job file (package job).
type Job = job.Job

// loadJob reads a job file ("-" for stdin) with job.Load and marks its input
// errors (a *job.ParseError, a *registration.CSVError of a placement or
// residual file, a file that cannot be read) as bad input, exit status 2.
func loadJob(path string, stdin io.Reader) (*Job, error) {
	j, err := job.Load(path, stdin)
	if err != nil {
		var pe *job.ParseError
		var ce *registration.CSVError
		var fe *fs.PathError
		if errors.As(err, &pe) || errors.As(err, &ce) || errors.As(err, &fe) {
			return nil, badInput(err)
		}
		return nil, err
	}
	return j, nil
}

// readFile returns the bytes of path, or of standard input for "-", with the
// name messages use for it.
func readFile(path string, stdin io.Reader) ([]byte, string, error) {
	if path == "-" {
		if stdin == nil {
			return nil, "<stdin>", errors.New("no standard input")
		}
		b, err := io.ReadAll(stdin)
		return b, "<stdin>", err
	}
	b, err := os.ReadFile(path)
	return b, path, err
}
