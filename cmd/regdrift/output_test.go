package main

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func writeString(s string) func(io.Writer) error {
	return func(w io.Writer) error { _, err := io.WriteString(w, s); return err }
}

// listDir returns the names and contents of the files in dir.
func listDir(t *testing.T, dir string) map[string]string {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	m := map[string]string{}
	for _, e := range ents {
		b, err := os.ReadFile(filepath.Join(dir, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		m[e.Name()] = string(b)
	}
	return m
}

// TestOutputsAllOrNone injects a failure before each rename of a commit and
// checks that the directory is left exactly as it was: old files restored,
// no new file, no temporary.
func TestOutputsAllOrNone(t *testing.T) {
	names := []string{"a.csv", "b.png", "c.json"}
	for fail := range names {
		dir := t.TempDir()
		other := t.TempDir()
		os.WriteFile(filepath.Join(dir, "a.csv"), []byte("old a"), 0o644)
		os.WriteFile(filepath.Join(other, "d.toml"), []byte("old d"), 0o644)
		before, beforeOther := listDir(t, dir), listDir(t, other)
		commitHook = func(i int) error {
			if i == fail {
				return errors.New("injected")
			}
			return nil
		}
		o, err := newOutputs(dir)
		if err != nil {
			t.Fatal(err)
		}
		for _, n := range names {
			if err := o.file(n, writeString("new "+n)); err != nil {
				t.Fatal(err)
			}
		}
		if err := o.fileAt(filepath.Join(other, "d.toml"), writeString("new d")); err != nil {
			t.Fatal(err)
		}
		err = o.commit()
		o.abort()
		commitHook = nil
		if err == nil {
			t.Fatalf("failure at rename %d: commit succeeded", fail)
		}
		if got := listDir(t, dir); !equalMaps(got, before) {
			t.Errorf("failure at rename %d: directory %v, want %v", fail, got, before)
		}
		if got := listDir(t, other); !equalMaps(got, beforeOther) {
			t.Errorf("failure at rename %d: other directory %v, want %v", fail, got, beforeOther)
		}
	}
	// And without a failure every file appears, the old one replaced.
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "a.csv"), []byte("old a"), 0o644)
	paths, err := writeAll(dir, outFile{"a.csv", writeString("new a")}, outFile{"b.png", writeString("new b")})
	if err != nil {
		t.Fatal(err)
	}
	want := map[string]string{"a.csv": "new a", "b.png": "new b"}
	if got := listDir(t, dir); !equalMaps(got, want) {
		t.Errorf("after commit: %v, want %v", got, want)
	}
	if len(paths) != 2 || filepath.Base(paths[1]) != "b.png" {
		t.Errorf("paths %v", paths)
	}
}

// TestOutputsWriteFailure: a writer that fails leaves no file behind.
func TestOutputsWriteFailure(t *testing.T) {
	dir := t.TempDir()
	_, err := writeAll(dir, outFile{"a.csv", writeString("a")},
		outFile{"b.csv", func(io.Writer) error { return errors.New("disk full") }})
	if err == nil || !strings.Contains(err.Error(), "disk full") {
		t.Fatalf("err = %v", err)
	}
	if got := listDir(t, dir); len(got) != 0 {
		t.Errorf("left behind: %v", got)
	}
}

func TestOutputsSamePathTwice(t *testing.T) {
	dir := t.TempDir()
	_, err := writeAll(dir, outFile{"a.csv", writeString("a")}, outFile{"a.csv", writeString("b")})
	if !errors.Is(err, errBadInput) {
		t.Fatalf("err = %v, want bad input", err)
	}
	if got := listDir(t, dir); len(got) != 0 {
		t.Errorf("left behind: %v", got)
	}
}

func TestOutputsRemoveStale(t *testing.T) {
	dir := t.TempDir()
	stale := filepath.Join(dir, ".map.png"+tempMarker+"123")
	fresh := filepath.Join(dir, ".sites.csv"+tempMarker+"456")
	keep := filepath.Join(dir, "notes.txt")
	for _, p := range []string{stale, fresh, keep} {
		os.WriteFile(p, []byte("x"), 0o644)
	}
	old := time.Now().Add(-2 * staleAge)
	os.Chtimes(stale, old, old)
	if _, err := newOutputs(dir); err != nil {
		t.Fatal(err)
	}
	got := listDir(t, dir)
	if _, ok := got[filepath.Base(stale)]; ok {
		t.Error("stale temporary not removed")
	}
	for _, p := range []string{fresh, keep} {
		if _, ok := got[filepath.Base(p)]; !ok {
			t.Errorf("%s removed", p)
		}
	}
}

// TestOutDirChecked: an -o that cannot be a directory is bad input before
// any work starts; fit refuses to write its contributors over its own outputs.
func TestOutDirChecked(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "file")
	os.WriteFile(file, []byte("x"), 0o644)
	for _, args := range [][]string{
		{"map", "testdata/small.toml", "-o", file},
		{"map", "testdata/small.toml", "-o", filepath.Join(file, "sub")},
		{"fit", "../../samples/twocore-targets.csv", "-o", dir, "--contributors", filepath.Join(dir, "fit.csv")},
	} {
		code, _, errw := run(t, args...)
		if code != exitBadInput {
			t.Errorf("%v: exit %d, want 2 (%s)", args, code, errw)
		}
	}
	if got := listDir(t, dir); len(got) != 1 {
		t.Errorf("left behind: %v", got)
	}
}

func equalMaps(a, b map[string]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if w, ok := b[k]; !ok || w != v {
			return false
		}
	}
	return true
}

// TestOutputsConcurrentCommits: two runs committing into one directory at
// once end with one run's complete set, never a mix (the directory lock).
func TestOutputsConcurrentCommits(t *testing.T) {
	dir := t.TempDir()
	commitHook = func(int) error { time.Sleep(20 * time.Millisecond); return nil }
	defer func() { commitHook = nil }()
	names := []string{"a.csv", "b.png", "c.json", "d.csv"}
	done := make(chan error, 2)
	for _, id := range []string{"one", "two"} {
		go func() {
			var files []outFile
			for _, n := range names {
				files = append(files, outFile{n, writeString(id)})
			}
			_, err := writeAll(dir, files...)
			done <- err
		}()
	}
	for range 2 {
		if err := <-done; err != nil {
			t.Fatal(err)
		}
	}
	got := listDir(t, dir)
	if len(got) != len(names) {
		t.Fatalf("files %v", got)
	}
	for _, n := range names {
		if got[n] != got[names[0]] {
			t.Errorf("mixed set: %v", got)
			break
		}
	}
}
