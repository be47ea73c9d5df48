package main

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"

	"github.com/regdrift/regdrift/panel"
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

// readTargets reads a measurement file ("-" for stdin) with
// registration.ReadTargetSet, maps it into the panel frame by fr and, for a
// panel size that is not zero, refuses a target off the panel. Its errors
// are bad input. It returns the name messages use for the file.
func readTargets(path string, stdin io.Reader, fr registration.Frame, size panel.Vec) (*registration.TargetSet, string, error) {
	var src io.Reader
	name := path
	// A regular file and standard input are read as a stream, so that the
	// file's bytes are not held beside the targets parsed from them;
	// anything else (a directory, a named pipe, no standard input) goes
	// through readFile and its messages.
	if path == "-" && stdin != nil {
		src, name = bufio.NewReaderSize(stdin, 1<<16), "<stdin>"
	} else if path != "-" {
		if f, err := os.Open(path); err == nil {
			defer f.Close()
			if st, err := f.Stat(); err == nil && st.Mode().IsRegular() {
				src = bufio.NewReaderSize(f, 1<<16)
			}
		}
	}
	if src == nil {
		data, n, err := readFile(path, stdin)
		if err != nil {
			return nil, n, badInput(fmt.Errorf("measurement file: %w", err))
		}
		src, name = bytes.NewReader(data), n
	}
	// The file's errors are bad input; a failure of the set's temporary
	// file is not.
	ts, err := registration.ReadTargetSet(src, name)
	if err != nil {
		if ce := (*registration.CSVError)(nil); errors.As(err, &ce) {
			return nil, name, badInput(err)
		}
		return nil, name, err
	}
	fr.Apply(ts)
	if size.X > 0 && size.Y > 0 {
		if err := registration.CheckOutline(ts, panel.Panel{Size: size}.Outline(), name); err != nil {
			ts.Close()
			if ce := (*registration.CSVError)(nil); errors.As(err, &ce) {
				return nil, name, badInput(err)
			}
			return nil, name, err
		}
	}
	return ts, name, nil
}
