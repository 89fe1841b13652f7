package alerts

import (
	"context"
	"encoding/json"
	"errors"
	"io"
	"net"
	"net/http"
	"net/url"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"
)

// hookRequest is what a test receiver saw.
type hookRequest struct {
	header http.Header
	body   []byte
}

// hookServer is a loopback receiver that can fail, hang, go down and come
// back on the same address.
type hookServer struct {
	tb   testing.TB
	addr string

	mu      sync.Mutex
	mode    string // "ok", "500", "hang"
	seen    []hookRequest
	okIDs   []string
	srv     *http.Server
	release chan struct{}
}

func newHookServer(tb testing.TB, addr string) *hookServer {
	tb.Helper()
	h := &hookServer{tb: tb, addr: addr, mode: "ok", release: make(chan struct{})}
	h.up()
	tb.Cleanup(func() {
		close(h.release)
		h.down()
	})
	return h
}

func (h *hookServer) up() {
	h.tb.Helper()
	ln, err := net.Listen("tcp", h.addr)
	if err != nil {
		h.tb.Fatalf("listen %s: %v", h.addr, err)
	}
	h.addr = ln.Addr().String()
	srv := &http.Server{Handler: http.HandlerFunc(h.serve)}
	h.mu.Lock()
	h.srv = srv
	h.mu.Unlock()
	go srv.Serve(ln)
}

func (h *hookServer) down() {
	h.mu.Lock()
	srv := h.srv
	h.srv = nil
	h.mu.Unlock()
	if srv != nil {
		srv.Close()
	}
}

func (h *hookServer) setMode(m string) {
	h.mu.Lock()
	h.mode = m
	h.mu.Unlock()
}

func (h *hookServer) url() string { return "http://" + h.addr + "/hook" }

func (h *hookServer) serve(w http.ResponseWriter, r *http.Request) {
	body, err := io.ReadAll(r.Body)
	if err != nil {
		return
	}
	h.mu.Lock()
	h.seen = append(h.seen, hookRequest{header: r.Header.Clone(), body: body})
	mode := h.mode
	h.mu.Unlock()
	switch mode {
	case "500":
		http.Error(w, "storage unavailable", http.StatusInternalServerError)
	case "400":
		http.Error(w, "unknown event type", http.StatusBadRequest)
	case "hang":
		select {
		case <-r.Context().Done():
		case <-h.release:
		}
	default:
		var e struct{ ID string }
		json.Unmarshal(body, &e)
		h.mu.Lock()
		h.okIDs = append(h.okIDs, e.ID)
		h.mu.Unlock()
		w.WriteHeader(http.StatusNoContent)
	}
}

func (h *hookServer) requests() []hookRequest {
	h.mu.Lock()
	defer h.mu.Unlock()
	return append([]hookRequest(nil), h.seen...)
}

func (h *hookServer) delivered() []string {
	h.mu.Lock()
	defer h.mu.Unlock()
	return append([]string(nil), h.okIDs...)
}

const testSecret = "7f3c-bench-b-hook-secret"

func webhookHarness(t *testing.T, hook *hookServer, rc RouteConfig) (*harness, *Dispatcher) {
	t.Helper()
	rc.Name, rc.Kind, rc.URL, rc.SecretEnv = "oncall", RouteWebhook, hook.url(), "PLUMB_HOOK_SECRET"
	h := newHarness(t, func(c *Config) { c.Routes = []RouteConfig{rc} })
	route, err := NewRoute(rc, RouteOptions{Getenv: func(k string) string {
		if k == "PLUMB_HOOK_SECRET" {
			return testSecret
		}
		return ""
	}})
	if err != nil {
		t.Fatal(err)
	}
	d := NewDispatcher(h.l, []*Route{route})
	d.Now = h.clock.Now
	d.Logger = discardLogger()
	d.Jitter = func() float64 { return 0.999999 }
	return h, d
}

var attrName = regexp.MustCompile(`^[a-z0-9]{1,20}$`)

