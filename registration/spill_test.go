package registration

import (
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
)

// withBudget sets SpillBudget for the test and restores it after.
func withBudget(t testing.TB, n int) {
	old := SpillBudget
	SpillBudget = n
	t.Cleanup(func() { SpillBudget = old })
}

// spillCSV writes an invented file of panels × layers × n targets, its
// rows interleaved (each row takes the next panel and layer in turn, so no
// group comes in one run): the layers L1 and L2 repeat one layout, L3 gives
// every target a name of its own, and one outlier is planted.
func spillCSV(panels, n int) string {
	var b strings.Builder
	b.WriteString("panel,layer,target,x [in],y [in],dx [mil],dy [mil]\n")
	rng := rand.New(rand.NewPCG(3, 4))
	for i := range n {
		for p := range panels {
			for l := 1; l <= 3; l++ {
				x, y := -8+16*float64(i%9)/8, -11+22*float64(i/9)/float64(max(n/9, 1))
				name := fmt.Sprintf("T%03d", i)
				if l == 3 {
					name = fmt.Sprintf("U%d-%d", p, i)
				}
				dx, dy := 0.3*x+0.05*rng.NormFloat64(), -0.2*y+0.05*rng.NormFloat64()
				if p == 1 && l == 2 && i == 7 {
					dx += 3
				}
				fmt.Fprintf(&b, "P%d,L%d,%s,%.4f,%.4f,%.4f,%.4f\n", p, l, name, x, y, dx, dy)
			}
		}
	}
	return b.String()
}

// readSet reads data with SpillBudget = budget, after which it is restored.
func readSet(t *testing.T, data string, budget int) *TargetSet {
	t.Helper()
	old := SpillBudget
	SpillBudget = budget
	defer func() { SpillBudget = old }()
	s, err := ReadTargetSet(strings.NewReader(data), "s.csv")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

// TestSpillSameTargets reads one file in memory and through the spill file
// (budgets small enough to spill after every few targets and to freeze the
// site table): the targets, the frame mapping, the outline check and the
// fits must be the same to the bit.
func TestSpillSameTargets(t *testing.T) {
	data := spillCSV(4, 60)
	mem := readSet(t, data, 1<<30)
	if mem.spill != nil {
		t.Fatal("a small file spilled at the default budget")
	}
	fr := Frame{Origin: panel.Vec{X: 0.01, Y: -0.02}, FlipY: true}
	fr.Apply(mem)
	want, err := mem.Targets()
	if err != nil {
		t.Fatal(err)
	}
	set := &FitSettings{Robust: Tukey}
	wantFits, err := FitSet(mem, set)
	if err != nil {
		t.Fatal(err)
	}
	outline := panel.Rect{Min: panel.Vec{X: -0.2, Y: -0.26}, Max: panel.Vec{X: 0.2, Y: 0.26}}
	wantOutline := fmt.Sprint(CheckOutline(mem, outline, "s.csv"))
	for _, budget := range []int{1, 300, 5000} {
		t.Run(fmt.Sprint(budget), func(t *testing.T) {
			s := readSet(t, data, budget)
			spilled, inline := 0, 0
			for _, g := range s.Groups {
				spilled += len(g.spilled)
				for _, e := range g.spilled {
					inline += int(e.inline)
				}
			}
			if s.spill == nil || spilled == 0 || inline == 0 {
				t.Fatalf("%d records, %d inline sites spilled: the spill path is not exercised", spilled, inline)
			}
			fr.Apply(s)
			got, err := s.Targets()
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(got, want) {
				t.Fatal("the spilled set reads back other targets")
			}
			if g := s.Groups[len(s.Groups)-1]; g.cols != nil && len(g.spilled) > 0 {
				t.Error("a spilled group stays loaded after its Release")
			}
			if got := fmt.Sprint(CheckOutline(s, outline, "s.csv")); got != wantOutline {
				t.Errorf("outline check %s, want %s", got, wantOutline)
			}
			fits, err := FitSet(s, set)
			if err != nil {
				t.Fatal(err)
			}
			for i := range fits {
				a, b := fits[i], wantFits[i]
				a.Group, b.Group = nil, nil
				if !reflect.DeepEqual(a, b) {
					t.Errorf("fit %d differs:\n%+v\n%+v", i, a, b)
				}
			}
			for _, l := range []string{"L1", "L2", "L3"} {
				a, err := PooledResiduals(fits, l, 4, 4)
				if err != nil {
					t.Fatal(err)
				}
				b, _ := PooledResiduals(wantFits, l, 4, 4)
				if !reflect.DeepEqual(a, b) {
					t.Errorf("layer %s: pooled residuals differ", l)
				}
			}
		})
	}
}

// failingReader returns its data, then an error.
type failingReader struct{ r io.Reader }

func (f *failingReader) Read(p []byte) (int, error) {
	n, err := f.r.Read(p)
	if err == io.EOF {
		return n, errors.New("the disk went away")
	}
	return n, err
}

// openSpills counts this process's open files that are spill files: they
// show in /proc/self/fd as the deleted name.
func openSpills(t *testing.T) int {
	ents, err := os.ReadDir("/proc/self/fd")
	if err != nil {
		t.Skip("no /proc/self/fd to count open files")
	}
	n := 0
	for _, e := range ents {
		if l, err := os.Readlink(filepath.Join("/proc/self/fd", e.Name())); err == nil && strings.Contains(l, "regdrift-targets-") {
			n++
		}
	}
	return n
}

// TestSpillLeavesNothing checks that the spill file never shows in the
// temporary directory (it is unlinked as it is made) and that a read that
// fails, on bad input or on a failing reader, closes it.
func TestSpillLeavesNothing(t *testing.T) {
	tmp := t.TempDir()
	t.Setenv("TMPDIR", tmp)
	withBudget(t, 256)
	empty := func(when string) {
		t.Helper()
		if ents, _ := os.ReadDir(tmp); len(ents) != 0 {
			t.Errorf("%s: %d files left in the temporary directory", when, len(ents))
		}
	}
	before := openSpills(t)
	data := spillCSV(3, 40)
	s, err := ReadTargetSet(strings.NewReader(data), "s.csv")
	if err != nil {
		t.Fatal(err)
	}
	if s.spill == nil {
		t.Fatal("no spill at a budget of 256 bytes")
	}
	empty("while the set is open")
	if n := openSpills(t); n != before+1 {
		t.Errorf("%d spill files open, want %d", n, before+1)
	}
	if _, err := FitSet(s, nil); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if err := s.Groups[0].Load(); !errors.Is(err, errSpillClosed) {
		t.Errorf("Load after Close: %v, want %v", err, errSpillClosed)
	}
	empty("after Close")
	lines := strings.Split(data, "\n")
	dup := strings.Join(append(lines[:len(lines)-1:len(lines)-1], lines[5], ""), "\n") // row 6 again, at the end
	for _, c := range []struct {
		name string
		r    io.Reader
		want string
	}{
		{"duplicate", strings.NewReader(dup), "duplicate target"},
		{"bad cell", strings.NewReader(data + "P0,L1,X,1,2,abc,0\n"), "not a finite number"},
		{"failing reader", &failingReader{strings.NewReader(data)}, "the disk went away"},
	} {
		_, err := ReadTargetSet(c.r, "s.csv")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
		}
		empty(c.name)
		if n := openSpills(t); n != before {
			t.Errorf("%s: %d spill files left open, want %d", c.name, n, before)
		}
	}
}
