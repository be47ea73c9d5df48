package job

import (
	"encoding/json"
	"errors"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel/textfile"
	"github.com/regdrift/regdrift/panel/unit"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/samples"
)

func TestLoadSamples(t *testing.T) {
	ents, err := samples.FS.ReadDir(".")
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range ents {
		if !strings.HasSuffix(e.Name(), ".toml") || strings.HasSuffix(e.Name(), ".inc.toml") {
			continue // an included fragment is not a job
		}
		t.Run(e.Name(), func(t *testing.T) {
			data, _ := samples.FS.ReadFile(e.Name())
			j, err := Parse(data, e.Name(), filepath.Join("..", "..", "samples"))
			if err != nil {
				t.Fatal(err)
			}
			if len(j.Sites) == 0 || len(j.Sections) == 0 || j.Model == nil {
				t.Fatalf("empty job: %d sites, %d sections", len(j.Sites), len(j.Sections))
			}
		})
	}
}

// badCase is one entry of testdata/bad-input.json: an edit of
// samples/same-core.toml that breaks it, with the other files it needs, and
// where the error must point.
type badCase struct {
	Name, Old, New string
	Line           int
	Key            string
	Kind           string            // the sentinel the error must wrap, if any
	Main           string            // the file loaded; "" is bad.toml (the edited sample)
	File           string            // the file the error names (base name); "" is the loaded file
	Files          map[string]string // further files written beside bad.toml: includes, CSV files
	Encodings      map[string]string // file → "utf-16le" or "utf-16be": the file is written so (bad.toml too)
	Row            int               // for an error in a CSV file: its row ...
	Column         string            // ... and column
	Contains       string            // a phrase the message must hold
}

var kinds = map[string]error{"": nil, "ErrValue": ErrValue, "ErrUnknownKey": ErrUnknownKey, "ErrMissing": ErrMissing}

// badInputs returns the corpus, and bad.toml of each case (the sample with
// its edit applied, in its encoding).
func badInputs(t testing.TB) ([]badCase, []string) {
	t.Helper()
	b, err := os.ReadFile("testdata/bad-input.json")
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
	files := make([]string, len(cases))
	for i, c := range cases {
		if !strings.Contains(string(base), c.Old) {
			t.Fatalf("%s: the sample has no %q", c.Name, c.Old)
		}
		if _, ok := kinds[c.Kind]; !ok {
			t.Fatalf("%s: unknown kind %q", c.Name, c.Kind)
		}
		files[i] = encode(t, strings.Replace(string(base), c.Old, c.New, 1), c.Encodings["bad.toml"])
	}
	return cases, files
}

// encode writes s as UTF-16 with its byte-order mark, or leaves it UTF-8
// for "".
func encode(t testing.TB, s, enc string) string {
	switch enc {
	case "":
		return s
	case "utf-16le", "utf-16be":
		return string(textfile.EncodeUTF16(s, enc == "utf-16be"))
	}
	t.Fatalf("unknown encoding %q", enc)
	return ""
}