func TestWebhookSignatureAndCloudEvent(t *testing.T) {
	hook := newHookServer(t, "127.0.0.1:0")
	h, d := webhookHarness(t, hook, RouteConfig{})
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if n, err := d.Flush(ctx); err != nil || n != 1 {
		t.Fatalf("flush: %d %v", n, err)
	}
	reqs := hook.requests()
	if len(reqs) != 1 {
		t.Fatalf("%d requests", len(reqs))
	}
	r := reqs[0]
	// CloudEvents 1.0.2, HTTP structured mode (../shared/reference/CHECKS.md §B).
	if ct := r.header.Get("Content-Type"); ct != "application/cloudevents+json; charset=UTF-8" {
		t.Errorf("Content-Type %q", ct)
	}
	var attrs map[string]json.RawMessage
	if err := json.Unmarshal(r.body, &attrs); err != nil {
		t.Fatal(err)
	}
	str := func(k string) string {
		var s string
		if err := json.Unmarshal(attrs[k], &s); err != nil {
			t.Errorf("attribute %s: %v", k, err)
		}
		return s
	}
	for _, k := range []string{"id", "source", "specversion", "type"} {
		if str(k) == "" {
			t.Errorf("required attribute %s missing", k)
		}
	}
	if got := str("specversion"); got != "1.0" {
		t.Errorf("specversion %q", got)
	}
	if got := str("id"); got != a.ID+"-1" {
		t.Errorf("id %q, want %s-1", got, a.ID)
	}
	if got := str("plumbalertid"); got != a.ID {
		t.Errorf("plumbalertid %q", got)
	}
	if got := r.header.Get("Idempotency-Key"); got != a.ID+"-1" {
		t.Errorf("Idempotency-Key %q", got)
	}
	if u, err := url.Parse(str("source")); err != nil || str("source") != "/plumb/bench-b" || u.Path == "" {
		t.Errorf("source %q: %v", str("source"), err)
	}
	if got := str("type"); got != "org.plumb.alert.suspect_point.opened" {
		t.Errorf("type %q", got)
	}
	if _, err := time.Parse(time.RFC3339, str("time")); err != nil {
		t.Errorf("time: %v", err)
	}
	if got := str("subject"); got != "bench-b/feed.csv:212" {
		t.Errorf("subject %q", got)
	}
	if got := str("datacontenttype"); got != "application/json" {
		t.Errorf("datacontenttype %q", got)
	}
	if got := str("dataschema"); got != SchemaID {
		t.Errorf("dataschema %q", got)
	}
	if _, ok := attrs["data"]; !ok {
		t.Error("no data")
	}
	for k := range attrs {
		if k != "data" && !attrName.MatchString(k) {
			t.Errorf("attribute name %q is not lowercase a-z0-9, at most 20", k)
		}
	}

	sig := r.header.Get(SignatureHeader)
	now := time.Now()
	tampered := []byte(strings.Replace(string(r.body), "212", "213", 1))
	tests := []struct {
		name   string
		secret string
		header string
		body   []byte
		now    time.Time
		want   error
	}{
		{"valid", testSecret, sig, r.body, now, nil},
		{"wrong secret", "not-the-secret", sig, r.body, now, ErrBadSignature},
		{"tampered body", testSecret, sig, tampered, now, ErrBadSignature},
		{"stale", testSecret, sig, r.body, now.Add(6 * time.Minute), ErrStaleSignature},
		{"from the future", testSecret, sig, r.body, now.Add(-6 * time.Minute), ErrStaleSignature},
		{"missing", testSecret, "", r.body, now, ErrNoSignature},
		{"no v1", testSecret, "t=123", r.body, now, ErrNoSignature},
		{"rotation: second value matches", testSecret, sig + ",v1=00ff", r.body, now, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := VerifySignature([]byte(tt.secret), tt.header, tt.body, tt.now, 5*time.Minute)
			if !errors.Is(err, tt.want) {
				t.Errorf("VerifySignature: %v, want %v", err, tt.want)
			}
		})
	}
}

