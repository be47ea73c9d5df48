package main

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/samples"
)

func TestLoadSamples(t *testing.T) {
	ents, err := samples.FS.ReadDir(".")
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range ents {
		if !strings.HasSuffix(e.Name(), ".toml") {
			continue
		}
		t.Run(e.Name(), func(t *testing.T) {
			data, _ := samples.FS.ReadFile(e.Name())
			j, err := loadJobData(data, e.Name(), ".")
			if err != nil {
				t.Fatal(err)
			}
			if len(j.Sites) == 0 || len(j.Sections) == 0 || j.Model == nil {
				t.Fatalf("empty job: %d sites, %d sections", len(j.Sites), len(j.Sections))
			}
		})
	}
}

// TestBadInput runs a corpus of broken job files: each must fail with a
// message naming the file, the line and the key.
func TestBadInput(t *testing.T) {
	base, err := samples.FS.ReadFile("same-core.toml")
	if err != nil {
		t.Fatal(err)
	}
	src := string(base)
	tests := []struct {
		name, old, new string
		line           int
		key            string
		kind           error
	}{
		{"unit missing", `border = "0.8 in"`, `border = 0.8`, 9, "panel.border", ErrValue},
		{"unknown unit", `border = "0.8 in"`, `border = "0.8 furlong"`, 9, "panel.border", nil},
		{"unknown key", `border = "0.8 in"`, `boarder = "0.8 in"`, 9, "panel.boarder", ErrUnknownKey},
		{"unknown layer", `{ layer = "L4", width`, `{ layer = "L9", width`, 32, "section[0].traces[1].layer", nil},
		{"negative thickness", `{ core = "4 mil", er = 3.00, name = "C2" }`, `{ core = "-4 mil", er = 3.00, name = "C2" }`, 20, "stackup.layers[5].core", ErrValue},
		{"er below one", `{ prepreg = "26 mil", er = 3.55 },
  { copper = "L3"`, `{ prepreg = "26 mil", er = 0.5 },
  { copper = "L3"`, 18, "stackup.layers[3].er", ErrValue},
		{"site in border", `center = ["0 in", "0 in"]`, `center = ["2 in", "0 in"]`, 49, "array[0]", nil},
		{"NaN", `scale_x = { mean = "-180 ppm", sigma = "40 ppm" }`, `scale_x = { mean = "NaN ppm", sigma = "40 ppm" }`, 59, "contributor[0].scale_x.mean", nil},
		{"negative sigma", `scale_y = { mean = "-120 ppm", sigma = "35 ppm" }`, `scale_y = { mean = "-120 ppm", sigma = "-35 ppm" }`, 60, "contributor[0].scale_y", nil},
		{"contributor layer", `layers  = ["L3", "L4"]`, `layers  = ["L3", "L7"]`, 58, "contributor[0].layers[1]", ErrValue},
		{"unknown term", `rotation   = { sigma = "8 urad" }`, `rotaton   = { sigma = "8 urad" }`, 67, "contributor[1].rotaton", ErrUnknownKey},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if !strings.Contains(src, tt.old) {
				t.Fatalf("sample has no %q", tt.old)
			}
			bad := strings.Replace(src, tt.old, tt.new, 1)
			_, err := loadJobData([]byte(bad), "bad.toml", ".")
			if err == nil {
				t.Fatal("accepted")
			}
			var pe *ParseError
			if !errors.As(err, &pe) {
				t.Fatalf("not a ParseError: %v", err)
			}
			if pe.File != "bad.toml" || pe.Line != tt.line || pe.Key != tt.key {
				t.Errorf("got file %q line %d key %q, want line %d key %q: %v", pe.File, pe.Line, pe.Key, tt.line, tt.key, err)
			}
			if tt.kind != nil && !errors.Is(err, tt.kind) {
				t.Errorf("error %v is not %v", err, tt.kind)
			}
			if !errors.Is(err, errBadInput) {
				t.Errorf("error %v does not exit 2", err)
			}
			// The same file through the command line: exit 2, the place named,
			// and nothing written.
			dir := t.TempDir()
			job := filepath.Join(dir, "bad.toml")
			os.WriteFile(job, []byte(bad), 0o644)
			out := filepath.Join(dir, "out")
			code, _, stderr := run(t, "map", job, "-o", out)
			if want := fmt.Sprintf("bad.toml:%d: %s", tt.line, tt.key); code != 2 || !strings.Contains(stderr, want) {
				t.Errorf("map: exit %d, stderr %q, want 2 and %q", code, stderr, want)
			}
			if ents, _ := os.ReadDir(out); len(ents) != 0 {
				t.Errorf("map left output behind: %v", ents)
			}
		})
	}
}

