package history

import (
	"bytes"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/registration"
)

const ppm = 1e-6

// synthLot returns an invented lot: panels × layers fits whose scale terms
// are the material movement move (per layer, x and y) plus noise, measured
// on artwork built with applied. Layers L3 and L4 are the two faces of core
// "C2 5mil" (roles "core top" and "core bottom"), the others signal layers
// of "prepreg build" with their layer name as role.
func synthLot(rng *rand.Rand, name, date string, panels int, layers []string, move, applied [2]float64) *Lot {
	l := &Lot{Name: name, Date: date}
	for p := range panels {
		for _, layer := range layers {
			cons, role := "prepreg build", layer
			switch layer {
			case "L3":
				cons, role = "C2 5mil", "core top"
			case "L4":
				cons, role = "C2 5mil", "core bottom"
			}
			var f FitRecord
			f.Panel, f.Layer, f.Construction, f.Role = fmt.Sprintf("P%d", p+1), layer, cons, role
			f.Model, f.Targets, f.DOF = registration.Affine, 16, 26
			for k := range f.Terms {
				f.Terms[k] = rng.NormFloat64() * 1e-6
				f.StdErr[k] = 0.05e-6 * (1 + rng.Float64())
			}
			mx := move[0] + 4*ppm*rng.NormFloat64()
			my := move[1] + 4*ppm*rng.NormFloat64()
			f.Terms[registration.ScaleX] = (1+applied[0])*(1+mx) - 1
			f.Terms[registration.ScaleY] = (1+applied[1])*(1+my) - 1
			f.Sigma0, f.RMS, f.Max = 2e-6, 2.7e-6, 5.1e-6
			f.AppliedX, f.AppliedY = applied[0], applied[1]
			if p == 0 {
				f.Outliers = []string{"T7", "T 12"}
				f.StdErr[registration.Skew] = math.NaN()
			}
			l.Fits = append(l.Fits, f)
		}
	}
	return l
}

func openTemp(t testing.TB) (*DB, string) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "h.db")
	d, err := Open(context.Background(), path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { d.Close() })
	return d, path
}

func TestAddAndSeries(t *testing.T) {
	ctx := context.Background()
	d, _ := openTemp(t)
	rng := rand.New(rand.NewPCG(1, 1))
	layers := []string{"L3", "L4"}
	// Built with +150/+100 ppm, moving −160/−110 ppm: measured about −10.
	for i := range 5 {
		l := synthLot(rng, fmt.Sprintf("A%d", i), fmt.Sprintf("2026-01-%02d", 10-i), 6, layers,
			[2]float64{-160 * ppm, -110 * ppm}, [2]float64{150 * ppm, 100 * ppm})
		if err := d.Add(ctx, l, false); err != nil {
			t.Fatal(err)
		}
	}
	ss, err := d.Series(ctx, Filter{Construction: "C2 5mil"})
	if err != nil {
		t.Fatal(err)
	}
	if len(ss) != 2 || ss[0].Role != "core bottom" || ss[1].Role != "core top" {
		t.Fatalf("series %+v", ss)
	}
	s := ss[1]
	if len(s.Points) != 5 || s.Points[0].Lot != "A4" || s.Points[4].Lot != "A0" || s.Points[0].N != 6 {
		t.Fatalf("points not in date order: %+v", s.Points)
	}
	// Each lot mean is of 6 panels with 4 ppm noise: SE 1.6 ppm; 5 of them
	// stay within 4 SE of the movement with the applied artwork taken out.
	for _, p := range s.Points {
		if math.Abs(p.Mean[registration.ScaleX]+160*ppm) > 4*4*ppm/math.Sqrt(6) ||
			math.Abs(p.Mean[registration.ScaleY]+110*ppm) > 4*4*ppm/math.Sqrt(6) {
			t.Errorf("lot %s: movement %.1f, %.1f ppm, want about −160, −110", p.Lot, p.Mean[registration.ScaleX]/ppm, p.Mean[registration.ScaleY]/ppm)
		}
		if !(p.SD[registration.ScaleX] > 1*ppm && p.SD[registration.ScaleX] < 9*ppm) {
			t.Errorf("lot %s: within-lot SD %.2f ppm, want about 4", p.Lot, p.SD[registration.ScaleX]/ppm)
		}
	}
	// One layer's series is the same here (one layer per role).
	ls, err := d.Series(ctx, Filter{Layer: "L3"})
	if err != nil || len(ls) != 1 || ls[0].Points[2].Mean != s.Points[2].Mean {
		t.Fatalf("layer series %v, %v", ls, err)
	}

	// Twice: refused, unless replace.
	again := synthLot(rng, "A2", "2026-02-01", 3, layers, [2]float64{}, [2]float64{})
	if err := d.Add(ctx, again, false); !errors.Is(err, ErrLotExists) {
		t.Fatalf("adding a lot twice: %v, want ErrLotExists", err)
	}
	if err := d.Add(ctx, again, true); err != nil {
		t.Fatal(err)
	}
	if n, _ := d.LotCount(ctx); n != 5 {
		t.Errorf("%d lots after replace, want 5", n)
	}
	if n, _ := d.FitCount(ctx); n != 4*12+6 {
		t.Errorf("%d fits after replace, want %d", n, 4*12+6)
	}
}

