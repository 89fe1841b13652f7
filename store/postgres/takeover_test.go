package postgres_test

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"strconv"
	"syscall"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/postgres"
)

// The takeover test's line: lines 2..takeoverRows+1 of one file, 10 bytes
// each, ingested 50 at a time.
const (
	takeoverRows  = 20000
	takeoverBatch = 50
)

// TestPostgresTakeover runs the ownership protocol a daemon follows, in
// separate processes: each waits to own the model, resumes from the
// stored read position and ingests the rest of the file. The owner is
// SIGKILLed twice during ingest (a replacement standby starts each time);
// in the end every line is stored exactly once.
func TestPostgresTakeover(t *testing.T) {
	if schema := os.Getenv("PLUMB_TAKEOVER_CHILD"); schema != "" {
		takeoverChild(schema)
		return
	}
	if testing.Short() {
		t.Skip("ingests 20,000 rows in three processes")
	}
	db, schema := openTemp(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	done := make(chan int, 8)
	start := func() *exec.Cmd {
		cmd := exec.Command(os.Args[0], "-test.run=^TestPostgresTakeover$")
		cmd.Env = append(os.Environ(), "PLUMB_TAKEOVER_CHILD="+schema)
		out, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		cmd.Stderr = os.Stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		go func() {
			sc := bufio.NewScanner(out)
			for sc.Scan() {
				if sc.Text() == "done" {
					done <- cmd.Process.Pid
				}
			}
		}()
		t.Cleanup(func() { cmd.Process.Kill(); cmd.Wait() })
		return cmd
	}
	procs := map[int]*exec.Cmd{}
	for range 2 {
		c := start()
		procs[c.Process.Pid] = c
	}
	// owner waits until some process owns the model and has stored at
	// least min rows, and returns its pid.
	owner := func(min int64) int {
		for ctx.Err() == nil {
			own, err := db.Owners(ctx)
			if err != nil {
				t.Fatal(err)
			}
			n, err := db.CountObservations(ctx, "line1")
			if err != nil {
				t.Fatal(err)
			}
			if len(own) == 1 && own[0].Alive && procs[own[0].PID] != nil && n >= min {
				return own[0].PID
			}
			time.Sleep(5 * time.Millisecond)
		}
		t.Fatal("no owner in time")
		return 0
	}
	for kill, at := range []int64{3000, 9000} {
		pid := owner(at)
		n, _ := db.CountObservations(ctx, "line1")
		if err := procs[pid].Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		procs[pid].Wait()
		delete(procs, pid)
		t.Logf("kill %d: owner pid %d killed with %d rows stored", kill+1, pid, n)
		c := start()
		procs[c.Process.Pid] = c
	}
	select {
	case pid := <-done:
		t.Logf("pid %d finished the file", pid)
	case <-ctx.Done():
		t.Fatal("the file was not finished in time")
	}
	if n, err := db.CountObservations(ctx, "line1"); err != nil || n != takeoverRows {
		t.Errorf("CountObservations = %d, %v; want %d", n, err, takeoverRows)
	}
	all, err := db.Observations(ctx, "line1", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	seen := make(map[int]bool, len(all))
	for _, o := range all {
		if seen[o.Line] {
			t.Errorf("line %d stored twice", o.Line)
		}
		seen[o.Line] = true
		if o.Raw != strconv.Itoa(o.Line) {
			t.Errorf("line %d holds %q", o.Line, o.Raw)
		}
	}
	for l := 2; l < 2+takeoverRows; l++ {
		if !seen[l] {
			t.Errorf("line %d lost", l)
		}
	}
	src, err := db.Sources(ctx, "line1")
	if err != nil || len(src) != 1 || src[0].Offset != takeoverRows*10 || src[0].Rows != takeoverRows {
		t.Errorf("read state = %+v, %v", src, err)
	}
}

// takeoverChild is one daemon: own line1, resume at the stored read
// position, ingest to the end of the file, print "done".
func takeoverChild(schema string) {
	ctx := context.Background()
	fail := func(err error) {
		fmt.Fprintln(os.Stderr, "takeover child:", err)
		os.Exit(2)
	}
	db, err := postgres.Open(ctx, os.Getenv("PLUMB_TEST_POSTGRES"), postgres.WithSchema(schema), postgres.WithMaxConns(2))
	if err != nil {
		fail(err)
	}
	l, err := db.Acquire(ctx, "line1", postgres.ThisProcess("takeover"), postgres.AcquireOptions{Poll: 20 * time.Millisecond})
	if err != nil {
		fail(err)
	}
	var off int64
	src, err := db.Sources(ctx, "line1")
	if err != nil {
		fail(err)
	}
	if len(src) == 1 {
		off = src[0].Offset
	}
	for off < takeoverRows*10 {
		select {
		case <-l.Lost():
			fail(errors.New("lease lost"))
		default:
		}
		first := int(off/10) + 2
		b := store.Batch{Source: store.Source{Model: "line1", Path: "a.csv", Generation: 1}}
		for line := first; line < first+takeoverBatch && line < 2+takeoverRows; line++ {
			b.Observations = append(b.Observations, store.Observation{Line: line, Raw: strconv.Itoa(line), Values: []float64{float64(line)}})
		}
		b.Source.Offset = off + int64(10*len(b.Observations))
		b.Source.Line = first + len(b.Observations) - 1
		_, err := db.Ingest(ctx, b)
		switch {
		case errors.Is(err, store.ErrStale):
			// Another process got there first (it should not, while
			// this one owns the model): resume at the stored position.
			src, err := db.Sources(ctx, "line1")
			if err != nil || len(src) != 1 {
				fail(fmt.Errorf("sources after a stale batch: %v", err))
			}
			off = src[0].Offset
		case err != nil:
			fail(err)
		default:
			off = b.Source.Offset
		}
	}
	fmt.Println("done")
	l.Release(ctx)
	os.Exit(0)
}
