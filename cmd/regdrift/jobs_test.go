package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel/textfile"
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

// encodeUTF16 writes s as UTF-16 ("utf-16le" or "utf-16be") with its
// byte-order mark, or leaves it for "".
func encodeUTF16(s, enc string) []byte {
	if enc == "" {
		return []byte(s)
	}
	return textfile.EncodeUTF16(s, enc == "utf-16be")
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

// fitMain runs regdrift with stdin and returns the exit status, stdout and
// stderr.
func fitMain(stdin string, args ...string) (int, string, string) {
	var out, errw bytes.Buffer
	code := realMain(args, strings.NewReader(stdin), &out, &errw)
	return code, out.String(), errw.String()
}

// machineFrame rewrites the sample targets (panel frame, inches and mils)
// into a machine's frame: x' = x + ox, y' = ±y + oy, dy' = ±dy.
func machineFrame(t *testing.T, ox, oy float64, flip bool) string {
	t.Helper()
	b, err := os.ReadFile("../../samples/twocore-targets.csv")
	if err != nil {
		t.Fatal(err)
	}
	var w strings.Builder
	for _, line := range strings.Split(strings.TrimSpace(string(b)), "\n") {
		f := strings.Split(line, ",")
		if strings.HasPrefix(line, "#") || f[0] == "panel" {
			w.WriteString(line + "\n")
			continue
		}
		var v [4]float64
		for k := range v {
			v[k], _ = strconv.ParseFloat(f[3+k], 64)
		}
		s := 1.0
		if flip {
			s = -1
		}
		fmt.Fprintf(&w, "%s,%s,%s,%.4f,%.4f,%.4f,%.4f\n", f[0], f[1], f[2], v[0]+ox, s*v[1]+oy, v[2], s*v[3])
	}
	return w.String()
}

// TestFitFrames checks that targets exported in a machine's frame (origin
// at a corner, y up or down, or at a given point) fit to the same terms as
// the same targets in the panel frame: the frame is a rigid map of the
// positions and displacements, so every fitted number agrees to within the
// rounding of the rewritten file (4 decimals of an inch on values the sample
// gives to 2: exact), taken as 1e-9 relative, far above float64 rounding.
func TestFitFrames(t *testing.T) {
	ref := map[string]any{}
	code, out, errs := fitMain(machineFrame(t, 0, 0, false), "fit", "-", "-o", t.TempDir(), "--panel", "18in,24in", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	json.Unmarshal([]byte(out), &ref)
	for _, tt := range []struct {
		name   string
		ox, oy float64
		flip   bool
		args   []string
	}{
		{"lower-left", 9, 12, false, []string{"--origin", "lower-left"}},
		{"upper-left, y down", 9, 12, true, []string{"--origin", "upper-left", "--flip-y"}},
		{"a point", 2, -3, false, []string{"--origin", "-2in,3in"}},
		{"centre, y down", 0, 0, true, []string{"--origin", "centre", "--flip-y"}},
	} {
		t.Run(tt.name, func(t *testing.T) {
			args := append([]string{"fit", "-", "-o", t.TempDir(), "--panel", "18in,24in", "--json"}, tt.args...)
			code, out, errs := fitMain(machineFrame(t, tt.ox, tt.oy, tt.flip), args...)
			if code != 0 {
				t.Fatalf("exit %d: %s", code, errs)
			}
			got := map[string]any{}
			json.Unmarshal([]byte(out), &got)
			if path, ok := sameNumbers(ref, got, ""); !ok {
				t.Errorf("fit in the machine frame differs at %s", path)
			}
		})
	}
	// Bad input: a frame that needs the panel's size, a target off the
	// panel (machine-frame positions read as the panel frame), a bad origin.
	machine := machineFrame(t, 9, 12, false)
	for _, tt := range []struct {
		name, stdin string
		args        []string
		want        string
	}{
		{"corner without a size", machine, []string{"--origin", "lower-left"}, "--panel"},
		{"off the panel", machine, []string{"--panel", "18in,24in"}, `<stdin>: row 6, column "x"`},
		{"bad origin", machine, []string{"--origin", "somewhere"}, "--origin"},
		{"semicolons", strings.ReplaceAll(machine, ",", ";"), nil, "this file uses semicolons"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "out")
			code, _, errs := fitMain(tt.stdin, append([]string{"fit", "-", "-o", dir}, tt.args...)...)
			if code != 2 || !strings.Contains(errs, tt.want) {
				t.Errorf("exit %d, stderr %q; want 2 and %q", code, errs, tt.want)
			}
			if ents, _ := os.ReadDir(dir); len(ents) != 0 {
				t.Errorf("left output behind: %v", ents)
			}
		})
	}
}

