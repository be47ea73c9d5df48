package registration

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"runtime"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
)

func TestReadTargets(t *testing.T) {
	const mil = 25.4e-6
	tests := []struct {
		name, csv string
		want      Target // the last target read
		n         int
	}{
		{"displacements", "panel,layer,target,x [in],y [in],dx [mil],dy [mil]\nP1,L3,T1,-7.5,10.5,0.25,-1.5\nP1,L3,T2,7.5,10.5,0.3,-1.4\n",
			Target{Panel: "P1", Layer: "L3", Name: "T2", Pos: vec(7.5*in, 10.5*in), D: vec(0.3*mil, -1.4*mil), Row: 3}, 2},
		{"measured positions, other units, comments, extra column", "# lot 42\npanel, layer, target, x [mm], y [mm], x_meas [mm], y_meas [mm], note\n2,L3-L4,A,100,-50,100.01,-50.02,ok\n",
			Target{Panel: "2", Layer: "L3-L4", Name: "A", Pos: vec(0.1, -0.05), D: vec(0.01*mm, -0.02*mm), Row: 3}, 1},
		{"micro sign, byte order mark", "\ufeffpanel,layer,target,x [µm],y [um],dx [µm],dy [um]\nP,L1,T,1,2,3,4\n",
			Target{Panel: "P", Layer: "L1", Name: "T", Pos: vec(1*um, 2*um), D: vec(3*um, 4*um), Row: 2}, 1},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ts, err := ReadTargets(strings.NewReader(tt.csv), "t.csv")
			if err != nil {
				t.Fatal(err)
			}
			if len(ts) != tt.n {
				t.Fatalf("%d targets, want %d", len(ts), tt.n)
			}
			got := ts[len(ts)-1]
			if got.Panel != tt.want.Panel || got.Layer != tt.want.Layer || got.Name != tt.want.Name || got.Row != tt.want.Row ||
				!near(got.Pos.X, tt.want.Pos.X) || !near(got.Pos.Y, tt.want.Pos.Y) || !near(got.D.X, tt.want.D.X) || !near(got.D.Y, tt.want.D.Y) {
				t.Errorf("got %+v\nwant %+v", got, tt.want)
			}
		})
	}
}

func near(a, b float64) bool { return math.Abs(a-b) <= 1e-9*math.Max(math.Abs(b), 1e-6) }

// TestReadTargetsErrors checks that each kind of bad input names its row and
// column.
func TestReadTargetsErrors(t *testing.T) {
	const h = "panel,layer,target,x [in],y [in],dx [mil],dy [mil]\n"
	tests := []struct {
		name, csv string
		row       int
		column    string
		contains  string
	}{
		{"empty file", "", 1, "", "empty"},
		{"missing column", "panel,layer,x [in],y [in],dx [mil],dy [mil]\n", 1, "target", "missing column"},
		{"missing dy", "panel,layer,target,x [in],y [in],dx [mil]\n", 1, "dy", "missing column"},
		{"no displacement", "panel,layer,target,x [in],y [in]\n", 1, "dx", "missing column"},
		{"both kinds", "panel,layer,target,x [in],y [in],dx [mil],dy [mil],x_meas [in],y_meas [in]\n", 1, "", "not both"},
		{"unit missing", "panel,layer,target,x,y [in],dx [mil],dy [mil]\n", 1, "", "needs a unit"},
		{"unknown unit", "panel,layer,target,x [in],y [in],dx [furlong],dy [mil]\n", 1, "", "unknown length unit"},
		{"unit on a name column", "panel [in],layer,target,x [in],y [in],dx [mil],dy [mil]\n", 1, "", "takes no unit"},
		{"non-numeric", h + "P,L3,T1,1,2,0.1,0.2\nP,L3,T2,1,2,abc,0.2\n", 3, "dx", "not a finite number"},
		{"NaN", h + "P,L3,T1,NaN,2,0.1,0.2\n", 2, "x", "not a finite number"},
		{"empty panel", h + " ,L3,T1,1,2,0.1,0.2\n", 2, "panel", "empty"},
		{"duplicate target", h + "P,L3,T1,1,2,0.1,0.2\nP,L4,T1,1,2,0.1,0.2\nP,L3,T1,3,2,0.1,0.2\n", 4, "target", "row 2"},
		{"bad pair", h + "P,L3-,T1,1,2,0.1,0.2\n", 2, "layer", "pair"},
		{"same pair", h + "P,L3-L3,T1,1,2,0.1,0.2\n", 2, "layer", "pair"},
		{"short row", h + "P,L3,T1,1,2,0.1\n", 2, "", "fields"},
		{"header only", h, 0, "", "no targets"},
		// The duplicate check runs once the file is read; it must still
		// report whichever error a check row by row meets first.
		{"duplicate before a bad cell", h + "P,L3,T1,1,2,0.1,0.2\nP,L3,T1,1,2,0.1,0.2\nP,L3,T2,1,2,abc,0.2\n", 3, "target", "row 2"},
		{"bad cell before a duplicate", h + "P,L3,T1,1,2,0.1,0.2\nP,L3,T2,1,2,abc,0.2\nP,L3,T1,1,2,0.1,0.2\n", 3, "dx", "not a finite number"},
		{"earliest duplicate of interleaved groups", h + "P,L3,A,1,2,0.1,0.2\nP,L4,B,1,2,0.1,0.2\nP,L4,B,1,2,0.1,0.2\nP,L3,A,1,2,0.1,0.2\n", 4, "target", "row 3"},
		{"third of a name", h + "P,L3,A,1,2,0.1,0.2\nP,L3,B,1,2,0.1,0.2\nP,L3,A,1,2,0.1,0.2\nP,L3,A,1,2,0.1,0.2\n", 4, "target", "also on row 2"},
	}
	// A budget of one byte spills after every target: the errors must be
	// those of the set held in memory.
	for _, budget := range []int{SpillBudget, 1} {
		for _, tt := range tests {
			t.Run(fmt.Sprint(tt.name, "/budget ", budget), func(t *testing.T) {
				withBudget(t, budget)
				_, err := ReadTargets(strings.NewReader(tt.csv), "m.csv")
				var ce *CSVError
				if !errors.As(err, &ce) {
					t.Fatalf("error %v, want a *CSVError", err)
				}
				if ce.File != "m.csv" || ce.Row != tt.row || ce.Column != tt.column || !strings.Contains(err.Error(), tt.contains) {
					t.Errorf("error %q (row %d, column %q), want row %d, column %q, containing %q", err, ce.Row, ce.Column, tt.row, tt.column, tt.contains)
				}
			})
		}
	}
}

