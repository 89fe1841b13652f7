package watcher

import (
	"testing"
	"time"

	"github.com/fsnotify/fsnotify"
)

func TestPendingDebounce(t *testing.T) {
	t0 := time.Date(2026, 1, 2, 3, 4, 5, 0, time.UTC)
	win := 50 * time.Millisecond
	a, b := fileKey{0, "a.csv"}, fileKey{1, "b.csv"}

	t.Run("events merge into one entry due one window after the first", func(t *testing.T) {
		p := newPending(win)
		for i := range 1000 {
			p.event(a, fsnotify.Write, t0.Add(time.Duration(i)*10*time.Microsecond), time.Time{})
		}
		p.event(a, fsnotify.Create, t0.Add(20*time.Millisecond), time.Time{})
		if p.len() != 1 {
			t.Fatalf("%d entries, want 1", p.len())
		}
		e := p.entries[a]
		if e.events != 1001 || e.ops != fsnotify.Write|fsnotify.Create {
			t.Errorf("merged %d events, ops %v", e.events, e.ops)
		}
		if next, _ := p.next(); !next.Equal(t0.Add(win)) {
			t.Errorf("due %v, want first event + window", next.Sub(t0))
		}
		if got := p.take(t0.Add(win - time.Nanosecond)); len(got) != 0 {
			t.Errorf("taken before due: %v", got)
		}
		if got := p.take(t0.Add(win)); len(got) != 1 || got[0] != a {
			t.Errorf("take = %v", got)
		}
		if p.len() != 0 {
			t.Error("entry not removed by take")
		}
	})

	t.Run("continuous writes still flush every window", func(t *testing.T) {
		p := newPending(win)
		flushes := 0
		var now time.Time
		for i := 0; i < 1000; i++ { // one write per millisecond for a second
			now = t0.Add(time.Duration(i) * time.Millisecond)
			p.event(a, fsnotify.Write, now, time.Time{})
			flushes += len(p.take(now))
		}
		if flushes < 15 || flushes > 21 {
			t.Errorf("%d flushes in 1 s of writes with a 50 ms window, want about 20", flushes)
		}
	})

	t.Run("backoff holds the file back", func(t *testing.T) {
		p := newPending(win)
		retry := t0.Add(time.Second)
		p.event(a, fsnotify.Write, t0, retry)
		if next, _ := p.next(); !next.Equal(retry) {
			t.Errorf("due %v, want the retry time", next.Sub(t0))
		}
	})

	t.Run("schedule only moves earlier", func(t *testing.T) {
		p := newPending(win)
		p.event(a, fsnotify.Write, t0, time.Time{})
		p.schedule(a, t0.Add(time.Hour))
		if next, _ := p.next(); !next.Equal(t0.Add(win)) {
			t.Errorf("later schedule moved due to %v", next.Sub(t0))
		}
		p.schedule(a, t0)
		if next, _ := p.next(); !next.Equal(t0) {
			t.Errorf("earlier schedule ignored: %v", next.Sub(t0))
		}
	})

	t.Run("take orders by due time then key", func(t *testing.T) {
		p := newPending(win)
		c := fileKey{0, "c.csv"}
		p.schedule(b, t0)
		p.schedule(c, t0)
		p.schedule(a, t0.Add(-time.Second))
		got := p.take(t0)
		want := []fileKey{a, c, b}
		if len(got) != 3 || got[0] != want[0] || got[1] != want[1] || got[2] != want[2] {
			t.Errorf("take = %v, want %v", got, want)
		}
		if _, ok := p.next(); ok {
			t.Error("next reports an entry after everything was taken")
		}
	})
}

func TestSourceMatch(t *testing.T) {
	tests := []struct {
		src  Source
		rel  string
		want bool
	}{
		{Source{}, "a.csv", true},
		{Source{}, "a.txt", false},
		{Source{}, ".a.csv", false},
		{Source{}, "sub/a.csv", false},
		{Source{Recursive: true}, "sub/a.csv", true},
		{Source{Recursive: true}, "sub/.tmp/a.csv", true}, // only the base name is checked for '.'
		{Source{Recursive: true, Pattern: "run*/*.csv"}, "run1/a.csv", true},
		{Source{Recursive: true, Pattern: "run*/*.csv"}, "cal/a.csv", false},
		{Source{Pattern: "rig?-*.dat"}, "rig3-x.dat", true},
	}
	for _, tt := range tests {
		if got := tt.src.match(tt.rel); got != tt.want {
			t.Errorf("Source{Pattern:%q Recursive:%v}.match(%q) = %v, want %v", tt.src.Pattern, tt.src.Recursive, tt.rel, got, tt.want)
		}
	}
}

func TestChanged(t *testing.T) {
	content := []byte("x,y\n1,2\n3,4\n")
	st := FileState{Inode: 7, Offset: int64(len(content)), Size: int64(len(content)),
		Fingerprint: fingerprint(content), FingerprintLen: len(content)}
	grown := append(append([]byte(nil), content...), "5,6\n"...)
	tests := []struct {
		name   string
		id     identity
		prefix []byte
		want   NoticeKind
	}{
		{"append", identity{ino: 7, size: int64(len(grown))}, grown, 0},
		{"same", identity{ino: 7, size: int64(len(content))}, content, 0},
		{"new inode", identity{ino: 8, size: int64(len(grown))}, grown, Rotated},
		{"shrank below offset", identity{ino: 7, size: 4}, content[:4], Truncated},
		{"rewritten same size", identity{ino: 7, size: int64(len(content))}, []byte("x,y\n9,2\n3,4\n"), Truncated},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got, _ := changed(st, tt.id, tt.prefix); got != tt.want {
				t.Errorf("changed = %v, want %v", got, tt.want)
			}
		})
	}
}
