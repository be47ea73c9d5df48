package job

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// Job is a loaded, validated job file.
type Job struct {
	File      string // the main file as named by the user
	Title     string
	Layout    panel.Layout
	Instances []panel.Instance
	Sites     []panel.Site
	Stackup   section.Stackup
	Sections  []*section.Section // in file order
	Model     *registration.Model
	// Process holds the [[variation]] terms; nil when there are none.
	Process *process.Model
	// Sources are the job files read, each with its bytes as read: the
	// main file first, then its includes in the order they were read.
	Sources []Source
	// sectionSrc is the source of each section, parallel to Sections, so that
	// a solver error can name its file line.
	sectionSrc []source
}

// Source is one job file as it was read.
type Source struct {
	Name string // as in messages: the main file as named, an include joined to its directory
	Data []byte
}

// Section returns the section named name, or nil.
func (j *Job) Section(name string) *section.Section {
	for _, s := range j.Sections {
		if s.Name == name {
			return s
		}
	}
	return nil
}

// SectionError returns err as a *ParseError at key within section i of
// Sections, naming the file and line the section was defined on. key is
// relative to the section, as the keys of a section.FieldError are
// ("traces[0].width"); "" names the section itself. It lets an error found
// after loading (by the field solver, say) point into the job file.
func (j *Job) SectionError(i int, key string, err error) error {
	if i < 0 || i >= len(j.sectionSrc) {
		return &ParseError{File: j.File, Key: key, Err: err}
	}
	return j.sectionSrc[i].err(key, err)
}

// ArrayExtents returns, per array of the layout, the rectangle its parts
// cover (panel.ArrayExtents).
func (j *Job) ArrayExtents() []panel.Rect {
	return panel.ArrayExtents(len(j.Layout.Arrays), j.Instances)
}

// Load reads and validates the job file at path and everything it includes;
// path "-" reads stdin, which messages call "<stdin>", and then includes are
// found relative to the current directory.
//
// Every error Load returns is about its input: a *ParseError naming the file,
// line and key; a *registration.CSVError naming the row and column of a
// placement or residual file; or a failure to read the job file or a
// placement file (wrapping the *fs.PathError).
func Load(path string, stdin io.Reader) (*Job, error) {
	data, name, err := readFile(path, stdin)
	if err != nil {
		return nil, fmt.Errorf("job file: %w", err)
	}
	return Parse(data, name, filepath.Dir(path))
}

// Parse validates a job file held in data; name is the file's name for
// messages and dir the directory its includes, placement and residual files
// are relative to. Its errors are those of Load.
func Parse(data []byte, name, dir string) (*Job, error) {
	j := &Job{File: name}
	l := &loader{job: j, seen: map[string]string{}}
	// The main file heads the chain of includes, so that a file including
	// it is a cycle too; standard input has no path and cannot be included.
	var chain []chainLink
	if name != "<stdin>" {
		if abs, err := filepath.Abs(filepath.Join(dir, filepath.Base(name))); err == nil {
			chain = []chainLink{{abs, name}}
		}
	}
	if err := l.file(data, name, dir, 0, chain); err != nil {
		return nil, err
	}
	if err := l.finish(); err != nil {
		return nil, err
	}
	return j, nil
}

// readFile returns the bytes of path, or of standard input for "-".
func readFile(path string, stdin io.Reader) ([]byte, string, error) {
	if path == "-" {
		if stdin == nil {
			return nil, "<stdin>", &fs.PathError{Op: "read", Path: "<stdin>", Err: errors.New("no standard input")}
		}
		b, err := io.ReadAll(stdin)
		return b, "<stdin>", err
	}
	b, err := os.ReadFile(path)
	return b, path, err
}
