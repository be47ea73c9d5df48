package job

import (
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"testing"
)

// fuzzNames are the files FuzzLoad may write: a job, two files to include
// and the placement and residual files a job may name.
var fuzzNames = []string{"job.toml", "a.toml", "b.toml", "p.csv", "r.csv"}

// splitFiles reads a fuzz input as files: "--- NAME\n" starts a file of
// fuzzNames; text before the first such line is job.toml.
func splitFiles(src string) map[string]string {
	files := map[string]string{}
	name := "job.toml"
	var b strings.Builder
	for _, line := range strings.SplitAfter(src, "\n") {
		if n, ok := strings.CutPrefix(strings.TrimRight(line, "\n"), "--- "); ok && contains(fuzzNames, n) {
			files[name] += b.String()
			b.Reset()
			name = n
			continue
		}
		b.WriteString(line)
	}
	files[name] += b.String()
	return files
}

// joinFiles is the inverse of splitFiles, for seeds.
func joinFiles(files map[string]string) string {
	names := make([]string, 0, len(files))
	for n := range files {
		names = append(names, n)
	}
	sort.Strings(names)
	var b strings.Builder
	b.WriteString(files["job.toml"])
	for _, n := range names {
		if n != "job.toml" {
			if !strings.HasSuffix(b.String(), "\n") && b.Len() > 0 {
				b.WriteString("\n")
			}
			b.WriteString("--- " + n + "\n" + files[n])
		}
	}
	return b.String()
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

var (
	fuzzDirOnce sync.Once
	fuzzDir     string
)

// FuzzLoad feeds small sets of files (a job with includes, placements and a
// residual grid), seeded from the samples and from every case of the
// bad-input corpus with the files it needs: Load must not panic, every error
// must be an input error naming a file of the set, and an accepted job has
// sites. The files are written into one directory per fuzzing process.
func FuzzLoad(f *testing.F) {
	cases, mains := badInputs(f)
	for i, c := range cases {
		if len(c.Encodings) > 0 || c.Main != "" {
			continue
		}
		files := map[string]string{"job.toml": mains[i]}
		ok := true
		for n, text := range c.Files {
			// The corpus' names map onto the five the fuzzer writes.
			m := map[string]string{"inc.toml": "a.toml", "a.toml": "a.toml", "b.toml": "b.toml", "c.toml": "b.toml", "p.csv": "p.csv", "r.csv": "r.csv"}[n]
			if m == "" {
				ok = false
				break
			}
			files[m] = text
		}
		if ok {
			for _, from := range []string{"inc.toml", "c.toml"} {
				to := map[string]string{"inc.toml": "a.toml", "c.toml": "b.toml"}[from]
				for n := range files {
					files[n] = strings.ReplaceAll(files[n], from, to)
				}
			}
			f.Add(joinFiles(files))
		}
	}
	f.Add("include = [\"a.toml\"]\n--- a.toml\ninclude = [\"b.toml\"]\n--- b.toml\ninclude = [\"a.toml\"]\n")
	f.Add("include = [\"a.toml\", \"b.toml\"]\n--- a.toml\ninclude = [\"b.toml\"]\n--- b.toml\n")
	f.Fuzz(func(t *testing.T, src string) {
		files := splitFiles(src)
		all := ""
		for _, text := range files {
			all += text + "\n"
		}
		if manyParts(all) || manyParts(files["job.toml"]) || manyParts(files["a.toml"]) || manyParts(files["b.toml"]) {
			t.Skip() // valid and only slow, see FuzzParse
		}
		fuzzDirOnce.Do(func() {
			d, err := os.MkdirTemp("", "regdrift-fuzz-load")
			if err != nil {
				panic(err)
			}
			fuzzDir = d
		})
		for _, n := range fuzzNames {
			p := filepath.Join(fuzzDir, n)
			if text, ok := files[n]; ok {
				if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
					t.Fatal(err)
				}
			} else {
				os.Remove(p)
			}
		}
		j, err := Load(filepath.Join(fuzzDir, "job.toml"), nil)
		if err != nil {
			if !inputError(err) {
				t.Fatalf("error of an unexpected kind %T: %v", err, err)
			}
			if !strings.Contains(err.Error(), fuzzDir) && !strings.Contains(err.Error(), "job file") {
				t.Fatalf("error names no file of the set: %v", err)
			}
			checkNoGoNames(t, src, err)
			return
		}
		if len(j.Sites) == 0 {
			t.Fatal("accepted a job without sites")
		}
	})
}