// TestPooledLayers checks that two layers of one construction and role pool
// into one lot point: mean and SD over all their fits.
func TestPooledLayers(t *testing.T) {
	ctx := context.Background()
	d, _ := openTemp(t)
	l := &Lot{Name: "X", Date: "2026-03-01"}
	vals := map[string][]float64{"L2": {1, 2, 3}, "L5": {5, 7}}
	for _, layer := range []string{"L2", "L5"} {
		for i, v := range vals[layer] {
			f := FitRecord{Panel: fmt.Sprint(i), Layer: layer, Construction: "K", Role: "outer", Model: registration.Affine}
			f.Terms[registration.ScaleX] = v * ppm
			l.Fits = append(l.Fits, f)
		}
	}
	if err := d.Add(ctx, l, false); err != nil {
		t.Fatal(err)
	}
	ss, err := d.Series(ctx, Filter{})
	if err != nil || len(ss) != 1 || len(ss[0].Points) != 1 {
		t.Fatalf("%v %v", ss, err)
	}
	p := ss[0].Points[0]
	// 1, 2, 3, 5, 7: mean 3.6, sample SD √(((−2.6)²+(−1.6)²+(−0.6)²+1.4²+3.4²)/4) = √(23.2/4) = 2.408319 (calculated here).
	if p.N != 5 || math.Abs(p.Mean[registration.ScaleX]-3.6*ppm) > 1e-12 || math.Abs(p.SD[registration.ScaleX]-2.408319*ppm) > 1e-12 {
		t.Errorf("pooled point %+v", p)
	}
}

func TestExportImportIdentical(t *testing.T) {
	ctx := context.Background()
	d, _ := openTemp(t)
	rng := rand.New(rand.NewPCG(2, 2))
	for i := range 4 {
		l := synthLot(rng, fmt.Sprintf("lot-%d", i), "2026-04-0"+fmt.Sprint(4-i%2), 3, []string{"L3", "L4", "L1-L2"},
			[2]float64{-150 * ppm, -90 * ppm}, [2]float64{120 * ppm, 80 * ppm})
		if err := d.Add(ctx, l, false); err != nil {
			t.Fatal(err)
		}
	}
	var a bytes.Buffer
	if err := d.Export(ctx, &a); err != nil {
		t.Fatal(err)
	}
	d2, _ := openTemp(t)
	n, err := d2.Import(ctx, bytes.NewReader(a.Bytes()), "a.csv", false)
	if err != nil || n != 4 {
		t.Fatalf("import: %d, %v", n, err)
	}
	var b bytes.Buffer
	if err := d2.Export(ctx, &b); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Fatalf("export → import → export differs:\n%s\n---\n%s", a.String()[:600], b.String()[:600])
	}
	if !strings.Contains(a.String(), "T7;T 12") || !strings.Contains(a.String(), "scale_x [ppm]") {
		t.Errorf("export lacks outliers or units:\n%s", a.String()[:400])
	}
	// Importing again is refused whole: nothing is added.
	if _, err := d2.Import(ctx, bytes.NewReader(a.Bytes()), "a.csv", false); !errors.Is(err, ErrLotExists) {
		t.Errorf("second import: %v, want ErrLotExists", err)
	}
	// The statistics of the imported history are those of the original.
	s1, _ := d.Series(ctx, Filter{})
	s2, _ := d2.Series(ctx, Filter{})
	for i := range s1 {
		for j := range s1[i].Points {
			a, b := s1[i].Points[j].Mean[registration.ScaleX], s2[i].Points[j].Mean[registration.ScaleX]
			if math.Abs(a-b) > 1e-11*math.Abs(a) {
				t.Errorf("series %d lot %d: %g vs %g", i, j, a, b)
			}
		}
	}
}