// FuzzReadTargets feeds arbitrary bytes to the reader: it must not panic,
// must return targets or a *CSVError, and every target it returns must be
// finite with its names set. Each input is read twice, in memory and with a
// budget of a few bytes that spills the groups after almost every target
// and freezes the site table: the two must agree.
func FuzzReadTargets(f *testing.F) {
	f.Add("panel,layer,target,x [in],y [in],dx [mil],dy [mil]\nP1,L3,T1,-7.5,10.5,0.25,-1.5\n")
	f.Add("panel,layer,target,x [mm],y [mm],x_meas [mm],y_meas [mm]\n2,L3-L4,A,100,-50,100.01,-50.02\n")
	f.Add("panel,layer,target,x [in],y [in],dx [mil],dy [mil]\nP,L3,T,1e308,1e308,1e308,1\n")
	f.Add("\"panel\",layer,target,x [in],y [in],dx [mil],dy [mil]\n\"P\nQ\",L3,\"T,1\",1,2,3,4\n")
	f.Add("panel,layer,target,x [in],y [in],dx [mil],dy [mil]\n\"0000") // found by fuzzing: FieldPos after a failed Read
	f.Fuzz(func(t *testing.T, s string) {
		ts, err := ReadTargets(strings.NewReader(s), "fuzz.csv")
		old := SpillBudget
		SpillBudget = 48
		spilled, serr := ReadTargets(strings.NewReader(s), "fuzz.csv")
		SpillBudget = old
		if fmt.Sprint(err) != fmt.Sprint(serr) || !reflect.DeepEqual(ts, spilled) {
			t.Fatalf("in memory: %v, %d targets; spilled: %v, %d targets", err, len(ts), serr, len(spilled))
		}
		if err != nil {
			var ce *CSVError
			if !errors.As(err, &ce) {
				t.Fatalf("error %v is not a *CSVError", err)
			}
			return
		}
		for _, tg := range ts {
			for _, v := range []float64{tg.Pos.X, tg.Pos.Y, tg.D.X, tg.D.Y} {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("target %+v is not finite", tg)
				}
			}
			if tg.Panel == "" || tg.Layer == "" || tg.Name == "" || tg.Row < 2 {
				t.Fatalf("target %+v lacks a name or row", tg)
			}
		}
		// The duplicate check runs after the reading: what it lets through
		// must have no two targets of one name on a panel and layer, and
		// the rows must be in file order.
		seen := map[[3]string]int{}
		for i, tg := range ts {
			k := [3]string{tg.Panel, tg.Layer, tg.Name}
			if r, dup := seen[k]; dup {
				t.Fatalf("target %q on panel %q, layer %q read twice (rows %d and %d)", tg.Name, tg.Panel, tg.Layer, r, tg.Row)
			}
			seen[k] = tg.Row
			if i > 0 && tg.Row <= ts[i-1].Row {
				t.Fatalf("rows %d, %d out of file order", ts[i-1].Row, tg.Row)
			}
		}
	})
}