// writeCase writes bad.toml and the case's other files into dir and returns
// the path of the file to load.
func writeCase(t testing.TB, dir string, c badCase, bad string) string {
	t.Helper()
	if err := os.WriteFile(filepath.Join(dir, "bad.toml"), []byte(bad), 0o644); err != nil {
		t.Fatal(err)
	}
	for name, text := range c.Files {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(encode(t, text, c.Encodings[name])), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	main := c.Main
	if main == "" {
		main = "bad.toml"
	}
	return filepath.Join(dir, main)
}

// goNames are fragments of Go type names, which no message may show.
var goNames = []string{"job.raw", "interface {}", "main.", "[]string", "[]int"}

// TestBadInput runs a corpus of broken job files: each must fail with a
// *ParseError naming the file, the line and the key, or a
// *registration.CSVError naming the CSV file's row and column.
func TestBadInput(t *testing.T) {
	cases, files := badInputs(t)
	for i, tt := range cases {
		t.Run(tt.Name, func(t *testing.T) {
			path := writeCase(t, t.TempDir(), tt, files[i])
			_, err := Load(path, nil)
			if err == nil {
				t.Fatal("accepted")
			}
			file := tt.File
			if file == "" {
				file = filepath.Base(path)
			}
			if tt.Row > 0 || tt.Column != "" {
				var ce *registration.CSVError
				if !errors.As(err, &ce) {
					t.Fatalf("not a CSVError: %v", err)
				}
				if filepath.Base(ce.File) != file || ce.Row != tt.Row || ce.Column != tt.Column {
					t.Errorf("got file %q row %d column %q, want %s row %d column %q: %v", ce.File, ce.Row, ce.Column, file, tt.Row, tt.Column, err)
				}
			} else {
				var pe *ParseError
				if !errors.As(err, &pe) {
					t.Fatalf("not a ParseError: %v", err)
				}
				if filepath.Base(pe.File) != file || pe.Line != tt.Line || pe.Key != tt.Key {
					t.Errorf("got file %q line %d key %q, want %s line %d key %q: %v", pe.File, pe.Line, pe.Key, file, tt.Line, tt.Key, err)
				}
			}
			if k := kinds[tt.Kind]; k != nil && !errors.Is(err, k) {
				t.Errorf("error %v is not %v", err, k)
			}
			if !strings.Contains(err.Error(), tt.Contains) {
				t.Errorf("error %q does not say %q", err, tt.Contains)
			}
			for _, g := range goNames {
				if strings.Contains(err.Error(), g) {
					t.Errorf("error %q shows a Go name (%q)", err, g)
				}
			}
		})
	}
}

func TestLoadStdin(t *testing.T) {
	data, _ := samples.FS.ReadFile("same-core.toml")
	j, err := Load("-", strings.NewReader(string(data)))
	if err != nil {
		t.Fatal(err)
	}
	if j.File != "<stdin>" {
		t.Errorf("File = %q, want <stdin>", j.File)
	}
	_, err = Load("-", strings.NewReader(strings.Replace(string(data), `border = "0.8 in"`, `border = 0.8`, 1)))
	var pe *ParseError
	if !errors.As(err, &pe) || pe.File != "<stdin>" || pe.Line != 9 {
		t.Errorf("error %v, want a ParseError at <stdin>:9", err)
	}
	_, err = Load(filepath.Join(t.TempDir(), "none.toml"), nil)
	var pathErr *fs.PathError
	if !errors.As(err, &pathErr) || !strings.HasPrefix(err.Error(), "job file: ") {
		t.Errorf("missing file: error %v, want a *fs.PathError", err)
	}
}

func TestInclude(t *testing.T) {
	dir := t.TempDir()
	base, _ := samples.FS.ReadFile("same-core.toml")
	s := string(base)
	i := strings.Index(s, "[[contributor]]")
	os.WriteFile(filepath.Join(dir, "contrib.toml"), []byte(s[i:]), 0o644)
	os.WriteFile(filepath.Join(dir, "job.toml"), []byte("include = [\"contrib.toml\"]\n"+s[:i]), 0o644)
	j, err := Load(filepath.Join(dir, "job.toml"), nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(j.Model.Contributors) != 3 {
		t.Fatalf("%d contributors", len(j.Model.Contributors))
	}
	// Sources hold the files as read, the main one first.
	main := "include = [\"contrib.toml\"]\n" + s[:i]
	if len(j.Sources) != 2 || j.Sources[0].Name != filepath.Join(dir, "job.toml") || string(j.Sources[0].Data) != main ||
		j.Sources[1].Name != filepath.Join(dir, "contrib.toml") || string(j.Sources[1].Data) != s[i:] {
		t.Errorf("sources %d, want job.toml and contrib.toml as written", len(j.Sources))
	}
	// An error in the included file names that file and its line.
	bad := strings.Replace(s[i:], `rotation   = { sigma = "8 urad" }`, `rotaton   = { sigma = "8 urad" }`, 1)
	os.WriteFile(filepath.Join(dir, "contrib.toml"), []byte(bad), 0o644)
	_, err = Load(filepath.Join(dir, "job.toml"), nil)
	var pe *ParseError
	if !errors.As(err, &pe) || pe.File != filepath.Join(dir, "contrib.toml") || pe.Key != "contributor[1].rotaton" || pe.Line != 67-strings.Count(s[:i], "\n") {
		t.Errorf("error %v (%+v), want it in contrib.toml at contributor[1].rotaton", err, pe)
	}
}

// TestSectionError checks that an error found after loading points at the
// section's table in its file.
func TestSectionError(t *testing.T) {
	data, _ := samples.FS.ReadFile("same-core.toml")
	j, err := Parse(data, "job.toml", ".")
	if err != nil {
		t.Fatal(err)
	}
	err = j.SectionError(0, "traces[0].width", ErrValue)
	var pe *ParseError
	if !errors.As(err, &pe) || pe.File != "job.toml" || pe.Key != "section[0].traces[0].width" || pe.Line != 31 || !errors.Is(err, ErrValue) {
		t.Errorf("got %v (%+v), want job.toml:31: section[0].traces[0].width", err, pe)
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
	j, err := Load(filepath.Join(dir, "job.toml"), nil)
	if err != nil {
		t.Fatal(err)
	}
	// -3 in = -7.62e-2 m exactly: 1 in = 2.54e-2 m (NIST SP 811, 2008
	// edition, appendix B.9, "Length"; published).
	if len(j.Sites) != 2 || j.Sites[1].Name != "K2" || math.Abs(j.Sites[1].Pos.X+7.62e-2) > 1e-15 || j.Sites[0].U.Y != 1 {
		t.Fatalf("sites %+v", j.Sites)
	}
	for _, bad := range []struct{ csv, want string }{
		{"name,x [in],y [in],angle [deg],section\nK1,1.5,-2,90,hybrid\nK2,abc,4.25,0,hybrid\n", `row 3, column "x"`},
		{"name,x,y [in],angle [deg],section\nK1,1.5,-2,90,hybrid\n", `"x"`},
		{"name,x [in],y [in],angle [deg],section\nK1,8.9,-2,90,hybrid\n", "border"},
		{"name,x [in],y [in],angle [deg],section\nK1,1,-2,90,nosuch\n", "row 2"},
	} {
		os.WriteFile(filepath.Join(dir, "placements.csv"), []byte(bad.csv), 0o644)
		_, err := Load(filepath.Join(dir, "job.toml"), nil)
		var ce *registration.CSVError
		if err == nil || !strings.Contains(err.Error(), bad.want) || !errors.As(err, &ce) {
			t.Errorf("placements %q: error %v, want a CSVError mentioning %q", bad.csv, err, bad.want)
		}
	}
	os.Remove(filepath.Join(dir, "placements.csv"))
	_, err = Load(filepath.Join(dir, "job.toml"), nil)
	var pathErr *fs.PathError
	if !errors.As(err, &pathErr) {
		t.Errorf("missing placement file: error %v, want a *fs.PathError", err)
	}
}

// TestTermKeys walks every registration term: the loader reads its key as
// a fixed value in the term's display unit, and names it when the key is
// misspelt.
func TestTermKeys(t *testing.T) {
	base, _ := samples.FS.ReadFile("same-core.toml")
	s := string(base)
	cut := strings.Index(s, "[[contributor]]")
	for k := registration.TermKind(0); k < registration.NumTerms; k++ {
		t.Run(k.String(), func(t *testing.T) {
			u := k.Unit(unit.MilInch)
			src := s[:cut] + "[[contributor]]\nlayers = [\"L3\"]\n" + k.String() + " = \"2.5 " + u + "\"\n"
			j, err := Parse([]byte(src), "job.toml", ".")
			if err != nil {
				t.Fatal(err)
			}
			want, _ := unit.Parse("2.5 "+u, k.Info().Kind)
			for kk, term := range j.Model.Contributors[0].Terms {
				w := 0.0
				if registration.TermKind(kk) == k {
					w = want
				}
				if term != (registration.Term{Mean: w}) {
					t.Errorf("term %v = %+v, want a fixed %g", registration.TermKind(kk), term, w)
				}
			}
			_, err = Parse([]byte(src+"x"+k.String()+" = \"1 "+u+"\"\n"), "job.toml", ".")
			if err == nil || !errors.Is(err, ErrUnknownKey) || !strings.Contains(err.Error(), k.String()+",") && !strings.Contains(err.Error(), k.String()+";") {
				t.Errorf("misspelt key: error %v, want the term keys listed", err)
			}
		})
	}
}

// TestMaskOutsideStripline checks that a board's solder mask leaves a
// stripline section's stackup alone: the field of a stripline ends at its
// two grounds, so the outer coat is outside it, and a job may hold
// stripline and microstrip sections under one mask.
func TestMaskOutsideStripline(t *testing.T) {
	data, _ := samples.FS.ReadFile("same-core.toml")
	src := strings.Replace(string(data), "]\n\n[[section]]", "]\nmask = { thickness = \"0.8 mil\", over_copper = \"0.5 mil\", er = 3.8 }\n\n[[section]]", 1)
	if src == string(data) {
		t.Fatal("the sample's stackup no longer ends where the test adds its mask")
	}
	j, err := Load("-", strings.NewReader(src))
	if err != nil {
		t.Fatal(err)
	}
	if j.Stackup.Mask == nil {
		t.Fatal("the job lost its mask")
	}
	for _, s := range j.Sections {
		if s.Stackup.Mask != nil {
			t.Errorf("stripline section %q carries the board's mask", s.Name)
		}
	}
}