// sameNumbers compares two decoded JSON values, numbers within 1e-9
// relative (see TestFitFrames), and returns the path of the first
// difference.
func sameNumbers(a, b any, path string) (string, bool) {
	switch x := a.(type) {
	case map[string]any:
		y, ok := b.(map[string]any)
		if !ok || len(x) != len(y) {
			return path, false
		}
		for k := range x {
			if p, ok := sameNumbers(x[k], y[k], path+"."+k); !ok {
				return p, false
			}
		}
	case []any:
		y, ok := b.([]any)
		if !ok || len(x) != len(y) {
			return path, false
		}
		for i := range x {
			if p, ok := sameNumbers(x[i], y[i], fmt.Sprintf("%s[%d]", path, i)); !ok {
				return p, false
			}
		}
	case float64:
		y, ok := b.(float64)
		if !ok || math.Abs(x-y) > 1e-9*math.Max(math.Abs(x), math.Abs(y))+1e-15 {
			return path, false
		}
	default:
		if a != b {
			return path, false
		}
	}
	return "", true
}

// TestFitBadTargets runs broken measurement files through fit: each exits 2
// naming the row (and column) where the trouble is, and leaves nothing in
// -o; a byte-order mark before a comment line and headers in capitals are
// read.
func TestFitBadTargets(t *testing.T) {
	const h = "panel,layer,target,x [in],y [in],dx [mil],dy [mil]\n"
	var body strings.Builder
	for i := 0; i < 200; i++ {
		fmt.Fprintf(&body, "P1,L3,T%03d,%.2f,%.2f,0.1,0.2\n", i, float64(i%20)/2-5, float64(i/20)-5)
	}
	rows := strings.SplitAfter(body.String(), "\n")
	quoted := h + strings.Join(rows[:4], "") + "P1,L3,\"T,1,2,0.1,0.2\n" + strings.Join(rows[5:], "")
	for _, tt := range []struct {
		name, csv, want string
		code            int
	}{
		{"mark then comment", "\ufeff# lot 7\n" + h + body.String(), "", 0},
		{"capitals", strings.ToUpper(h[:20]) + h[20:] + body.String(), "", 0},
		{"utf-16", string(encodeUTF16(h+body.String(), "utf-16le")), "<stdin>: row 1: file is UTF-16; save it as UTF-8", 2},
		{"quote opened on row 6", quoted, "<stdin>: row 6: ", 2},
		{"semicolons", strings.ReplaceAll(h, ",", ";") + "P1;L3;T1;1,5;2;0,1;0,2\n", "<stdin>: row 1: expected comma-separated columns (this file uses semicolons)", 2},
		{"position 1e300 in", h + "P1,L3,T1,1e300,2,0.1,0.2\n" + body.String(), `<stdin>: row 2, column "x": `, 2},
		{"displacement 1e300 mil", h + body.String() + "P1,L3,T9,1,2,0.1,1e300\n", `<stdin>: row 202, column "dy": `, 2},
		{"off a panel of the given size", h + body.String() + "P1,L3,T9,10,2,0.1,0.2\n", `<stdin>: row 202, column "x": `, 2},
	} {
		t.Run(tt.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "out")
			code, _, errs := fitMain(tt.csv, "fit", "-", "-o", dir, "--panel", "18in,24in")
			if code != tt.code || !strings.Contains(errs, tt.want) {
				t.Fatalf("exit %d, stderr %q; want %d and %q", code, errs, tt.code, tt.want)
			}
			if ents, _ := os.ReadDir(dir); tt.code != 0 && len(ents) != 0 {
				t.Errorf("left output behind: %v", ents)
			}
		})
	}
}
