package postgres_test

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"

	"plumb/store"
)

// TestPostgresServerRestart restarts the server during ingest: the
// batches that fail in the outage are retried (as the daemon's watcher
// retries a range), Ping reports the outage while it lasts, and in the
// end every row is stored exactly once. It restarts the whole test
// server, so it runs only when asked (PLUMB_TEST_PG_RESTART=1) with the
// cluster of testdata/pg/cluster.sh (PLUMB_PG_DIR), and no other test
// using that server at the same time.
func TestPostgresServerRestart(t *testing.T) {
	if os.Getenv("PLUMB_TEST_PG_RESTART") == "" || os.Getenv("PLUMB_PG_DIR") == "" {
		t.Skip("restarts the test server: set PLUMB_TEST_PG_RESTART=1 and PLUMB_PG_DIR (testdata/pg/cluster.sh), and run it alone")
	}
	db, _ := openTemp(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	const batches, rows = 60, 200
	done := make(chan error, 1)
	failures := 0
	go func() {
		for k := range batches {
			b := store.Batch{Source: store.Source{Model: "cal", Path: "a.csv", Generation: 1, Offset: int64((k + 1) * rows * 10)}}
			for l := range rows {
				line := 2 + k*rows + l
				b.Observations = append(b.Observations, store.Observation{Line: line, Raw: fmt.Sprint(line), Values: []float64{float64(line)}})
			}
			for backoff := 50 * time.Millisecond; ; backoff = min(2*backoff, time.Second) {
				_, err := db.Ingest(ctx, b)
				if err == nil || errors.Is(err, store.ErrStale) {
					// ErrStale on a retry: the commit went through before
					// the connection broke.
					break
				}
				if ctx.Err() != nil {
					done <- err
					return
				}
				failures++
				time.Sleep(backoff)
			}
			time.Sleep(20 * time.Millisecond)
		}
		done <- nil
	}()
	time.Sleep(300 * time.Millisecond)
	restart := exec.Command("bash", filepath.Join("..", "..", "testdata", "pg", "cluster.sh"), "restart", os.Getenv("PLUMB_PG_DIR"))
	restart.Stderr = os.Stderr
	// Ping while the server goes down and comes back.
	sawDown := make(chan bool, 1)
	go func() {
		down := false
		for end := time.Now().Add(10 * time.Second); time.Now().Before(end); time.Sleep(20 * time.Millisecond) {
			pctx, pcancel := context.WithTimeout(ctx, 500*time.Millisecond)
			err := db.Ping(pctx)
			pcancel()
			if err != nil {
				down = true
			} else if down {
				break
			}
		}
		sawDown <- down
	}()
	if err := restart.Run(); err != nil {
		t.Fatalf("restart: %v", err)
	}
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	if !<-sawDown {
		t.Log("Ping never saw the server down (the restart was quicker than the probe)")
	}
	t.Logf("%d failed attempts during the restart, retried", failures)
	if n, err := db.CountObservations(ctx, "cal"); err != nil || n != batches*rows {
		t.Errorf("CountObservations = %d, %v; want %d", n, err, batches*rows)
	}
	all, err := db.Observations(ctx, "cal", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	seen := map[int]bool{}
	for _, o := range all {
		if seen[o.Line] {
			t.Errorf("line %d stored twice", o.Line)
		}
		seen[o.Line] = true
	}
	if len(all) != batches*rows {
		t.Errorf("%d rows stored, want %d", len(all), batches*rows)
	}
}
