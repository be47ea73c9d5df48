package main

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// outputs collects the files of one run in a directory. Each file is written
// to a temporary name first; commit renames them all into place, abort removes
// them, so that a failed run leaves no half-written output behind.
type outputs struct {
	dir   string
	temps []string
	names []string
}

// newOutputs prepares dir (creating it if needed).
func newOutputs(dir string) (*outputs, error) {
	if dir == "" {
		dir = "regdrift-out"
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("output directory: %w", err)
	}
	return &outputs{dir: dir}, nil
}

// file writes one output through write into a temporary file beside its final name.
func (o *outputs) file(name string, write func(w io.Writer) error) error {
	f, err := os.CreateTemp(o.dir, "."+name+".tmp*")
	if err != nil {
		return err
	}
	if err := f.Chmod(0o644); err != nil {
		f.Close()
		os.Remove(f.Name())
		return err
	}
	o.temps = append(o.temps, f.Name())
	o.names = append(o.names, filepath.Join(o.dir, name))
	bw := bufio.NewWriterSize(f, 1<<16)
	if err := write(bw); err != nil {
		f.Close()
		return fmt.Errorf("writing %s: %w", name, err)
	}
	if err := bw.Flush(); err != nil {
		f.Close()
		return fmt.Errorf("writing %s: %w", name, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("writing %s: %w", name, err)
	}
	return nil
}

// commit moves every written file into place.
func (o *outputs) commit() error {
	for i, t := range o.temps {
		if err := os.Rename(t, o.names[i]); err != nil {
			o.abort()
			return err
		}
	}
	o.temps = nil
	return nil
}

// abort removes the temporary files not yet committed. It is safe to call after commit.
func (o *outputs) abort() {
	for _, t := range o.temps {
		os.Remove(t)
	}
	o.temps = nil
}

// paths returns the final paths of the files written.
func (o *outputs) paths() []string { return o.names }

// outFile is one file of a run's output and the function that writes it.
type outFile struct {
	name  string
	write func(io.Writer) error
}

// writeAll writes files into dir together: every file appears, or none does.
// It returns their paths.
func writeAll(dir string, files ...outFile) ([]string, error) {
	o, err := newOutputs(dir)
	if err != nil {
		return nil, err
	}
	defer o.abort()
	for _, f := range files {
		if err := o.file(f.name, f.write); err != nil {
			return nil, err
		}
	}
	if err := o.commit(); err != nil {
		return nil, err
	}
	return o.paths(), nil
}

// report prints a run's summary on stdout: v as JSON when asJSON is set,
// otherwise the table that table prints.
func report(std stdio, asJSON bool, v any, table func()) error {
	if asJSON {
		return writeJSON(std.out, v)
	}
	table()
	return nil
}
