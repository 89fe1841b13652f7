//go:build integration

package main

import (
	"context"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/demo"
	"plumb/store"
	"plumb/store/sqlite"
)

// receiver is a webhook endpoint on loopback that verifies signatures and
// records events. mode switches its behaviour: "ok", "fail" (500), "hang".
type receiver struct {
	t      *testing.T
	secret []byte
	mu     sync.Mutex
	mode   string
	events []*alerts.Event
	bad    []string
}

func (rc *receiver) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	rc.mu.Lock()
	mode := rc.mode
	rc.mu.Unlock()
	switch mode {
	case "fail":
		http.Error(w, "receiver failing on purpose", http.StatusInternalServerError)
		return
	case "hang":
		select {
		case <-r.Context().Done():
		case <-time.After(5 * time.Second):
		}
		return
	}
	body, err := io.ReadAll(r.Body)
	if err != nil {
		http.Error(w, err.Error(), 400)
		return
	}
	rc.mu.Lock()
	defer rc.mu.Unlock()
	if ct := r.Header.Get("Content-Type"); !strings.HasPrefix(ct, "application/cloudevents+json") {
		rc.bad = append(rc.bad, "content type "+ct)
	}
	if err := alerts.VerifySignature(rc.secret, r.Header.Get(alerts.SignatureHeader), body, time.Now(), 5*time.Minute); err != nil {
		rc.bad = append(rc.bad, "signature: "+err.Error())
	}
	ev, err := alerts.DecodeEvent(body)
	if err != nil {
		rc.bad = append(rc.bad, "decode: "+err.Error())
	} else {
		if ev.SpecVersion != "1.0" || ev.ID == "" || ev.Source == "" || ev.Type == "" {
			rc.bad = append(rc.bad, "missing required CloudEvents attributes: "+string(body[:min(200, len(body))]))
		}
		rc.events = append(rc.events, ev)
	}
	w.WriteHeader(http.StatusNoContent)
}

func (rc *receiver) set(mode string) {
	rc.mu.Lock()
	rc.mode = mode
	rc.mu.Unlock()
}

