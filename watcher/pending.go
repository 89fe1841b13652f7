package watcher

import (
	"sort"
	"time"

	"github.com/fsnotify/fsnotify"
)

// fileKey identifies one file of one source.
type fileKey struct {
	src int    // index into Config.Sources
	rel string // path relative to the source folder, '/'
}

// pendingEntry is the merged state of one file waiting to be read.
type pendingEntry struct {
	due    time.Time
	ops    fsnotify.Op // union of the event ops merged into the entry
	events int         // how many events were merged
}

// pending merges events per file and tells when each file is due. It is
// the debounce: the first event for a file that is not pending makes it
// due one window later; further events merge into it and never delay it
// (so a steady writer is still read once per window), but they bring
// forward a file scheduled further out, e.g. for the idle flush of a
// partial last line. An explicit schedule (retry, idle flush, "more to
// read") can only move a due time earlier. It is used by one goroutine.
type pending struct {
	window  time.Duration
	entries map[fileKey]*pendingEntry
}

func newPending(window time.Duration) *pending {
	return &pending{window: window, entries: make(map[fileKey]*pendingEntry)}
}

// event merges one event for k that happened at now; notBefore (zero if
// none) holds the file back, e.g. during a retry backoff.
func (p *pending) event(k fileKey, op fsnotify.Op, now, notBefore time.Time) {
	due := now.Add(p.window)
	if notBefore.After(due) {
		due = notBefore
	}
	e := p.entries[k]
	if e == nil {
		e = &pendingEntry{due: due}
		p.entries[k] = e
	} else if due.Before(e.due) {
		// An event brings forward a file scheduled for later (an idle
		// flush of a partial last line): the write that completes the
		// line must not wait for the idle timer.
		e.due = due
	}
	e.ops |= op
	e.events++
}

// schedule makes k due at the latest at t.
func (p *pending) schedule(k fileKey, t time.Time) {
	e := p.entries[k]
	if e == nil {
		p.entries[k] = &pendingEntry{due: t}
		return
	}
	if t.Before(e.due) {
		e.due = t
	}
}

// next returns the earliest due time.
func (p *pending) next() (time.Time, bool) {
	var best time.Time
	ok := false
	for _, e := range p.entries {
		if !ok || e.due.Before(best) {
			best, ok = e.due, true
		}
	}
	return best, ok
}

// take removes and returns the files due at now, earliest first (ties by
// source and path, so the order is deterministic).
func (p *pending) take(now time.Time) []fileKey {
	var keys []fileKey
	for k, e := range p.entries {
		if !e.due.After(now) {
			keys = append(keys, k)
		}
	}
	sort.Slice(keys, func(i, j int) bool {
		a, b := p.entries[keys[i]], p.entries[keys[j]]
		if !a.due.Equal(b.due) {
			return a.due.Before(b.due)
		}
		if keys[i].src != keys[j].src {
			return keys[i].src < keys[j].src
		}
		return keys[i].rel < keys[j].rel
	})
	for _, k := range keys {
		delete(p.entries, k)
	}
	return keys
}

func (p *pending) len() int { return len(p.entries) }
