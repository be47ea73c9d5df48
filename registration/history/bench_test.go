package history

import (
	"context"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"sync"
	"testing"
	"time"

	"github.com/regdrift/regdrift/registration"
)

// The benchmarks share one large history, built once per run in a
// temporary directory: ten years of a busy fab, 50,000 lots × 10 panels ×
// 8 layers = 4 million fits (REGDRIFT_BENCH_LOTS sets another number of
// lots). Even lots build layers L3/L4 on core "C2 5mil", odd lots on
// "C3 8mil"; the other six layers are "prepreg build", one role each. The
// data are invented.
var big struct {
	once sync.Once
	dir  string
	db   *DB
	lots int
	err  error
}

func bigHistory(b *testing.B) *DB {
	big.once.Do(func() {
		big.lots = 50000
		if s := os.Getenv("REGDRIFT_BENCH_LOTS"); s != "" {
			big.lots, _ = strconv.Atoi(s)
		}
		big.dir, big.err = os.MkdirTemp("", "regdrift-history-bench-")
		if big.err != nil {
			return
		}
		ctx := context.Background()
		path := filepath.Join(big.dir, "big.db")
		if big.db, big.err = Open(ctx, path); big.err != nil {
			return
		}
		start := time.Now()
		rng := rand.New(rand.NewPCG(42, 0))
		layers := []string{"L1", "L2", "L3", "L4", "L5", "L6", "L7", "L8"}
		const chunk = 1000
		day := time.Date(2016, 1, 1, 0, 0, 0, 0, time.UTC)
		for i0 := 0; i0 < big.lots && big.err == nil; i0 += chunk {
			var lots []*Lot
			for i := i0; i < min(i0+chunk, big.lots); i++ {
				date := day.Add(time.Duration(i) * 24 * time.Hour * 3650 / time.Duration(big.lots)).Format(DateLayout)
				l := synthLot(rng, fmt.Sprintf("B%06d", i), date, 10, layers, [2]float64{-150 * ppm, -100 * ppm}, [2]float64{150 * ppm, 100 * ppm})
				if i%2 == 1 {
					for j := range l.Fits {
						if l.Fits[j].Construction == "C2 5mil" {
							l.Fits[j].Construction = "C3 8mil"
						}
					}
				}
				lots = append(lots, l)
			}
			big.err = big.db.addLots(ctx, lots, false)
		}
		st, _ := os.Stat(path)
		var wal int64
		if w, err := os.Stat(path + "-wal"); err == nil {
			wal = w.Size()
		}
		fmt.Fprintf(os.Stderr, "history benchmark: built %d lots (%d fits) in %.1f s; database %.0f MB (+ %.0f MB log)\n",
			big.lots, big.lots*80, time.Since(start).Seconds(), float64(st.Size())/1e6, float64(wal)/1e6)
	})
	if big.err != nil {
		b.Fatal(big.err)
	}
	return big.db
}

func TestMain(m *testing.M) {
	code := m.Run()
	if big.db != nil {
		big.db.Close()
	}
	if big.dir != "" {
		os.RemoveAll(big.dir)
	}
	os.Exit(code)
}

// BenchmarkAddLot adds one lot of 10 panels × 8 layers to the large history.
func BenchmarkAddLot(b *testing.B) {
	d := bigHistory(b)
	rng := rand.New(rand.NewPCG(43, 0))
	layers := []string{"L1", "L2", "L3", "L4", "L5", "L6", "L7", "L8"}
	n := 0
	b.ReportAllocs()
	for b.Loop() {
		l := synthLot(rng, fmt.Sprintf("N%d-%d", time.Now().UnixNano(), n), "2026-12-01", 10, layers, [2]float64{-150 * ppm, -100 * ppm}, [2]float64{150 * ppm, 100 * ppm})
		n++
		if err := d.Add(context.Background(), l, false); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkTable reads every series and computes and writes the scale table.
func BenchmarkTable(b *testing.B) {
	d := bigHistory(b)
	b.ReportAllocs()
	for b.Loop() {
		rows, err := d.ScaleTable(context.Background(), Filter{})
		if err != nil {
			b.Fatal(err)
		}
		if err := WriteTableCSV(io.Discard, rows); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkTrend charts one construction's role (half the lots) as CSV and
// a 2400 × 1400 PNG.
func BenchmarkTrend(b *testing.B) {
	d := bigHistory(b)
	b.ReportAllocs()
	for b.Loop() {
		ss, err := d.Series(context.Background(), Filter{Construction: "C2 5mil", Role: "core top"}, registration.ScaleX)
		if err != nil || len(ss) != 1 {
			b.Fatal(err)
		}
		tr := NewTrend(&ss[0], registration.ScaleX)
		if err := tr.WriteCSV(io.Discard); err != nil {
			b.Fatal(err)
		}
		if err := tr.WritePNG(io.Discard, 2400, 1400); err != nil {
			b.Fatal(err)
		}
	}
}
