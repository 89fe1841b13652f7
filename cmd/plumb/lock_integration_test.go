//go:build integration

package main

import (
	"context"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
)

// TestSecondRunRefused: a second 'plumb run' on the state of a running
// one exits at once with an error naming the first (its pid), while
// status, history, alerts and report read beside the running daemon.
func TestSecondRunRefused(t *testing.T) {
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	b.WriteString("id,x,y\n")
	for i := 1; i <= 30; i++ {
		b.WriteString(strconv.Itoa(i) + "," + strconv.Itoa(i%10) + "," + strconv.Itoa(2+i%10) + ".5\n")
	}
	writeFile(t, filepath.Join(dir, "in", "a.csv"), b.String())
	cfg := filepath.Join(dir, "plumb.toml")
	writeFile(t, cfg, `state = "plumb.db"
listen = ""
log_level = "warn"
[watch]
debounce = "5ms"
refresh = "100ms"
[[model]]
name = "line-a"
folder = "in"
response = "y"
terms = ["x"]
[model.fragility]
enabled = false
`)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	first := startDaemon(t, ctx, cfg, filepath.Join(dir, "first.log"))
	db := filepath.Join(dir, "plumb.db")
	deadline := time.Now().Add(30 * time.Second)
	for {
		if n, _ := counts(t, ctx, db); n == 30 {
			break
		}
		if time.Now().After(deadline) {
			t.Fatal("the first daemon did not store the rows")
		}
		time.Sleep(50 * time.Millisecond)
	}

	out, err := exec.CommandContext(ctx, plumbBinary(t), "run", "--config", cfg).CombinedOutput()
	var ee *exec.ExitError
	if !errors.As(err, &ee) {
		t.Fatalf("second run: %v; want it to exit with an error\n%s", err, out)
	}
	t.Logf("second run: %s", out)
	if !strings.Contains(string(out), "process "+strconv.Itoa(first.Process.Pid)) {
		t.Errorf("second run's message does not name the running process %d:\n%s", first.Process.Pid, out)
	}
	for _, args := range [][]string{{"status"}, {"history", "line-a"}, {"alerts"}} {
		cmd := append([]string{args[0], "--config", cfg}, args[1:]...)
		if out, err := exec.CommandContext(ctx, plumbBinary(t), cmd...).CombinedOutput(); err != nil {
			t.Errorf("plumb %s beside the daemon: %v\n%s", strings.Join(args, " "), err, out)
		}
	}
	report := filepath.Join(dir, "report.html")
	if out, err := exec.CommandContext(ctx, plumbBinary(t), "report", "--config", cfg, "line-a", "-o", report).CombinedOutput(); err != nil {
		t.Errorf("plumb report beside the daemon: %v\n%s", err, out)
	}
	if first.ProcessState != nil {
		t.Errorf("the first daemon stopped: %v", first.ProcessState)
	}
}