func TestInclude(t *testing.T) {
	dir := t.TempDir()
	base, _ := samples.FS.ReadFile("same-core.toml")
	s := string(base)
	i := strings.Index(s, "[[contributor]]")
	os.WriteFile(filepath.Join(dir, "contrib.toml"), []byte(s[i:]), 0o644)
	os.WriteFile(filepath.Join(dir, "job.toml"), []byte("include = [\"contrib.toml\"]\n"+s[:i]), 0o644)
	j, err := loadJob(filepath.Join(dir, "job.toml"), nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(j.Model.Contributors) != 3 {
		t.Fatalf("%d contributors", len(j.Model.Contributors))
	}
}

func TestPlacements(t *testing.T) {
	dir := t.TempDir()
	base, _ := samples.FS.ReadFile("same-core.toml")
	s := string(base)
	a := strings.Index(s, "[[part]]")
	b := strings.Index(s, "[[contributor]]")
	job := s[:a] + "[[sites]]\nfile = \"placements.csv\"\n\n" + s[b:]
	os.WriteFile(filepath.Join(dir, "job.toml"), []byte(job), 0o644)
	csvText := "name,x [in],y [in],angle [deg],section\nK1,1.5,-2,90,hybrid\nK2,-3,4.25,0,hybrid\n"
	os.WriteFile(filepath.Join(dir, "placements.csv"), []byte(csvText), 0o644)
	j, err := loadJob(filepath.Join(dir, "job.toml"), nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(j.Sites) != 2 || j.Sites[1].Name != "K2" || math.Abs(j.Sites[1].Pos.X+3*0.0254) > 1e-15 || j.Sites[0].U.Y != 1 {
		t.Fatalf("sites %+v", j.Sites)
	}
	for _, bad := range []struct{ csv, want string }{
		{"name,x [in],y [in],angle [deg],section\nK1,1.5,-2,90,hybrid\nK2,abc,4.25,0,hybrid\n", `row 3, column "x"`},
		{"name,x,y [in],angle [deg],section\nK1,1.5,-2,90,hybrid\n", `"x"`},
		{"name,x [in],y [in],angle [deg],section\nK1,8.9,-2,90,hybrid\n", "border"},
		{"name,x [in],y [in],angle [deg],section\nK1,1,-2,90,nosuch\n", "row 2"},
	} {
		os.WriteFile(filepath.Join(dir, "placements.csv"), []byte(bad.csv), 0o644)
		_, err := loadJob(filepath.Join(dir, "job.toml"), nil)
		if err == nil || !strings.Contains(err.Error(), bad.want) || !errors.Is(err, errBadInput) {
			t.Errorf("placements %q: error %v, want it to mention %q", bad.csv, err, bad.want)
		}
	}
}

func FuzzLoadJob(f *testing.F) {
	ents, _ := samples.FS.ReadDir(".")
	for _, e := range ents {
		if strings.HasSuffix(e.Name(), ".toml") {
			b, _ := samples.FS.ReadFile(e.Name())
			f.Add(string(b))
		}
	}
	f.Add("[panel]\nsize = [\"1 in\"]\n")
	f.Fuzz(func(t *testing.T, src string) {
		j, err := loadJobData([]byte(src), "fuzz.toml", "testdata/fuzz-no-files")
		if err != nil {
			if !errors.Is(err, errBadInput) {
				t.Fatalf("error not marked as bad input: %v", err)
			}
			return
		}
		if len(j.Sites) == 0 {
			t.Fatal("accepted a job without sites")
		}
	})
}