func TestWebhookOutageLosesNothing(t *testing.T) {
	if testing.Short() {
		t.Skip("waits for request timeouts")
	}
	hook := newHookServer(t, "127.0.0.1:0")
	h, d := webhookHarness(t, hook, RouteConfig{Timeout: 300 * time.Millisecond, MaxAttempts: 10,
		Backoff: time.Second, MaxBackoff: time.Minute})
	ctx := context.Background()
	var want []string
	for line := 1; line <= 3; line++ {
		a := mustAlert(t)(h.m.Point(ctx, suspectRow(line)))
		want = append(want, EventID(a.ID, 1))
	}
	flush := func(phase string) {
		t.Helper()
		h.clock.Add(2 * time.Minute) // past any backoff
		if _, err := d.Flush(ctx); err != nil {
			t.Fatalf("%s: %v", phase, err)
		}
	}
	hook.setMode("500")
	flush("500 #1")
	flush("500 #2")
	hook.setMode("hang")
	flush("hang")
	hook.down()
	flush("down #1")
	flush("down #2")
	if got := hook.delivered(); len(got) != 0 {
		t.Fatalf("delivered %v during the outage", got)
	}
	for _, x := range h.l.all() {
		if x.State != DeliveryPending {
			t.Fatalf("delivery %d is %s during the outage", x.ID, x.State)
		}
	}
	hook.setMode("ok")
	hook.up()
	flush("back")
	if got := hook.delivered(); strings.Join(got, ",") != strings.Join(want, ",") {
		t.Errorf("delivered %v, want %v", got, want)
	}
	for _, x := range h.l.all() {
		if x.State != DeliveryDelivered {
			t.Errorf("delivery %d is %s (%s)", x.ID, x.State, x.LastError)
		}
	}
	// Duplicates (the 500s and the hang reached the receiver) carry the same
	// id and the same bytes.
	bodies := map[string]string{}
	count := map[string]int{}
	for _, r := range hook.requests() {
		var e struct{ ID string }
		if err := json.Unmarshal(r.body, &e); err != nil {
			t.Fatal(err)
		}
		if r.header.Get("Idempotency-Key") != e.ID {
			t.Errorf("Idempotency-Key %q for event %q", r.header.Get("Idempotency-Key"), e.ID)
		}
		if b, ok := bodies[e.ID]; ok && b != string(r.body) {
			t.Errorf("retry of %s has different bytes", e.ID)
		}
		bodies[e.ID] = string(r.body)
		count[e.ID]++
		if err := VerifySignature([]byte(testSecret), r.header.Get(SignatureHeader), r.body, time.Now(), 0); err != nil {
			t.Errorf("request for %s: %v", e.ID, err)
		}
	}
	if count[want[0]] != 4 {
		t.Errorf("first event reached the receiver %d times, want 4 (2 x 500, hang, success)", count[want[0]])
	}
}

func TestWebhookDeadLetter(t *testing.T) {
	tests := []struct {
		name         string
		mode         string
		wantAttempts int
		wantErr      string
	}{
		{"server errors until the bound", "500", 3, "500 Internal Server Error: storage unavailable"},
		{"rejected at once", "400", 1, "400 Bad Request"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			hook := newHookServer(t, "127.0.0.1:0")
			hook.setMode(tt.mode)
			h, d := webhookHarness(t, hook, RouteConfig{MaxAttempts: 3, Backoff: time.Second})
			ctx := context.Background()
			mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
			for i := 0; i < 5; i++ {
				h.clock.Add(time.Hour)
				if _, err := d.Flush(ctx); err != nil {
					t.Fatal(err)
				}
			}
			dead, err := h.l.Deliveries(ctx, DeliveryDead, 10)
			if err != nil {
				t.Fatal(err)
			}
			if len(dead) != 1 || dead[0].Attempts != tt.wantAttempts || !strings.Contains(dead[0].LastError, tt.wantErr) {
				t.Fatalf("dead letters %+v, want one after %d attempts with %q", dead, tt.wantAttempts, tt.wantErr)
			}
			if n := len(hook.requests()); n != tt.wantAttempts {
				t.Errorf("%d requests, want %d", n, tt.wantAttempts)
			}
		})
	}
}

// TestMinimalWebhookConfig runs the smallest documented config end to end:
// default options, secret from the environment, real clock, Run.
func TestMinimalWebhookConfig(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:9911")
	if err != nil {
		t.Skipf("port 9911 busy: %v", err)
	}
	ln.Close()
	hook := newHookServer(t, "127.0.0.1:9911")
	t.Setenv("PLUMB_HOOK_SECRET", testSecret)
	cfg := []RouteConfig{{Name: "oncall", Kind: "webhook", URL: "http://127.0.0.1:9911/hook", SecretEnv: "PLUMB_HOOK_SECRET"}}
	routes, err := NewRoutes(cfg, RouteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	l := newMemLedger()
	d := NewDispatcher(l, routes)
	m, err := NewManager(l, Config{Rules: DefaultRules(), Routes: cfg, OnEnqueue: d.Wake})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- d.Run(ctx) }()
	a := mustAlert(t)(m.Point(context.Background(), suspectRow(212)))
	deadline := time.Now().Add(10 * time.Second)
	for len(hook.delivered()) == 0 && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	cancel()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	got := hook.delivered()
	if len(got) != 1 || got[0] != a.ID+"-1" {
		t.Fatalf("delivered %v", got)
	}
	r := hook.requests()[0]
	if err := VerifySignature([]byte(testSecret), r.header.Get(SignatureHeader), r.body, time.Now(), 0); err != nil {
		t.Error(err)
	}
}
