package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/samples"
)

// TestBadInput runs the job package's corpus of broken job files
// (panel/job/testdata/bad-input.json, edits of samples/same-core.toml)
// through the command line: each exits 2 with the file, line and key named,
// and leaves nothing behind. The job package checks the errors themselves.
func TestBadInput(t *testing.T) {
	b, err := os.ReadFile("../../panel/job/testdata/bad-input.json")
	if err != nil {
		t.Fatal(err)
	}
	var cases []struct {
		Name, Old, New string
		Line           int
		Key            string
	}
	if err := json.Unmarshal(b, &cases); err != nil {
		t.Fatal(err)
	}
	base, err := samples.FS.ReadFile("same-core.toml")
	if err != nil {
		t.Fatal(err)
	}
	for _, tt := range cases {
		t.Run(tt.Name, func(t *testing.T) {
			if !strings.Contains(string(base), tt.Old) {
				t.Fatalf("sample has no %q", tt.Old)
			}
			bad := strings.Replace(string(base), tt.Old, tt.New, 1)
			dir := t.TempDir()
			jobPath := filepath.Join(dir, "bad.toml")
			os.WriteFile(jobPath, []byte(bad), 0o644)
			if _, err := loadJob(jobPath, nil); !errors.Is(err, errBadInput) {
				t.Errorf("error %v does not exit 2", err)
			}
			out := filepath.Join(dir, "out")
			code, _, stderr := run(t, "map", jobPath, "-o", out)
			if want := fmt.Sprintf("bad.toml:%d: %s", tt.Line, tt.Key); code != 2 || !strings.Contains(stderr, want) {
				t.Errorf("map: exit %d, stderr %q, want 2 and %q", code, stderr, want)
			}
			if ents, _ := os.ReadDir(out); len(ents) != 0 {
				t.Errorf("map left output behind: %v", ents)
			}
		})
	}
}

// TestLoadJobBadFiles checks that a bad placement file and a missing job
// file are bad input too (exit 2), not failures.
func TestLoadJobBadFiles(t *testing.T) {
	dir := t.TempDir()
	base, _ := samples.FS.ReadFile("same-core.toml")
	s := string(base)
	a, b := strings.Index(s, "[[part]]"), strings.Index(s, "[[contributor]]")
	jobPath := filepath.Join(dir, "job.toml")
	os.WriteFile(jobPath, []byte(s[:a]+"[[sites]]\nfile = \"placements.csv\"\n\n"+s[b:]), 0o644)
	for _, tt := range []struct{ name, csv, want string }{
		{"bad cell", "name,x [in],y [in],angle [deg],section\nK1,abc,4.25,0,hybrid\n", `row 2, column "x"`},
		{"no such section", "name,x [in],y [in],angle [deg],section\nK1,1,-2,90,nosuch\n", "row 2"},
		{"missing placement file", "", "placements.csv"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			os.Remove(filepath.Join(dir, "placements.csv"))
			if tt.csv != "" {
				os.WriteFile(filepath.Join(dir, "placements.csv"), []byte(tt.csv), 0o644)
			}
			_, err := loadJob(jobPath, nil)
			if err == nil || !strings.Contains(err.Error(), tt.want) || !errors.Is(err, errBadInput) {
				t.Errorf("error %v, want bad input mentioning %q", err, tt.want)
			}
		})
	}
	_, err := loadJob(filepath.Join(dir, "none.toml"), nil)
	if err == nil || !strings.HasPrefix(err.Error(), "job file: ") || !errors.Is(err, errBadInput) {
		t.Errorf("missing job file: error %v, want bad input", err)
	}
}
