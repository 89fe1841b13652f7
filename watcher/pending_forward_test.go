package watcher

import (
	"testing"
	"time"

	"github.com/fsnotify/fsnotify"
)

// TestPendingEventBringsForward: a file scheduled for an idle flush far
// ahead is read one debounce window after its next write event.
func TestPendingEventBringsForward(t *testing.T) {
	p := newPending(50 * time.Millisecond)
	t0 := time.Unix(1000, 0)
	k := fileKey{src: 0, rel: "feed.csv"}
	p.schedule(k, t0.Add(30*time.Second))
	p.event(k, fsnotify.Write, t0.Add(time.Second), time.Time{})
	if due, _ := p.next(); !due.Equal(t0.Add(time.Second + 50*time.Millisecond)) {
		t.Errorf("due %v after the write, want one window after it", due.Sub(t0))
	}
	// An event never moves a due time later.
	p.event(k, fsnotify.Write, t0.Add(2*time.Second), time.Time{})
	if due, _ := p.next(); !due.Equal(t0.Add(time.Second + 50*time.Millisecond)) {
		t.Errorf("due moved to %v", due.Sub(t0))
	}
}
