//go:build integration

package demo

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"strings"
	"sync"
	"testing"
	"time"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/daemon"
)

// TestScenarioWithTheDaemon plays the scenario into the real daemon at
// speed 4 (half a second between readings, more than the demo config's
// refresh interval, so every reading gets its own refresh) and checks the
// alerts it raises against Expected: which alerts, on which subject, never
// before the line they depend on is written, and their final states.
//
// Run with: go test -tags integration ./cmd/plumb/internal/demo/
func TestScenarioWithTheDaemon(t *testing.T) {
	for _, tc := range []struct {
		name    string
		partial float64
	}{
		{"whole lines", -1},
	} {
		t.Run(tc.name, func(t *testing.T) { playScenario(t, tc.partial) })
	}
}

type alertEvent struct {
	at                   time.Time
	kind, state, subject string
}

func playScenario(t *testing.T, partial float64) {
	dir := t.TempDir()
	path, err := Config(dir, "")
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := config.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	var mu sync.Mutex
	var events []alertEvent
	written := map[int]time.Time{}
	d, err := daemon.New(context.Background(), cfg, daemon.Options{
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil)),
		OnAlert: func(a *alerts.Alert) {
			mu.Lock()
			defer mu.Unlock()
			events = append(events, alertEvent{time.Now(), string(a.Kind), string(a.State), a.Subject})
		},
	})
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := make(chan error, 1)
	go func() { done <- d.Run(ctx, nil) }()
	time.Sleep(500 * time.Millisecond)

	w := Writer{PartialShare: partial}
	if err := w.Run(ctx, dir, 4, func(l Line) {
		mu.Lock()
		written[l.Number] = time.Now()
		mu.Unlock()
	}); err != nil {
		t.Fatal(err)
	}
	time.Sleep(3 * time.Second) // the last refreshes
	cancel()
	if err := <-done; err != nil && ctx.Err() == nil {
		t.Fatalf("daemon: %v", err)
	}

	mu.Lock()
	defer mu.Unlock()
	out := Expected()
	final := map[string]alertEvent{}
	first := map[string]alertEvent{}
	for _, e := range events {
		t.Logf("%s %s %s", e.kind, e.state, e.subject)
		key := e.kind + " " + e.subject
		if _, ok := first[key]; !ok {
			first[key] = e
		}
		final[key] = e
	}
	notBefore := func(e alertEvent, line int, what string) {
		t.Helper()
		if e.at.Before(written[line]) {
			t.Errorf("%s before line %d was written", what, line)
		}
	}
	kinds := map[string]int{}
	for key, e := range final {
		kinds[e.kind]++
		switch e.kind {
		case "suspect_point":
			want := fmt.Sprintf("%s:%d", FeedName, out.Suspect[0])
			if !strings.HasSuffix(e.subject, want) {
				t.Errorf("suspect point %q, want line %s", e.subject, want)
			}
			if e.state != "open" {
				t.Errorf("suspect point %s at the end, want open", e.state)
			}
			notBefore(first[key], out.Suspect[0], "the suspect-point alert")
		case "fragile_fit":
			notBefore(first[key], out.FragileFrom, "the fragile-fit alert")
			notBefore(e, out.FragileUntil, "its resolution")
			if e.state != "resolved" {
				t.Errorf("fragile fit %s at the end, want resolved", e.state)
			}
		case "drift":
			notBefore(first[key], out.Drift, "the drift alert")
			if e.state != "open" {
				t.Errorf("drift %s at the end, want open", e.state)
			}
		default:
			t.Errorf("unexpected %s alert on %q (%s)", e.kind, e.subject, e.state)
		}
	}
	for _, k := range []string{"suspect_point", "fragile_fit", "drift"} {
		if kinds[k] != 1 {
			t.Errorf("%d %s alerts, want 1", kinds[k], k)
		}
	}
}
