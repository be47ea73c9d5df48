package main

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"syscall"
	"time"
)

// outputs is the set of files one run writes, committed together.
//
// The guarantee: every file is first written in full to a temporary file
// beside its final name. Nothing visible changes until commit, which moves
// any existing file of the same name aside, renames every temporary into
// place and then removes what it moved aside. A failure at any point before
// commit returns (a write error, a rename refused, an interrupt) leaves every
// target path as it was before the run: the new files are removed and the
// old ones put back. Only a crash of the process or the machine in the middle
// of commit's renames, a handful of system calls, can leave a mixed set; the
// files moved aside then stay beside their names, with the temporary prefix,
// and the next run in that directory removes them once they are an hour old.
type outputs struct {
	dir   string
	files []outputFile
}

type outputFile struct {
	temp, final string
	backup      string // the previous file at final, moved aside during commit
}

// tempMarker is in the name of every temporary file a run leaves beside its
// outputs, so that a later run can recognise stale ones.
const tempMarker = ".regdrift-tmp-"

// staleAge is how old a temporary file must be before a later run removes
// it: older than any run's writing phase, which takes seconds.
const staleAge = time.Hour

// commitHook, when set (by tests), is called before the i-th rename of a
// commit; an error from it is treated as that rename failing.
var commitHook func(i int) error

// fileHook, when set (by tests), is called after each file is written to
// its temporary name.
var fileHook func(name string)

// newOutputs prepares dir (creating it if needed) and removes stale
// temporary files that an earlier, crashed run left there.
func newOutputs(dir string) (*outputs, error) {
	if dir == "" {
		dir = defaultOutDir
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("output directory: %w", err)
	}
	removeStale(dir)
	return &outputs{dir: dir}, nil
}

// removeStale removes temporary files of this program's naming older than
// staleAge from dir.
func removeStale(dir string) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return
	}
	for _, e := range ents {
		if !e.Type().IsRegular() || !strings.Contains(e.Name(), tempMarker) {
			continue
		}
		if info, err := e.Info(); err == nil && time.Since(info.ModTime()) > staleAge {
			os.Remove(filepath.Join(dir, e.Name()))
		}
	}
}

// file writes one output named name in the run's directory.
func (o *outputs) file(name string, write func(w io.Writer) error) error {
	return o.fileAt(filepath.Join(o.dir, name), write)
}

// fileAt writes one output at path, which may lie outside the run's
// directory (its directory must exist). Two outputs of one run may not share
// a path.
func (o *outputs) fileAt(path string, write func(w io.Writer) error) error {
	if interrupted.Load() {
		return errInterrupted
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		return err
	}
	for _, f := range o.files {
		if fa, _ := filepath.Abs(f.final); fa == abs {
			return badInput(fmt.Errorf("%s: two outputs of this run would have the same name", path))
		}
	}
	dir, name := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+name+tempMarker+"*")
	if err != nil {
		return err
	}
	o.files = append(o.files, outputFile{temp: f.Name(), final: path})
	if err := writeTemp(f, write); err != nil {
		return fmt.Errorf("writing %s: %w", name, err)
	}
	if fileHook != nil {
		fileHook(name)
	}
	return nil
}

func writeTemp(f *os.File, write func(w io.Writer) error) error {
	if err := f.Chmod(0o644); err != nil {
		f.Close()
		return err
	}
	bw := bufio.NewWriterSize(f, 1<<16)
	if err := write(bw); err != nil {
		f.Close()
		return err
	}
	if err := bw.Flush(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// commit moves every written file into place, all or none (see outputs).
func (o *outputs) commit() error {
	if interrupted.Load() {
		o.abort()
		return errInterrupted
	}
	unlock, err := lockDirs(o.files)
	if err != nil {
		o.abort()
		return err
	}
	defer unlock()
	// Move the previous files aside first, so that a failure can put them back.
	for i := range o.files {
		f := &o.files[i]
		if _, err := os.Lstat(f.final); err != nil {
			continue
		}
		b := f.temp + ".old"
		if err := os.Rename(f.final, b); err != nil {
			o.rollback()
			return err
		}
		f.backup = b
	}
	for i := range o.files {
		f := &o.files[i]
		err := error(nil)
		if commitHook != nil {
			err = commitHook(i)
		}
		if err == nil {
			err = os.Rename(f.temp, f.final)
		}
		if err != nil {
			o.rollback()
			return err
		}
		f.temp = ""
	}
	for i := range o.files {
		if b := o.files[i].backup; b != "" {
			os.Remove(b)
			o.files[i].backup = ""
		}
	}
	return nil
}

// rollback undoes a commit that failed part way: the new files are removed
// and the previous ones restored.
func (o *outputs) rollback() {
	for _, f := range o.files {
		if f.temp == "" {
			os.Remove(f.final)
		} else {
			os.Remove(f.temp)
		}
		if f.backup != "" {
			os.Rename(f.backup, f.final)
		}
	}
	o.files = nil
}

// abort removes the temporary files not yet committed. It is safe to call after commit.
func (o *outputs) abort() {
	for _, f := range o.files {
		if f.temp != "" {
			os.Remove(f.temp)
		}
	}
	o.files = nil
}

// paths returns the final paths of the files written, in the order written.
func (o *outputs) paths() []string {
	p := make([]string, len(o.files))
	for i, f := range o.files {
		p[i] = f.final
	}
	return p
}

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

// checkOutDir reports, before a run starts its work, whether its output
// directory can be used: an existing directory that can be written, or a
// path whose nearest existing parent is one.
func checkOutDir(dir string) error {
	if dir == "" || dir == "-" {
		return nil
	}
	p := dir
	for {
		st, err := os.Stat(p)
		if err == nil {
			if !st.IsDir() {
				if p == dir {
					return fmt.Errorf("%s is a file, not a directory", dir)
				}
				return fmt.Errorf("cannot create %s: %s is a file", dir, p)
			}
			if err := syscall.Access(p, 2 /* W_OK */); err != nil {
				return fmt.Errorf("cannot write in %s: %w", p, err)
			}
			return nil
		}
		if !errors.Is(err, fs.ErrNotExist) {
			return err
		}
		parent := filepath.Dir(p)
		if parent == p {
			return nil
		}
		p = parent
	}
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

// lockDirs takes an exclusive lock on every directory the files go into (in
// sorted order, so two runs cannot deadlock), so that two runs committing into
// one directory at once do not interleave their renames: each run's set
// appears whole. The lock is an flock(2) on the directory itself, so it leaves
// no file behind and dies with the process.
func lockDirs(files []outputFile) (unlock func(), err error) {
	seen := map[string]bool{}
	var dirs []string
	for _, f := range files {
		d, err := filepath.Abs(filepath.Dir(f.final))
		if err != nil {
			return nil, err
		}
		if !seen[d] {
			seen[d] = true
			dirs = append(dirs, d)
		}
	}
	sort.Strings(dirs)
	var held []*os.File
	unlock = func() {
		for _, h := range held {
			syscall.Flock(int(h.Fd()), syscall.LOCK_UN)
			h.Close()
		}
	}
	for _, d := range dirs {
		h, err := os.Open(d)
		if err != nil {
			unlock()
			return nil, err
		}
		if err := syscall.Flock(int(h.Fd()), syscall.LOCK_EX); err != nil {
			h.Close()
			unlock()
			return nil, fmt.Errorf("locking %s: %w", d, err)
		}
		held = append(held, h)
	}
	return unlock, nil
}
