package history

import (
	"bufio"
	"context"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// The tests below run this test binary again as a child process that opens
// the database and adds lots, so that two processes (not two goroutines)
// share the file, and one can be killed in the middle of an add.

const (
	envChild = "REGDRIFT_HISTORY_CHILD" // "add" or "hang"
	envDB    = "REGDRIFT_HISTORY_DB"
	envName  = "REGDRIFT_HISTORY_PREFIX"
)

// TestChildProcess is the child's body; without the environment it does
// nothing.
func TestChildProcess(t *testing.T) {
	mode := os.Getenv(envChild)
	if mode == "" {
		t.Skip("run as a child process only")
	}
	ctx := context.Background()
	d, err := Open(ctx, os.Getenv(envDB))
	if err != nil {
		fmt.Fprintln(os.Stderr, "child:", err)
		os.Exit(3)
	}
	prefix := os.Getenv(envName)
	rng := rand.New(rand.NewPCG(uint64(len(prefix)), 9))
	switch mode {
	case "add":
		for i := range 25 {
			l := synthLot(rng, fmt.Sprintf("%s-%02d", prefix, i), "2026-07-01", 10, []string{"L1", "L2", "L3", "L4", "L5", "L6", "L7", "L8"},
				[2]float64{-150 * ppm, -100 * ppm}, [2]float64{150 * ppm, 100 * ppm})
			if err := d.Add(ctx, l, false); err != nil {
				fmt.Fprintln(os.Stderr, "child:", err)
				os.Exit(4)
			}
		}
	case "hang":
		testHookAfterFits = func() {
			fmt.Println("mid")
			time.Sleep(time.Minute)
		}
		l := synthLot(rng, prefix, "2026-07-02", 10, []string{"L3", "L4"}, [2]float64{}, [2]float64{})
		d.Add(ctx, l, false)
		os.Exit(5) // not reached: the parent kills the process
	}
	d.Close()
	os.Exit(0)
}

func child(t *testing.T, mode, db, prefix string) *exec.Cmd {
	cmd := exec.Command(os.Args[0], "-test.run=^TestChildProcess$")
	cmd.Env = append(os.Environ(), envChild+"="+mode, envDB+"="+db, envName+"="+prefix)
	cmd.Stderr = os.Stderr
	return cmd
}

// TestConcurrentProcesses has two processes add 25 lots each to one new
// database at the same time: all 50 are stored and the file is sound.
func TestConcurrentProcesses(t *testing.T) {
	if testing.Short() {
		t.Skip("starts two processes")
	}
	db := filepath.Join(t.TempDir(), "shared.db")
	a, b := child(t, "add", db, "alpha"), child(t, "add", db, "beta")
	if err := a.Start(); err != nil {
		t.Fatal(err)
	}
	if err := b.Start(); err != nil {
		t.Fatal(err)
	}
	errA, errB := a.Wait(), b.Wait()
	if errA != nil || errB != nil {
		t.Fatalf("children: %v, %v", errA, errB)
	}
	d, err := Open(context.Background(), db)
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	if n, _ := d.LotCount(context.Background()); n != 50 {
		t.Errorf("%d lots stored, want 50", n)
	}
	if n, _ := d.FitCount(context.Background()); n != 50*80 {
		t.Errorf("%d fits stored, want 4000", n)
	}
	if s, err := d.IntegrityCheck(context.Background()); err != nil || s != "ok" {
		t.Errorf("integrity check: %q, %v", s, err)
	}
}

// TestKilledMidAdd kills (SIGKILL) a process after it has written a lot's
// fits but before it commits: the lot is absent, the file sound, and the
// lot can be added afterwards.
func TestKilledMidAdd(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a process")
	}
	ctx := context.Background()
	db := filepath.Join(t.TempDir(), "killed.db")
	d, err := Open(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(7, 7))
	if err := d.Add(ctx, synthLot(rng, "before", "2026-07-01", 2, []string{"L3"}, [2]float64{}, [2]float64{}), false); err != nil {
		t.Fatal(err)
	}
	cmd := child(t, "hang", db, "victim")
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	line, err := bufio.NewReader(out).ReadString('\n')
	if strings.TrimSpace(line) != "mid" {
		cmd.Process.Kill()
		t.Fatalf("child said %q, %v", line, err)
	}
	cmd.Process.Signal(syscall.SIGKILL)
	cmd.Wait()
	var n int
	if err := d.db.QueryRowContext(ctx, "SELECT count(*) FROM lot WHERE name = 'victim'").Scan(&n); err != nil || n != 0 {
		t.Errorf("the killed lot: %d rows, %v; want absent", n, err)
	}
	if c, _ := d.FitCount(ctx); c != 2 {
		t.Errorf("%d fits, want the 2 of the first lot", c)
	}
	if s, err := d.IntegrityCheck(ctx); err != nil || s != "ok" {
		t.Errorf("integrity check: %q, %v", s, err)
	}
	if err := d.Add(ctx, synthLot(rng, "victim", "2026-07-02", 2, []string{"L3"}, [2]float64{}, [2]float64{}), false); err != nil {
		t.Errorf("adding the lot after the kill: %v", err)
	}
	d.Close()
}
