package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel/job"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/samples"
)

// runHistory runs "regdrift history ARGS" through the command's own flag
// parsing and returns its output and error.
func runHistory(t *testing.T, args ...string) (string, error) {
	t.Helper()
	var out, errb bytes.Buffer
	c := &command{"history", func() options { return new(historyFlags) }}
	err := invoke(context.Background(), c, stdio{out: &out, err: &errb}, args)
	return out.String(), err
}

// writeDemoLots writes the first n lots of the demo history as targets and
// applied files in dir.
func writeDemoLots(t *testing.T, dir string, n int) []samples.HistoryLot {
	lots := samples.DemoHistory()[:n]
	for _, h := range lots {
		var tb, ab bytes.Buffer
		if err := h.WriteTargets(&tb); err != nil {
			t.Fatal(err)
		}
		if err := h.WriteApplied(&ab); err != nil {
			t.Fatal(err)
		}
		os.WriteFile(filepath.Join(dir, h.Name+".csv"), tb.Bytes(), 0o644)
		os.WriteFile(filepath.Join(dir, h.Name+"-applied.csv"), ab.Bytes(), 0o644)
	}
	return lots
}

func TestHistoryCommand(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "h.db")
	for _, h := range writeDemoLots(t, dir, 12) {
		out, err := runHistory(t, "add", filepath.Join(dir, h.Name+".csv"), "--db", db, "--lot", h.Name, "--date", h.Date,
			"--construction", h.Construction, "--applied", filepath.Join(dir, h.Name+"-applied.csv"), "--robust")
		if err != nil || !strings.Contains(out, "stored lot "+h.Name) {
			t.Fatalf("add %s: %v\n%s", h.Name, err, out)
		}
	}
	out, err := runHistory(t, "table", "--db", db, "-o", filepath.Join(dir, "tab"))
	if err != nil || !strings.Contains(out, samples.HistoryCoreA) || !strings.Contains(out, "scale-table.csv") {
		t.Fatalf("table: %v\n%s", err, out)
	}
	for _, f := range []string{"scale-table.csv", "scale-contributors.toml"} {
		if _, err := os.Stat(filepath.Join(dir, "tab", f)); err != nil {
			t.Error(err)
		}
	}
	out, err = runHistory(t, "trend", "--db", db, "--construction", samples.HistoryCoreB, "--term", "scale_y", "-o", filepath.Join(dir, "tr"))
	if err != nil || !strings.Contains(out, "trend-8mil-core-B-L3-scale_y.png") {
		t.Fatalf("trend: %v\n%s", err, out)
	}
	out, err = runHistory(t, "trend", "--db", db, "--construction", samples.HistoryCoreA, "--role", "L4", "--json", "-o", filepath.Join(dir, "trj"))
	var js struct {
		Trends []struct {
			Term string `json:"term"`
			Lots []struct {
				Lot  string  `json:"lot"`
				Mean float64 `json:"mean"`
			} `json:"lots"`
		} `json:"trends"`
	}
	if err != nil || json.Unmarshal([]byte(out), &js) != nil || len(js.Trends) != 1 || len(js.Trends[0].Lots) != 6 ||
		js.Trends[0].Term != "scale_x" || !(js.Trends[0].Lots[0].Mean < -100e-6) {
		t.Fatalf("trend --json: %v\n%s", err, out)
	}
	// export → import → export is byte-identical.
	exp1, err := runHistory(t, "export", "--db", db)
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(dir, "exp.csv"), []byte(exp1), 0o644)
	db2 := filepath.Join(dir, "h2.db")
	if out, err := runHistory(t, "import", filepath.Join(dir, "exp.csv"), "--db", db2); err != nil || !strings.Contains(out, "imported 12 lots") {
		t.Fatalf("import: %v\n%s", err, out)
	}
	exp2, _ := runHistory(t, "export", "--db", db2)
	if exp1 != exp2 {
		t.Error("export → import → export differs")
	}
}

