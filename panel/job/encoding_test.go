package job

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/samples"
)

// TestByteOrderMark checks that a UTF-8 byte-order mark (EF BB BF, Unicode
// Standard 15.0, section 23.8, table 23-4) at the start of a job file, an
// included file and a placement file that starts with a comment line is
// read past, and that placement headers match whatever their case.
func TestByteOrderMark(t *testing.T) {
	const bom = "\ufeff"
	dir := t.TempDir()
	base, _ := samples.FS.ReadFile("same-core.toml")
	s := string(base)
	a, b := strings.Index(s, "[[part]]"), strings.Index(s, "[[contributor]]")
	job := bom + "include = [\"contrib.toml\"]\n" + s[:a] + "[[sites]]\nfile = \"p.csv\"\n\n"
	os.WriteFile(filepath.Join(dir, "job.toml"), []byte(job), 0o644)
	os.WriteFile(filepath.Join(dir, "contrib.toml"), []byte(bom+s[b:]), 0o644)
	os.WriteFile(filepath.Join(dir, "p.csv"), []byte(bom+"# exported placements\nNAME,X [in],Y [in],Angle [deg],Section\nK1,1.5,-2,90,hybrid\n"), 0o644)
	j, err := Load(filepath.Join(dir, "job.toml"), nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(j.Sites) != 1 || j.Sites[0].Name != "K1" || len(j.Model.Contributors) != 3 || !strings.HasPrefix(j.Title, "Dual") {
		t.Fatalf("job read wrongly: %d sites, %d contributors, title %q", len(j.Sites), len(j.Model.Contributors), j.Title)
	}
}

// TestIncludeDepth checks that an acyclic chain of includes loads up to
// MaxIncludeDepth files deep and is refused, as a depth and not as a cycle,
// one beyond.
func TestIncludeDepth(t *testing.T) {
	base, _ := samples.FS.ReadFile("same-core.toml")
	for _, n := range []int{10, MaxIncludeDepth, MaxIncludeDepth + 1} {
		t.Run(fmt.Sprint(n), func(t *testing.T) {
			dir := t.TempDir()
			os.WriteFile(filepath.Join(dir, "job.toml"), []byte("include = [\"i1.toml\"]\n"+string(base)), 0o644)
			for i := 1; i <= n; i++ {
				next := ""
				if i < n {
					next = fmt.Sprintf("include = [\"i%d.toml\"]\n", i+1)
				}
				os.WriteFile(filepath.Join(dir, fmt.Sprintf("i%d.toml", i)), []byte(next), 0o644)
			}
			_, err := Load(filepath.Join(dir, "job.toml"), nil)
			if n <= MaxIncludeDepth {
				if err != nil {
					t.Fatalf("a chain of %d: %v", n, err)
				}
				return
			}
			var pe *ParseError
			if !errors.As(err, &pe) || !strings.Contains(err.Error(), "more than 32 deep") || strings.Contains(err.Error(), "cycle") || pe.Key != "include[0]" || pe.Line != 1 || filepath.Base(pe.File) != fmt.Sprintf("i%d.toml", MaxIncludeDepth) {
				t.Fatalf("a chain of %d: error %v, want the depth named", n, err)
			}
		})
	}
}