func TestReadExportErrors(t *testing.T) {
	d, _ := openTemp(t)
	rng := rand.New(rand.NewPCG(3, 3))
	if err := d.Add(context.Background(), synthLot(rng, "L", "2026-05-01", 1, []string{"L3"}, [2]float64{}, [2]float64{}), false); err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	d.Export(context.Background(), &buf)
	lines := strings.Split(strings.TrimSpace(buf.String()), "\n")
	head, row := lines[0]+"\n"+lines[1]+"\n", lines[2]
	set := func(col int, v string) string {
		f := strings.Split(row, ",")
		f[col] = v
		return head + strings.Join(f, ",") + "\n"
	}
	tests := []struct {
		name, csv string
		row       int
		column    string
		contains  string
	}{
		{"empty", "", 1, "", "empty"},
		{"not an export", "a,b\n1,2\n", 1, "lot", "missing column"},
		{"bad date", set(1, "2026-13-01"), 3, "", "YYYY-MM-DD"},
		{"bad number", set(12, "x"), 3, "scale_x", "finite"},
		{"bad model", set(6, "cubic"), 3, "model", "unknown model"},
		{"duplicate", head + row + "\n" + row + "\n", 4, "layer", "row 3"},
		{"no rows", head, 0, "", "no fits"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ReadExport(strings.NewReader(tt.csv), "x.csv")
			var ce *registration.CSVError
			if !errors.As(err, &ce) || ce.Row != tt.row || ce.Column != tt.column || !strings.Contains(err.Error(), tt.contains) {
				t.Errorf("got %v, want row %d, column %q, containing %q", err, tt.row, tt.column, tt.contains)
			}
		})
	}
}

func FuzzReadExport(f *testing.F) {
	d, _ := openTemp(f)
	rng := rand.New(rand.NewPCG(4, 4))
	d.Add(context.Background(), synthLot(rng, "L", "2026-05-01", 2, []string{"L3", "L4"}, [2]float64{}, [2]float64{}), false)
	var buf bytes.Buffer
	d.Export(context.Background(), &buf)
	f.Add(buf.String())
	f.Add("lot,date\n")
	f.Fuzz(func(t *testing.T, s string) {
		lots, err := ReadExport(strings.NewReader(s), "f.csv")
		if err != nil {
			var ce *registration.CSVError
			if !errors.As(err, &ce) {
				t.Fatalf("error %v is not a *CSVError", err)
			}
			return
		}
		for _, l := range lots {
			if err := l.Validate(); err != nil {
				t.Fatalf("ReadExport returned an invalid lot: %v", err)
			}
		}
	})
}

// fileState is what "left untouched" compares: the bytes of the file and
// the names in its directory (no -wal or -shm file appears).
func fileState(t *testing.T, path string) string {
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	ents, _ := os.ReadDir(filepath.Dir(path))
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	return fmt.Sprintf("%x %v", b, names)
}