func vec(x, y float64) panel.Vec { return panel.Vec{X: x, Y: y} }

// TestTargetSetSites checks that sharing sites (name and nominal position)
// between panels and layers changes nothing a reader of the set sees: every
// target reads back exactly, −0 stays −0, a repeated layout is stored once
// and a file whose sites do not repeat stops being indexed.
func TestTargetSetSites(t *testing.T) {
	var ts []Target
	for p := range 3 {
		for l := range 2 {
			for i := range 50 {
				pos := vec(float64(i%10)*in, float64(i/10)*in)
				if i == 0 {
					pos = vec(math.Copysign(0, -1), 0)
				}
				ts = append(ts, Target{Panel: fmt.Sprint("P", p), Layer: fmt.Sprint("L", l), Name: fmt.Sprint("T", i),
					Pos: pos, D: vec(float64(p)*um, float64(l*i)*um), Row: len(ts) + 2})
			}
		}
	}
	// Same name, other position: a site of its own.
	ts = append(ts, Target{Panel: "P9", Layer: "L0", Name: "T1", Pos: vec(5*in, 5*in), Row: len(ts) + 2})
	s := GroupTargets(ts)
	if n := len(s.sites.pos); n != 51 {
		t.Errorf("%d sites, want the layout's 50 and one more", n)
	}
	if got, err := s.Targets(); err != nil || !reflect.DeepEqual(got, ts) {
		t.Error("targets read back differ")
	}
	if p := s.Groups[0].Pos(0); !math.Signbit(p.X) {
		t.Errorf("position %v lost the sign of -0", p)
	}
	var uniq []Target
	for i := range siteProbe + 100 {
		uniq = append(uniq, Target{Panel: "P", Layer: "L", Name: fmt.Sprint(i), Pos: vec(float64(i)*um, 0), Row: i + 2})
	}
	s = GroupTargets(uniq)
	if s.sites.index != nil {
		t.Error("the site index is kept for sites that do not repeat")
	}
	if got, err := s.Targets(); err != nil || !reflect.DeepEqual(got, uniq) {
		t.Error("unique targets read back differ")
	}
}

// BenchmarkReadTargetSet reads an invented file of 100 panels × 8 layers ×
// 300 targets (240,000 rows, the layout repeated on every panel and layer)
// and reports the heap a read set keeps per target (retained-B/target),
// the figure TargetSet's layout is designed for: held in memory (the
// file's 5.8 MB of columns are below SpillBudget) and with a budget of
// 1 MB, where what stays is the buffers, the site table and the groups.
func BenchmarkReadTargetSet(b *testing.B) {
	for _, c := range []struct {
		name   string
		budget int
	}{{"memory", SpillBudget}, {"spill1MB", 1 << 20}} {
		b.Run(c.name, func(b *testing.B) {
			withBudget(b, c.budget)
			benchmarkReadTargetSet(b)
		})
	}
}

func benchmarkReadTargetSet(b *testing.B) {
	var csv strings.Builder
	csv.WriteString("panel,layer,target,x [in],y [in],dx [mil],dy [mil]\n")
	rng := rand.New(rand.NewPCG(1, 2))
	for p := range 100 {
		for l := range 8 {
			for t := range 300 {
				fmt.Fprintf(&csv, "P%03d,L%d,T%05d,%.4f,%.4f,%.4f,%.4f\n", p, l+1, t+1,
					-8+16*float64(t%20)/19, -11+22*float64(t/20)/14, 0.05*rng.NormFloat64(), 0.05*rng.NormFloat64())
			}
		}
	}
	data := csv.String()
	perTarget := retainedPerTarget(data)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		s, err := ReadTargetSet(strings.NewReader(data), "b.csv")
		if err != nil {
			b.Fatal(err)
		}
		s.Close()
	}
	b.ReportMetric(perTarget, "retained-B/target")
}

// retainedPerTarget returns the live heap a set read from data adds, per
// target. It runs before any other set exists, so the difference is the
// set's.
func retainedPerTarget(data string) float64 {
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	benchSet, _ = ReadTargetSet(strings.NewReader(data), "b.csv")
	runtime.GC()
	runtime.ReadMemStats(&after)
	n := benchSet.Len()
	benchSet.Close()
	benchSet = nil
	return float64(int64(after.HeapAlloc)-int64(before.HeapAlloc)) / float64(n)
}

// benchSet keeps the set BenchmarkReadTargetSet measures alive.
var benchSet *TargetSet
