//go:build integration

package main

import (
	"bufio"
	"context"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/sqlite"
)

// TestCrashExactlyOnce ingests 100,000 rows that this test process writes
// (appended to two files, saved by rename into a third) while the daemon, a separate process, is killed with SIGKILL at random
// moments and restarted. Afterwards the store must hold every source row
// exactly once and account for every bad row in the quarantine.
func TestCrashExactlyOnce(t *testing.T) {
	const rows = 100_000
	const kills = 12
	dir := t.TempDir()
	feed := filepath.Join(dir, "in")
	if err := os.MkdirAll(feed, 0o755); err != nil {
		t.Fatal(err)
	}
	cfg := filepath.Join(dir, "plumb.toml")
	writeFile(t, cfg, `state = "plumb.db"
listen = ""
log_level = "warn"
[watch]
debounce = "5ms"
refresh = "200ms"
idle_flush = "1h"
[[model]]
name = "line-a"
folder = "in"
response = "y"
terms = ["x"]
[model.fragility]
enabled = false
`)
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Minute)
	defer cancel()

	// The writer: appends rows in bursts to two files and saves a third
	// by writing it whole to a temporary file renamed over it (as editors
	// and spreadsheets save), one bad row every 997 rows, until done.
	rng := rand.New(rand.NewPCG(1, 2))
	done := make(chan error, 1)
	wantBad := 0
	go func() {
		files := []string{filepath.Join(feed, "a.csv"), filepath.Join(feed, "b.csv")}
		ws := make([]*os.File, len(files))
		for i, p := range files {
			f, err := os.Create(p)
			if err != nil {
				done <- err
				return
			}
			defer f.Close()
			fmt.Fprintln(f, "id,x,y")
			ws[i] = f
		}
		saved := filepath.Join(feed, "c.csv")
		content := []byte("id,x,y\n")
		save := func() error {
			tmp := filepath.Join(feed, ".c.csv.tmp")
			if err := os.WriteFile(tmp, content, 0o644); err != nil {
				return err
			}
			return os.Rename(tmp, saved)
		}
		for i := 1; i <= rows; {
			which := rng.IntN(3)
			burst := 1 + rng.IntN(200)
			var b strings.Builder
			for k := 0; k < burst && i <= rows; k++ {
				x := float64(i%1000) / 10
				if i%997 == 0 {
					fmt.Fprintf(&b, "%d,%g,not-a-number\n", i, x)
					wantBad++
				} else {
					fmt.Fprintf(&b, "%d,%g,%g\n", i, x, 2+0.5*x+rng.NormFloat64())
				}
				i++
			}
			var err error
			if which == 2 {
				content = append(content, b.String()...)
				err = save()
			} else {
				_, err = ws[which].WriteString(b.String())
			}
			if err != nil {
				done <- err
				return
			}
			time.Sleep(time.Duration(rng.IntN(12)) * time.Millisecond)
		}
		done <- nil
	}()

	logPath := filepath.Join(dir, "daemon.log")
	writerDone := false
	for k := 0; k < kills; k++ {
		cmd := startDaemon(t, ctx, cfg, logPath)
		time.Sleep(time.Duration(150+rng.IntN(600)) * time.Millisecond)
		if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		_ = cmd.Wait()
		if !writerDone {
			select {
			case err := <-done:
				if err != nil {
					t.Fatal(err)
				}
				writerDone = true
			default:
			}
		}
	}
	if !writerDone {
		if err := <-done; err != nil {
			t.Fatal(err)
		}
	}
	// A last run that is allowed to finish: wait until every row is in.
	cmd := startDaemon(t, ctx, cfg, logPath)
	db := filepath.Join(dir, "plumb.db")
	deadline := time.Now().Add(2 * time.Minute)
	var n, q int64
	for time.Now().Before(deadline) {
		n, q = counts(t, ctx, db)
		if n+q >= rows {
			break
		}
		time.Sleep(200 * time.Millisecond)
	}
	_ = cmd.Process.Signal(syscall.SIGTERM)
	_ = cmd.Wait()

	s, err := sqlite.Open(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	obs, err := s.Observations(ctx, "line-a", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]int{}
	for _, o := range obs {
		id := strings.SplitN(o.Raw, ",", 2)[0]
		seen[id]++
	}
	quar, err := s.Quarantined(ctx, "line-a", 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, qr := range quar {
		seen[strings.SplitN(qr.Raw, ",", 2)[0]]++
	}
	if len(obs) != rows-wantBad || len(quar) != wantBad {
		t.Errorf("stored %d observations and %d quarantined rows, want %d and %d", len(obs), len(quar), rows-wantBad, wantBad)
	}
	for i := 1; i <= rows; i++ {
		if c := seen[fmt.Sprint(i)]; c != 1 {
			t.Errorf("row id %d stored %d times", i, c)
			if t.Failed() && i > 20 {
				break
			}
		}
	}
	if t.Failed() {
		tail(t, logPath)
	}
}

func counts(t *testing.T, ctx context.Context, db string) (int64, int64) {
	s, err := sqlite.Open(ctx, db)
	if err != nil {
		return 0, 0
	}
	defer s.Close()
	n, _ := s.CountObservations(ctx, "line-a")
	q, _ := s.CountQuarantined(ctx, "line-a")
	return n, q
}

func writeFile(t testing.TB, p, s string) {
	t.Helper()
	if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
}

func tail(t *testing.T, p string) {
	f, err := os.Open(p)
	if err != nil {
		return
	}
	defer f.Close()
	var lines []string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		lines = append(lines, sc.Text())
	}
	if len(lines) > 40 {
		lines = lines[len(lines)-40:]
	}
	t.Logf("daemon log tail:\n%s", strings.Join(lines, "\n"))
}
