//go:build unix

package sqlite

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestLockNamesTheHolder: a second lock of one state fails with an error
// naming the first holder (pid, host, start); readers open the database
// beside it; after Release the lock can be taken again.
func TestLockNamesTheHolder(t *testing.T) {
	path := filepath.Join(t.TempDir(), "state.db")
	l, err := AcquireLock(path)
	if err != nil {
		t.Fatal(err)
	}
	_, err = AcquireLock(path)
	var le *LockedError
	if !errors.As(err, &le) || !errors.Is(err, ErrLocked) {
		t.Fatalf("second lock: %v; want a *LockedError", err)
	}
	host, _ := os.Hostname()
	if le.PID != os.Getpid() || le.Host != host || le.Started.IsZero() {
		t.Errorf("holder = pid %d host %q started %v; want pid %d host %q", le.PID, le.Host, le.Started, os.Getpid(), host)
	}
	if msg := err.Error(); !strings.Contains(msg, "process ") || !strings.Contains(msg, LockPath(path)) {
		t.Errorf("message %q does not name the process and the lock file", msg)
	}
	db, err := Open(context.Background(), path) // a reader beside the daemon
	if err != nil {
		t.Fatalf("open beside the lock: %v", err)
	}
	db.Close()
	if err := l.Release(); err != nil {
		t.Fatal(err)
	}
	l2, err := AcquireLock(path)
	if err != nil {
		t.Fatalf("lock after release: %v", err)
	}
	l2.Release()
}
