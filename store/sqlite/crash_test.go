package sqlite_test

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/sqlite"
)

// crashEnv names the database a re-executed test binary ingests into until
// it is killed.
const crashEnv = "PLUMB_STORE_CRASH_DB"

// crashModel, crashPath: the one source the crash test writes.
const crashModel, crashPath = "crash", "in/feed.csv"

// crashBatch is the batch that follows the stored read state st: lines
// st.Line+1 .. st.Line+k, every 17th of them quarantined; the offset is 10
// bytes per line, so a consistent state has Offset == 10*Line.
func crashBatch(st store.Source, k int) store.Batch {
	b := store.Batch{Source: st}
	for l := st.Line + 1; l <= st.Line+k; l++ {
		if l%17 == 0 {
			b.Quarantine = append(b.Quarantine, store.QuarantineRow{Line: l, Column: 2, Raw: "x", Reason: "not a number"})
			continue
		}
		o := benchObs(l, time.Unix(1_700_000_000, 0))
		b.Observations = append(b.Observations, o)
	}
	b.Source.Line = st.Line + k
	b.Source.Offset = 10 * int64(b.Source.Line)
	b.Source.Size = b.Source.Offset
	return b
}

// crashChild resumes from the stored read position and ingests batches of
// random sizes until killed (it reports "ready" after its first commit), now and then rotating the file (next generation)
// and re-sending its last batch (which must be stale).
func crashChild(path string) {
	ctx := context.Background()
	die := func(err error) {
		fmt.Fprintln(os.Stderr, "crash child:", err)
		os.Exit(3)
	}
	db, err := sqlite.Open(ctx, path)
	if err != nil {
		die(err)
	}
	st := store.Source{Model: crashModel, Path: crashPath, Generation: 1, Line: 1, Offset: 10}
	srcs, err := db.Sources(ctx, crashModel)
	if err != nil {
		die(err)
	}
	if len(srcs) == 1 {
		st = srcs[0]
	}
	ready := false
	deadline := time.Now().Add(time.Minute)
	for time.Now().Before(deadline) {
		if rand.IntN(40) == 0 {
			st.Generation++
			st.Line, st.Offset = 1, 10
		}
		b := crashBatch(st, 1+rand.IntN(120))
		if _, err := db.Ingest(ctx, b); err != nil {
			die(err)
		}
		if rand.IntN(5) == 0 {
			if _, err := db.Ingest(ctx, b); !errors.Is(err, store.ErrStale) {
				die(fmt.Errorf("re-sent batch: %v, want ErrStale", err))
			}
		}
		st = b.Source
		if !ready {
			fmt.Println("ready") // the parent's random wait starts after one commit
			ready = true
		}
	}
	die(errors.New("not killed within a minute"))
}

func TestMain(m *testing.M) {
	if path := os.Getenv(crashEnv); path != "" {
		crashChild(path)
	}
	if path := os.Getenv(decideCrashEnv); path != "" {
		decideCrashChild(path)
	}
	os.Exit(m.Run())
}

// TestCrashSafety kills a process that ingests in a loop (SIGKILL at
// random moments, 12 times) and checks after each restart that every
// committed batch is complete and none is partial or doubled: per
// generation the stored lines (observations and quarantine) are exactly
// 2..last with no duplicates, and the current generation's last line and
// offset are the stored read state.
func TestCrashSafety(t *testing.T) {
	path := filepath.Join(t.TempDir(), "crash.db")
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(1, 2))
	const kills = 12
	progressed := 0
	prevRows := int64(0)
	for i := range kills {
		cmd := exec.Command(os.Args[0], "-test.run=^$")
		cmd.Env = append(os.Environ(), crashEnv+"="+path)
		cmd.Stderr = os.Stderr
		out, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		line, err := bufio.NewReader(out).ReadString('\n')
		if err != nil || line != "ready\n" {
			cmd.Process.Kill()
			cmd.Wait()
			t.Fatalf("run %d: child said %q, %v", i, line, err)
		}
		time.Sleep(time.Duration(10+rng.IntN(150)) * time.Millisecond)
		if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		err = cmd.Wait()
		var ee *exec.ExitError
		if !errors.As(err, &ee) || ee.Sys().(syscall.WaitStatus).Signal() != syscall.SIGKILL {
			t.Fatalf("run %d: child ended with %v, want killed by SIGKILL", i, err)
		}
		rows := checkCrashState(t, ctx, path, i)
		if rows > prevRows {
			progressed++
		}
		prevRows = rows
	}
	if progressed < kills/2 {
		t.Errorf("the child committed in only %d of %d runs; the test did not exercise ingest", progressed, kills)
	}
}

// checkCrashState opens the database after a kill, checks it and returns
// the number of rows stored.
func checkCrashState(t *testing.T, ctx context.Context, path string, run int) int64 {
	t.Helper()
	db, err := sqlite.Open(ctx, path)
	if err != nil {
		t.Fatalf("run %d: reopen after kill: %v", run, err)
	}
	defer db.Close()
	srcs, err := db.Sources(ctx, crashModel)
	if err != nil {
		t.Fatal(err)
	}
	if len(srcs) == 0 {
		return 0
	}
	st := srcs[0]
	if st.Offset != 10*int64(st.Line) {
		t.Errorf("run %d: stored offset %d and line %d disagree", run, st.Offset, st.Line)
	}
	obs, err := db.Observations(ctx, crashModel, store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	qs, err := db.Quarantined(ctx, crashModel, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	lines := map[int]map[int]int{} // generation -> line -> times stored
	add := func(gen, line int) {
		if lines[gen] == nil {
			lines[gen] = map[int]int{}
		}
		lines[gen][line]++
	}
	for _, o := range obs {
		if o.Line%17 == 0 {
			t.Errorf("run %d: line %d stored as an observation, it belongs in quarantine", run, o.Line)
		}
		if want := benchObs(o.Line, time.Unix(1_700_000_000, 0)); o.Raw != want.Raw || o.Arrival == nil {
			t.Errorf("run %d: line %d stored as %q, want %q", run, o.Line, o.Raw, want.Raw)
		}
		add(o.Generation, o.Line)
	}
	for _, q := range qs {
		add(q.Generation, q.Line)
	}
	for gen, ls := range lines {
		last := 0
		for l, n := range ls {
			if n != 1 {
				t.Errorf("run %d: generation %d line %d stored %d times", run, gen, l, n)
			}
			last = max(last, l)
		}
		if len(ls) != last-1 {
			t.Errorf("run %d: generation %d holds %d lines, want 2..%d: a batch is partial", run, gen, len(ls), last)
		}
		if gen == st.Generation && last != st.Line {
			t.Errorf("run %d: generation %d ends at line %d, stored read state at line %d", run, gen, last, st.Line)
		}
		if gen > st.Generation {
			t.Errorf("run %d: rows of generation %d beyond the stored generation %d", run, gen, st.Generation)
		}
	}
	if st.Rows != int64(len(obs)) || st.Quarantined != int64(len(qs)) {
		t.Errorf("run %d: source counts %d rows and %d quarantined, the store holds %d and %d",
			run, st.Rows, st.Quarantined, len(obs), len(qs))
	}
	t.Logf("run %d: generation %d line %d; %d observations, %d quarantined", run, st.Generation, st.Line, len(obs), len(qs))
	return int64(len(obs)) + int64(len(qs))
}