func TestHistoryBadInput(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "h.db")
	h := writeDemoLots(t, dir, 1)[0]
	targets := filepath.Join(dir, h.Name+".csv")
	applied := filepath.Join(dir, h.Name+"-applied.csv")
	if _, err := runHistory(t, "add", targets, "--db", db, "--lot", h.Name, "--construction", "K", "--applied", applied); err != nil {
		t.Fatal(err)
	}
	write := func(name, s string) string {
		p := filepath.Join(dir, name)
		os.WriteFile(p, []byte(s), 0o644)
		return p
	}
	cons := write("cons.csv", "layer,construction,role\nL3,K,core top\n")
	appliedL9 := write("applied-l9.csv", "layer,scale_x [ppm],scale_y [ppm]\nL3,100,100\nL9,100,100\n")
	few := write("few.csv", "panel,layer,target,x [in],y [in],dx [mil],dy [mil]\nP1,L3,T1,1,1,0,0\nP1,L3,T2,2,2,0,0\n")
	os.Mkdir(filepath.Join(dir, "adir"), 0o755)
	before, _ := os.ReadFile(db)
	tests := []struct {
		name string
		args []string
		want []string // in the message
	}{
		{"unknown layer", []string{"add", targets, "--db", db, "--lot", "X1", "--construction", cons}, []string{"cons.csv", `"L4"`}},
		{"lot already stored", []string{"add", targets, "--db", db, "--lot", h.Name, "--construction", "K"}, []string{h.Name, "already stored"}},
		{"fit not determined", []string{"add", few, "--db", db, "--lot", "X2", "--construction", "K"}, []string{"few.csv", `"L3"`, "too few targets"}},
		{"applied layer not measured", []string{"add", targets, "--db", db, "--lot", "X3", "--construction", "K", "--applied", appliedL9}, []string{"applied-l9.csv", "row 3", `"L9"`}},
		{"applied compact form, layer not measured", []string{"add", targets, "--db", db, "--lot", "X6", "--construction", "K", "--applied", "L9:x=+100ppm"}, []string{"--applied", `"L9"`}},
		{"database is a directory", []string{"add", targets, "--db", filepath.Join(dir, "adir"), "--lot", "X4", "--construction", "K"}, []string{"adir", "directory"}},
		{"database directory missing", []string{"add", targets, "--db", filepath.Join(dir, "no", "h.db"), "--lot", "X5", "--construction", "K"}, []string{"does not exist"}},
		{"unknown construction", []string{"table", "--db", db, "--construction", "nope"}, []string{`"nope"`, `"K"`}},
		{"unknown layer in trend", []string{"trend", "--db", db, "--layer", "L9"}, []string{`"L9"`}},
		{"flag of another subcommand", []string{"export", "--db", db, "--lot", "x"}, []string{"--lot"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := runHistory(t, tt.args...)
			if !errors.Is(err, errBadInput) {
				t.Fatalf("err %v, want bad input", err)
			}
			for _, w := range tt.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("message %q lacks %q", err, w)
				}
			}
			if after, _ := os.ReadFile(db); !bytes.Equal(before, after) {
				t.Error("the database changed")
			}
		})
	}
	// Bad input on a new path leaves no file.
	fresh := filepath.Join(dir, "fresh.db")
	if _, err := runHistory(t, "add", few, "--db", fresh, "--lot", "X", "--construction", "K"); !errors.Is(err, errBadInput) {
		t.Fatalf("err %v", err)
	}
	if _, err := os.Stat(fresh); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("bad input created %s", fresh)
	}
}

func TestDemoHistory(t *testing.T) {
	out := t.TempDir()
	lines, err := demoHistory(context.Background(), out)
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Join(lines, "\n")
	if !strings.Contains(text, samples.HistoryCoreA) || !strings.Contains(text, "yes") || !strings.Contains(text, "trend-5mil-core-A-L3-scale_x.png") {
		t.Errorf("demo history:\n%s", text)
	}
}

// TestHistoryContributorsInclude checks that a job includes the table's
// contributors file: the demo two-core job with scale-contributors.toml.
func TestHistoryContributorsInclude(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "h.db")
	for _, h := range writeDemoLots(t, dir, 6) {
		if _, err := runHistory(t, "add", filepath.Join(dir, h.Name+".csv"), "--db", db, "--lot", h.Name, "--date", h.Date,
			"--construction", h.Construction, "--applied", filepath.Join(dir, h.Name+"-applied.csv")); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := runHistory(t, "table", "--db", db, "--construction", samples.HistoryCoreA, "-o", dir); err != nil {
		t.Fatal(err)
	}
	base, err := samples.FS.ReadFile("two-core.toml")
	if err != nil {
		t.Fatal(err)
	}
	jobFile := filepath.Join(dir, "with-history.toml")
	os.WriteFile(jobFile, append([]byte("include = [\"scale-contributors.toml\"]\n"), base...), 0o644)
	j, err := job.Load(jobFile, nil)
	if err != nil {
		t.Fatalf("the job does not load with the contributors: %v", err)
	}
	found := 0
	for _, c := range j.Model.Contributors {
		if strings.HasPrefix(c.Name, "history: "+samples.HistoryCoreA) {
			found++
			if m := c.Terms[registration.ScaleX].Mean; !(m < -150e-6 && m > -260e-6) {
				t.Errorf("%s: scale_x mean %g", c.Name, m)
			}
		}
	}
	if found != 2 {
		t.Errorf("%d history contributors in the job, want 2 (L3, L4)", found)
	}
}
