package sqlite

import (
	"errors"
	"fmt"
	"os"
	"strconv"
	"strings"
	"time"
)

// ErrLocked is wrapped by the error Lock returns when another process
// holds the state's lock.
var ErrLocked = errors.New("store: the state is in use by another process")

// LockedError names the process that holds a state's lock, as it wrote
// itself into the lock file.
type LockedError struct {
	// Lock is the lock file's path.
	Lock string
	// PID, Host and Started describe the holder; zero when the file could
	// not be read (the holder was still writing it).
	PID     int
	Host    string
	Started time.Time
}

func (e *LockedError) Error() string {
	who := "another process"
	if e.PID != 0 {
		who = fmt.Sprintf("process %d on %s, started %s", e.PID, e.Host, e.Started.Format(time.RFC3339))
	}
	return fmt.Sprintf("the state is in use by %s (lock %s); stop it first, or give this run another state", who, e.Lock)
}

func (e *LockedError) Unwrap() error { return ErrLocked }

// Lock is an exclusive hold on one state database, for the one process
// that writes it as a daemon. Readers (status, history, report) do not
// take it: SQLite's WAL lets them read beside the writer.
type Lock struct {
	f    *os.File
	path string
}

// LockPath is the lock file of the state database at path.
func LockPath(path string) string { return path + ".lock" }

// AcquireLock takes the exclusive lock of the state database at path
// (the file LockPath(path), created if needed, held with flock(2) until
// Release or the process ends, a SIGKILL included) and writes this
// process's pid, host and start time into it. If another process holds
// it, AcquireLock returns a *LockedError naming that process.
//
// On systems without flock the lock is not enforced (AcquireLock
// succeeds).
func AcquireLock(path string) (*Lock, error) {
	lp := LockPath(path)
	f, err := os.OpenFile(lp, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		return nil, fmt.Errorf("store: lock %s: %w", lp, err)
	}
	held, err := tryLock(f)
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("store: lock %s: %w", lp, err)
	}
	if held {
		e := &LockedError{Lock: lp}
		// The holder writes its line right after taking the lock; give it
		// a moment if the file is still empty.
		for i := 0; i < 20 && e.PID == 0; i++ {
			if i > 0 {
				time.Sleep(10 * time.Millisecond)
			}
			b, _ := os.ReadFile(lp)
			e.PID, e.Host, e.Started = parseHolder(string(b))
		}
		f.Close()
		return nil, e
	}
	host, _ := os.Hostname()
	line := fmt.Sprintf("pid=%d\nhost=%s\nstarted=%s\n", os.Getpid(), host, time.Now().UTC().Format(time.RFC3339Nano))
	err = f.Truncate(0)
	if err == nil {
		_, err = f.WriteAt([]byte(line), 0)
	}
	if err != nil {
		unlock(f)
		f.Close()
		return nil, fmt.Errorf("store: lock %s: %w", lp, err)
	}
	return &Lock{f: f, path: lp}, nil
}

// Release gives the lock up. The file stays (removing it would let a
// third process lock a new file while a second holds the old one).
func (l *Lock) Release() error {
	if l == nil || l.f == nil {
		return nil
	}
	_ = l.f.Truncate(0)
	unlock(l.f)
	err := l.f.Close()
	l.f = nil
	return err
}

func parseHolder(s string) (pid int, host string, started time.Time) {
	for _, ln := range strings.Split(s, "\n") {
		k, v, ok := strings.Cut(ln, "=")
		if !ok {
			continue
		}
		switch k {
		case "pid":
			pid, _ = strconv.Atoi(v)
		case "host":
			host = v
		case "started":
			started, _ = time.Parse(time.RFC3339Nano, v)
		}
	}
	return pid, host, started
}
