package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf16"

	"github.com/regdrift/regdrift/samples"
)

// badCase is an entry of panel/job/testdata/bad-input.json (the job
// package documents the fields).
type badCase struct {
	Name, Old, New string
	Line           int
	Key            string
	Main, File     string
	Files          map[string]string
	Encodings      map[string]string
	Row            int
	Column         string
	Contains       string
}

// encodeUTF16 writes s as UTF-16 with its byte-order mark (Unicode
// Standard 15.0, section 23.8, table 23-4), or leaves it for "".
func encodeUTF16(s, enc string) []byte {
	if enc == "" {
		return []byte(s)
	}
	b := []byte{0xFE, 0xFF}
	if enc == "utf-16le" {
		b = []byte{0xFF, 0xFE}
	}
	for _, u := range utf16.Encode([]rune(s)) {
		if enc == "utf-16le" {
			b = append(b, byte(u), byte(u>>8))
		} else {
			b = append(b, byte(u>>8), byte(u))
		}
	}
	return b
}

// TestBadInput runs the job package's corpus of broken job files
// (panel/job/testdata/bad-input.json, edits of samples/same-core.toml with
// the files they include or read) through the command line: each exits 2
// with the file and line and key (or CSV row and column) named, and leaves
// nothing behind. The job package checks the errors themselves.
func TestBadInput(t *testing.T) {
	b, err := os.ReadFile("../../panel/job/testdata/bad-input.json")
	if err != nil {
		t.Fatal(err)
	}
	var cases []badCase
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
			os.WriteFile(filepath.Join(dir, "bad.toml"), encodeUTF16(bad, tt.Encodings["bad.toml"]), 0o644)
			for name, text := range tt.Files {
				os.WriteFile(filepath.Join(dir, name), encodeUTF16(text, tt.Encodings[name]), 0o644)
			}
			main := tt.Main
			if main == "" {
				main = "bad.toml"
			}
			jobPath := filepath.Join(dir, main)
			if _, err := loadJob(jobPath, nil); !errors.Is(err, errBadInput) {
				t.Errorf("error %v does not exit 2", err)
			}
			file := tt.File
			if file == "" {
				file = main
			}
			want := fmt.Sprintf("%s:%d: %s", file, tt.Line, tt.Key)
			switch {
			case tt.Column != "":
				want = fmt.Sprintf("%s: row %d, column %q", file, tt.Row, tt.Column)
			case tt.Row > 0:
				want = fmt.Sprintf("%s: row %d: ", file, tt.Row)
			case tt.Key == "":
				want = fmt.Sprintf("%s:%d: ", file, tt.Line)
			}
			out := filepath.Join(dir, "out")
			code, _, stderr := run(t, "map", jobPath, "-o", out)
			if code != 2 || !strings.Contains(stderr, want) || !strings.Contains(stderr, tt.Contains) {
				t.Errorf("map: exit %d, stderr %q, want 2 and %q, %q", code, stderr, want, tt.Contains)
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
