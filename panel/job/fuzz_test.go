package job

import (
	"errors"
	"io/fs"
	"math"
	"strings"
	"testing"

	"github.com/pelletier/go-toml/v2"

	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/samples"
)

// inputError reports whether err is one of the kinds Load documents: a
// *ParseError, a *registration.CSVError or a failure to read a file.
func inputError(err error) bool {
	var pe *ParseError
	var ce *registration.CSVError
	var fe *fs.PathError
	return errors.As(err, &pe) || errors.As(err, &ce) || errors.As(err, &fe)
}

// FuzzParse feeds job files, seeded from the samples and the bad-input
// corpus: Parse must not panic, every error must be an input error, and an
// accepted job has sites.
func FuzzParse(f *testing.F) {
	ents, _ := samples.FS.ReadDir(".")
	for _, e := range ents {
		if strings.HasSuffix(e.Name(), ".toml") {
			b, _ := samples.FS.ReadFile(e.Name())
			f.Add(string(b))
		}
	}
	_, files := badInputs(f)
	for _, s := range files {
		f.Add(s)
	}
	f.Add("[panel]\nsize = [\"1 in\"]\n")
	f.Fuzz(func(t *testing.T, src string) {
		if manyParts(src) {
			// Valid and only slow: a million parts take seconds to expand,
			// which stalls the fuzzer on one input.
			t.Skip()
		}
		// The directory does not exist, so includes and CSV files fail to
		// open rather than read whatever lies around.
		j, err := Parse([]byte(src), "fuzz.toml", "testdata/fuzz-no-files")
		if err != nil {
			if !inputError(err) {
				t.Fatalf("error of an unexpected kind %T: %v", err, err)
			}
			return
		}
		if len(j.Sites) == 0 {
			t.Fatal("accepted a job without sites")
		}
	})
}

// manyParts reports whether src is TOML whose arrays place more than 10,000
// parts in all.
func manyParts(src string) bool {
	var raw struct {
		Array []struct {
			Count []int64 `toml:"count"`
		} `toml:"array"`
	}
	if toml.Unmarshal([]byte(src), &raw) != nil {
		return false
	}
	n := 0.0
	for _, a := range raw.Array {
		p := 1.0
		for _, c := range a.Count {
			p *= math.Abs(float64(c))
		}
		n += p
	}
	return n > 1e4
}

// FuzzReadPlacements feeds placement files: ReadPlacements must not panic,
// its errors are *registration.CSVError, and every placement it returns has
// finite coordinates and names its row.
func FuzzReadPlacements(f *testing.F) {
	f.Add("name,x [in],y [in],angle [deg],section\nK1,1.5,-2,90,hybrid\nK2,-3,4.25,0,hybrid\n")
	f.Add("# comment\nsection, angle [rad], y [mm], x [mm], name\nhybrid,1.5708,10,-20,A\n")
	f.Add("name,x [in],y [in],angle [deg],section\nK1,abc,4.25,0,hybrid\n")
	f.Add("name,x,y [in],angle [deg],section\n")
	f.Add("name,x [in],y [in],angle [deg],section\nK1,\"1\n")
	f.Fuzz(func(t *testing.T, src string) {
		ps, err := ReadPlacements(strings.NewReader(src), "p.csv")
		if err != nil {
			var ce *registration.CSVError
			if !errors.As(err, &ce) || ce.File != "p.csv" {
				t.Fatalf("error %T %v, want a *registration.CSVError for p.csv", err, err)
			}
			return
		}
		for _, p := range ps {
			if p.File != "p.csv" || p.Row < 2 || !finite(p.At.X) || !finite(p.At.Y) || !finite(p.Angle) {
				t.Fatalf("placement %+v", p)
			}
		}
	})
}

func finite(v float64) bool { return v-v == 0 }