// TestAlertsEndToEnd runs the built daemon on the demo's planted scenario
// with a signing webhook route whose receiver fails, hangs and goes down,
// and kills the daemon with SIGKILL while deliveries are pending. Every
// alert must still arrive, signed, exactly the planted ones, duplicates
// sharing their id.
func TestAlertsEndToEnd(t *testing.T) {
	dir := t.TempDir()
	const secret = "test-secret-0123456789"
	rc := &receiver{t: t, secret: []byte(secret), mode: "fail"}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := ln.Addr().String()
	srv := &http.Server{Handler: rc}
	go srv.Serve(ln)

	// The dashboard's public address: every event's data carries the
	// alert's page there.
	const publicURL = "https://plumb.lab.example"
	cfgText := "public_url = \"" + publicURL + "\"\n" + demo.ConfigText("")
	cfgText = strings.Replace(cfgText, `routes = ["log", "alerts-file"]`, `routes = ["log", "alerts-file", "hook"]`, 1)
	if !strings.Contains(cfgText, `"hook"`) {
		t.Fatal("the demo config no longer names its routes as this test expects")
	}
	cfgText += `
[[route]]
name = "hook"
kind = "webhook"
url = "http://` + addr + `/hook"
secret_env = "PLUMB_TEST_HOOK_SECRET"
timeout = "1s"
backoff = "100ms"
max_attempts = 50
rate_per_minute = 600
`
	cfg := filepath.Join(dir, "plumb.toml")
	writeFile(t, cfg, cfgText)
	if err := os.MkdirAll(filepath.Join(dir, demo.Folder), 0o755); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
	defer cancel()
	env := "PLUMB_TEST_HOOK_SECRET=" + secret
	logPath := filepath.Join(dir, "daemon.log")
	cmd := startDaemon(t, ctx, cfg, logPath, env)

	// The scenario at 8x the bench's pace (a reading every 250 ms, so
	// that each planted reading gets a refresh of its own).
	go func() {
		time.Sleep(300 * time.Millisecond)
		rc.set("hang")
		time.Sleep(1500 * time.Millisecond)
		rc.set("fail")
	}()
	if err := demo.Run(ctx, dir, 8, nil); err != nil {
		t.Fatal(err)
	}
	db := filepath.Join(dir, "plumb.db")
	waitAlert := func(kind, state string) {
		t.Helper()
		deadline := time.Now().Add(30 * time.Second)
		for time.Now().Before(deadline) {
			s, err := sqlite.Open(ctx, db)
			if err == nil {
				as, _ := s.Alerts(ctx, store.AlertQuery{Kind: kind, State: state})
				s.Close()
				if len(as) > 0 {
					return
				}
			}
			time.Sleep(100 * time.Millisecond)
		}
		tail(t, logPath)
		t.Fatalf("no %s alert in state %s", kind, state)
	}
	waitAlert("suspect_point", "open")
	waitAlert("fragile_fit", "resolved")

	// The receiver goes down; the daemon is killed with deliveries pending.
	srv.Close()
	time.Sleep(500 * time.Millisecond)
	if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	_ = cmd.Wait()

	// The receiver comes back on the same address, then the daemon.
	ln2, err := net.Listen("tcp", addr)
	if err != nil {
		t.Fatalf("cannot listen again on %s: %v", addr, err)
	}
	rc.set("ok")
	srv2 := &http.Server{Handler: rc}
	go srv2.Serve(ln2)
	defer srv2.Close()
	cmd = startDaemon(t, ctx, cfg, logPath, env)

	// Wait for every alert event the ledger holds to have arrived.
	deadline := time.Now().Add(60 * time.Second)
	var want map[string]bool
	for time.Now().Before(deadline) {
		want = expectedEvents(t, ctx, db)
		got := map[string]bool{}
		rc.mu.Lock()
		for _, e := range rc.events {
			got[e.ID] = true
		}
		rc.mu.Unlock()
		missing := 0
		for id := range want {
			if !got[id] {
				missing++
			}
		}
		if len(want) > 0 && missing == 0 {
			break
		}
		time.Sleep(200 * time.Millisecond)
	}
	_ = cmd.Process.Signal(syscall.SIGTERM)
	_ = cmd.Wait()

	rc.mu.Lock()
	defer rc.mu.Unlock()
	for _, b := range rc.bad {
		t.Errorf("receiver: %s", b)
	}
	got := map[string]*alerts.Event{}
	for _, e := range rc.events {
		if prev, ok := got[e.ID]; ok && prev.Type != e.Type {
			t.Errorf("event id %s delivered twice with different types %s and %s", e.ID, prev.Type, e.Type)
		}
		got[e.ID] = e
	}
	for id := range want {
		if got[id] == nil {
			t.Errorf("event %s was never delivered", id)
		}
	}
	// Exactly the planted alerts: one suspect point on the edge outlier's
	// line, none on the benign plants; a fragile fit that opened and
	// resolved itself.
	suspects := map[string]bool{}
	fragile := map[string]bool{}
	edge := ""
	for _, r := range demo.Scenario() {
		if r.Phase == demo.PhaseEdgeOutlier {
			edge = demo.ModelName + "/" + demo.FeedName + ":" + strconv.Itoa(r.Line())
		}
	}
	for _, e := range got {
		a, err := alerts.DecodeAlert(e.Data)
		if err != nil {
			t.Fatal(err)
		}
		if want := publicURL + "/alerts/" + a.ID; a.URL != want {
			t.Errorf("event %s: url %q, want %q", e.ID, a.URL, want)
		}
		if len(a.History) == 0 || a.History[len(a.History)-1].Event != a.Event {
			t.Errorf("event %s (%s): history %+v does not end with it", e.ID, a.Event, a.History)
		}
		if a.Kind == alerts.KindSuspectPoint && !strings.Contains(a.Explanation, "below the 0.05 level") {
			t.Errorf("suspect point %s: explanation %q does not word the test as the engine does", e.Subject, a.Explanation)
		}
		switch a.Kind {
		case alerts.KindSuspectPoint:
			suspects[e.Subject] = true
			if a.Suggestion == nil || len(a.Suggestion.At) == 0 {
				t.Errorf("suspect point %s carries no suggestion", e.Subject)
			} else if v := a.Suggestion.At[demo.Predictor]; v < demo.RegionLow || v > demo.RegionHigh {
				t.Errorf("suggestion %s = %g lies outside the operating region [%g, %g]", demo.Predictor, v, demo.RegionLow, demo.RegionHigh)
			}
		case alerts.KindFragileFit:
			fragile[strings.TrimPrefix(e.Type, "org.plumb.alert.fragile_fit.")] = true
		}
	}
	if len(suspects) != 1 || !suspects[edge] {
		t.Errorf("suspect-point events for %v, want exactly %s", keys(suspects), edge)
	}
	if !fragile["opened"] || !fragile["resolved"] {
		t.Errorf("fragile-fit events %v, want opened and resolved", keys(fragile))
	}
	if t.Failed() {
		tail(t, logPath)
	}
}

// expectedEvents returns the ids of every event the outbox holds for the
// webhook route.
func expectedEvents(t *testing.T, ctx context.Context, db string) map[string]bool {
	s, err := sqlite.Open(ctx, db)
	if err != nil {
		return nil
	}
	defer s.Close()
	ds, err := s.Deliveries(ctx, "", 10000)
	if err != nil {
		return nil
	}
	out := map[string]bool{}
	for _, d := range ds {
		if d.Route == "hook" {
			out[d.EventID] = true
		}
	}
	return out
}

func keys(m map[string]bool) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	return out
}