func TestRefusals(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()

	t.Run("not SQLite", func(t *testing.T) {
		p := filepath.Join(dir, "targets.csv")
		os.WriteFile(p, []byte("panel,layer,target\n"), 0o644)
		before := fileState(t, p)
		if _, err := Open(ctx, p); !errors.Is(err, ErrNotHistory) || !strings.Contains(err.Error(), p) {
			t.Errorf("err %v, want ErrNotHistory naming the file", err)
		}
		if fileState(t, p) != before {
			t.Error("the file was changed")
		}
	})
	t.Run("another SQLite database", func(t *testing.T) {
		sub := filepath.Join(dir, "other")
		os.Mkdir(sub, 0o755)
		p := filepath.Join(sub, "other.db")
		db, err := sql.Open("sqlite", p)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := db.Exec("CREATE TABLE parts (name TEXT)"); err != nil {
			t.Fatal(err)
		}
		db.Close()
		before := fileState(t, p)
		if _, err := Open(ctx, p); !errors.Is(err, ErrNotHistory) || !strings.Contains(err.Error(), "parts") {
			t.Errorf("err %v, want ErrNotHistory naming its tables", err)
		}
		if fileState(t, p) != before {
			t.Error("the file was changed")
		}
	})
	t.Run("newer schema", func(t *testing.T) {
		sub := filepath.Join(dir, "newer")
		os.Mkdir(sub, 0o755)
		p := filepath.Join(sub, "h.db")
		d, err := Open(ctx, p)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := d.db.Exec("INSERT INTO regdrift_history (version, migrated) VALUES (?, 'future')", SchemaVersion+1); err != nil {
			t.Fatal(err)
		}
		// Close checkpoints the log into the file and removes it.
		d.Close()
		before := fileState(t, p)
		if _, err := Open(ctx, p); !errors.Is(err, ErrNewerSchema) || !strings.Contains(err.Error(), fmt.Sprint(SchemaVersion+1)) {
			t.Errorf("err %v, want ErrNewerSchema with the version", err)
		}
		if fileState(t, p) != before {
			t.Error("the file was changed")
		}
	})
	t.Run("directory", func(t *testing.T) {
		if _, err := Open(ctx, dir); !errors.Is(err, ErrIsDirectory) {
			t.Errorf("err %v, want ErrIsDirectory", err)
		}
	})
	t.Run("reopen", func(t *testing.T) {
		p := filepath.Join(dir, "re.db")
		for range 2 {
			d, err := Open(ctx, p)
			if err != nil {
				t.Fatal(err)
			}
			d.Close()
		}
	})
}

// TestFitToStore runs the real fitter on invented targets of a layer built
// with +200 ppm artwork that moved −210 ppm, and checks that the stored
// movement is −210 ppm: the applied artwork is taken out.
func TestFitToStore(t *testing.T) {
	const in = 25.4e-3
	rng := rand.New(rand.NewPCG(5, 5))
	applied, move := 200*ppm, -210*ppm
	eps := (1+applied)*(1+move) - 1 // measured scale ≈ −10 ppm
	var ts []registration.Target
	for p := range 4 {
		for i := range 16 {
			pos := panel.Vec{X: (float64(i%4) - 1.5) * 5 * in, Y: (float64(i/4) - 1.5) * 7 * in}
			d := panel.Vec{X: eps*pos.X + 2e-6*rng.NormFloat64(), Y: eps*pos.Y + 2e-6*rng.NormFloat64()}
			ts = append(ts, registration.Target{Panel: fmt.Sprint(p), Layer: "L3", Name: fmt.Sprint(i), Pos: pos, D: d})
		}
	}
	fits, err := registration.FitAll(ts, nil)
	if err != nil {
		t.Fatal(err)
	}
	l := &Lot{Name: "F1", Date: "2026-06-01"}
	for i := range fits {
		l.Fits = append(l.Fits, NewFitRecord(&fits[i], "C2 5mil", "core top", applied, applied))
	}
	d, _ := openTemp(t)
	if err := d.Add(context.Background(), l, false); err != nil {
		t.Fatal(err)
	}
	ss, _ := d.Series(context.Background(), Filter{})
	got := ss[0].Points[0].Mean[registration.ScaleX]
	// The scale's standard error over 4 panels of 16 targets with 2 µm
	// noise is about 0.2 ppm (from the fits' own StdErr); allow 4 of them.
	se := fits[0].StdErr[registration.ScaleX] / 2
	if math.Abs(got-move) > 4*se {
		t.Errorf("stored movement %.3f ppm, want −210 ± %.3f", got/ppm, 4*se/ppm)
	}
}
