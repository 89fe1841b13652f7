//go:build unix

package daemon

import (
	"context"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"plumb/store/sqlite"
)

// TestSecondDaemonRefused: a second daemon on a state that a running one
// holds refuses to start, naming the holder; a read-only one (the report)
// opens beside it; once the first stops, a new one starts.
func TestSecondDaemonRefused(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false))
	feed(t, filepath.Join(dir, "in", "a.csv"), rand.New(rand.NewPCG(3, 3)), 0, 20, true)
	r := start(t, c)
	waitFor(t, "20 rows", func() bool { return count(t, r.d.store, "m") == 20 })

	_, err := New(context.Background(), c, Options{})
	var le *sqlite.LockedError
	if !errors.As(err, &le) {
		t.Fatalf("second daemon: %v; want a *sqlite.LockedError", err)
	}
	host, _ := os.Hostname()
	if le.PID != os.Getpid() || le.Host != host {
		t.Errorf("holder pid %d host %q, want %d %q", le.PID, le.Host, os.Getpid(), host)
	}
	if !strings.Contains(err.Error(), strconv.Itoa(os.Getpid())) {
		t.Errorf("error %q does not name the running process", err)
	}
	ro, err := New(context.Background(), c, Options{ReadOnly: true})
	if err != nil {
		t.Fatalf("read-only beside a running daemon: %v", err)
	}
	if n := count(t, ro.store, "m"); n != 20 {
		t.Errorf("read-only daemon sees %d rows, want 20", n)
	}
	ro.Close()

	r.stop(t)
	r = start(t, c)
	waitFor(t, "the restarted daemon's first refresh", func() bool {
		r.d.mu.RLock()
		defer r.d.mu.RUnlock()
		return r.d.ready
	})
}
