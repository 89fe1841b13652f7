package alerts

import (
	"context"
	"errors"
	"strings"
	"sync"
	"testing"
	"time"
)

// recorder is a Sender that records what it was sent and fails on demand.
type recorder struct {
	mu   sync.Mutex
	got  []string // event ids, in send order
	fail func(d Delivery) error
}

func (r *recorder) Send(ctx context.Context, d Delivery) error {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.got = append(r.got, d.EventID)
	if r.fail != nil {
		return r.fail(d)
	}
	return nil
}

func (r *recorder) ids() []string {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]string(nil), r.got...)
}

func TestRateLimitHoldsBackWithoutLoss(t *testing.T) {
	h := newHarness(t, func(c *Config) { c.Routes = []RouteConfig{{Name: "oncall", Kind: RouteLog, RateLimit: 3}} })
	ctx := context.Background()
	var want []string
	for line := 1; line <= 10; line++ {
		a := mustAlert(t)(h.m.Point(ctx, suspectRow(line)))
		want = append(want, EventID(a.ID, 1))
	}
	rec := &recorder{}
	route, err := NewRouteWith(RouteConfig{Name: "oncall", RateLimit: 3}, rec)
	if err != nil {
		t.Fatal(err)
	}
	d := NewDispatcher(h.l, []*Route{route})
	d.Now = h.clock.Now
	d.Logger = discardLogger()
	flush := func() int {
		t.Helper()
		n, err := d.Flush(ctx)
		if err != nil {
			t.Fatal(err)
		}
		return n
	}
	if n := flush(); n != 3 {
		t.Fatalf("first pass sent %d, want the burst of 3", n)
	}
	if n := flush(); n != 0 {
		t.Fatalf("second pass at the same instant sent %d, want 0 (held back)", n)
	}
	for _, x := range h.l.all() {
		if x.State == DeliveryDead {
			t.Fatalf("delivery %d dead-lettered by the rate limit", x.ID)
		}
		if x.State == DeliveryPending && x.Attempts != 0 {
			t.Errorf("held-back delivery %d counted %d attempts", x.ID, x.Attempts)
		}
	}
	// 3 per minute refills one token every 20 s.
	h.clock.Add(20 * time.Second)
	if n := flush(); n != 1 {
		t.Errorf("after 20 s sent %d, want 1", n)
	}
	total := 4
	for i := 0; i < 20 && total < 10; i++ {
		h.clock.Add(20 * time.Second)
		n := flush()
		if n > 1 {
			t.Errorf("pass %d sent %d in 20 s, above the rate", i, n)
		}
		total += n
	}
	got := rec.ids()
	if strings.Join(got, ",") != strings.Join(want, ",") {
		t.Errorf("sent %v\nwant %v (each once, in order)", got, want)
	}
	for _, x := range h.l.all() {
		if x.State != DeliveryDelivered {
			t.Errorf("delivery %d is %s", x.ID, x.State)
		}
	}
}

func TestBackoffAndDeadLetter(t *testing.T) {
	h := newHarness(t, func(c *Config) { c.Routes = []RouteConfig{{Name: "oncall", Kind: RouteLog}} })
	ctx := context.Background()
	for line := 1; line <= 3; line++ {
		mustAlert(t)(h.m.Point(ctx, suspectRow(line)))
	}
	rec := &recorder{fail: func(Delivery) error { return errors.New("receiver unreachable") }}
	route, _ := NewRouteWith(RouteConfig{Name: "oncall", MaxAttempts: 3, Backoff: 10 * time.Second, MaxBackoff: 25 * time.Second}, rec)
	d := NewDispatcher(h.l, []*Route{route})
	d.Now = h.clock.Now
	d.Logger = discardLogger()
	d.Jitter = func() float64 { return 0.999999 } // take the whole backoff
	var waits []time.Duration
	for i := 0; i < 30; i++ {
		before := h.clock.Now()
		if _, err := d.Flush(ctx); err != nil {
			t.Fatal(err)
		}
		next := time.Time{}
		for _, x := range h.l.all() {
			if x.State == DeliveryPending && (next.IsZero() || x.NextAttempt.Before(next)) {
				next = x.NextAttempt
			}
		}
		if next.IsZero() {
			break
		}
		waits = append(waits, next.Sub(before).Round(time.Second))
		h.clock.Add(next.Sub(before))
	}
	all := h.l.all()
	for _, x := range all {
		if x.State != DeliveryDead || x.Attempts != 3 || !strings.Contains(x.LastError, "receiver unreachable") {
			t.Errorf("delivery %d: %s after %d attempts, error %q; want dead after 3", x.ID, x.State, x.Attempts, x.LastError)
		}
	}
	dead, _ := h.l.Deliveries(ctx, DeliveryDead, 0)
	if len(dead) != 3 {
		t.Errorf("%d dead deliveries listed, want 3", len(dead))
	}
	// One probe at a time: 3 deliveries x 3 attempts, nothing more.
	if n := len(rec.ids()); n != 9 {
		t.Errorf("%d sends, want 9", n)
	}
	// Backoff 10 s, then 20 s, then dead; the next delivery probes at once.
	if len(waits) < 2 || waits[0] != 10*time.Second || waits[1] != 20*time.Second {
		t.Errorf("waits %v, want 10s, 20s, ...", waits)
	}
}

func TestBackoffBounds(t *testing.T) {
	c := RouteConfig{Backoff: time.Second, MaxBackoff: time.Minute}
	for _, j := range []float64{0, 0.5, 0.999} {
		d := &Dispatcher{Jitter: func() float64 { return j }}
		for n := 1; n <= 12; n++ {
			full := min(time.Second<<(n-1), time.Minute)
			w := d.backoff(c, n)
			if w < full/2 || w > full {
				t.Errorf("jitter %v attempt %d: wait %v outside [%v, %v]", j, n, w, full/2, full)
			}
		}
	}
}

func TestPermanentAndUnknownRoute(t *testing.T) {
	h := newHarness(t, func(c *Config) {
		c.Routes = []RouteConfig{{Name: "oncall", Kind: RouteLog}, {Name: "gone", Kind: RouteLog}}
	})
	ctx := context.Background()
	mustAlert(t)(h.m.Point(ctx, suspectRow(1)))
	rec := &recorder{fail: func(Delivery) error { return Permanent(errors.New("rejected: 403")) }}
	route, _ := NewRouteWith(RouteConfig{Name: "oncall"}, rec)
	d := NewDispatcher(h.l, []*Route{route})
	d.Now = h.clock.Now
	d.Logger = discardLogger()
	if _, err := d.Flush(ctx); err != nil {
		t.Fatal(err)
	}
	for _, x := range h.l.all() {
		want := map[string]string{"oncall": "rejected: 403", "gone": `route "gone" is not configured`}[x.Route]
		if x.State != DeliveryDead || !strings.Contains(x.LastError, want) {
			t.Errorf("route %s: %s %q, want dead with %q", x.Route, x.State, x.LastError, want)
		}
	}
}

func TestRunStopsOnCancel(t *testing.T) {
	h := newHarness(t, func(c *Config) { c.Routes = []RouteConfig{{Name: "oncall", Kind: RouteLog}} })
	block := make(chan struct{})
	var once sync.Once
	started := make(chan struct{})
	rec := &recorder{}
	slow := senderFunc(func(ctx context.Context, d Delivery) error {
		once.Do(func() { close(started) })
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-block:
			return rec.Send(ctx, d)
		}
	})
	route, _ := NewRouteWith(RouteConfig{Name: "oncall", Timeout: time.Hour}, slow)
	d := NewDispatcher(h.l, []*Route{route})
	d.Interval = 5 * time.Millisecond
	h.m.cfg.OnEnqueue = d.Wake
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- d.Run(ctx) }()
	mustAlert(t)(h.m.Point(context.Background(), suspectRow(1)))
	select {
	case <-started:
	case <-time.After(5 * time.Second):
		t.Fatal("dispatcher never sent")
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("Run: %v", err)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("Run did not stop after cancel")
	}
	close(block)
	for _, x := range h.l.all() {
		if x.State != DeliveryPending || x.Attempts != 0 {
			t.Errorf("send cut by shutdown: %s with %d attempts, want pending with 0", x.State, x.Attempts)
		}
	}
}

type senderFunc func(ctx context.Context, d Delivery) error

func (f senderFunc) Send(ctx context.Context, d Delivery) error { return f(ctx, d) }

func TestBucket(t *testing.T) {
	b := newBucket(6, time.Minute) // one token per 10 s
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	for i := 0; i < 6; i++ {
		if ok, _ := b.take(t0); !ok {
			t.Fatalf("burst token %d refused", i)
		}
	}
	ok, next := b.take(t0)
	if ok || !next.Equal(t0.Add(10*time.Second)) {
		t.Errorf("empty bucket: ok %v next %v, want refused until +10s", ok, next)
	}
	if ok, _ := b.take(t0.Add(10 * time.Second)); !ok {
		t.Error("token not refilled after 10 s")
	}
	// Idle for an hour refills to the burst size, no more.
	later := t0.Add(time.Hour)
	n := 0
	for {
		if ok, _ := b.take(later); !ok {
			break
		}
		n++
	}
	if n != 6 {
		t.Errorf("after an hour %d tokens, want 6", n)
	}
}

func TestNewerEventsWaitBehindARetry(t *testing.T) {
	h := newHarness(t, func(c *Config) { c.Routes = []RouteConfig{{Name: "oncall", Kind: RouteLog}} })
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(1)))
	down := true
	rec := &recorder{fail: func(Delivery) error {
		if down {
			return errors.New("connection refused")
		}
		return nil
	}}
	route, _ := NewRouteWith(RouteConfig{Name: "oncall", Backoff: time.Minute, MaxBackoff: time.Minute}, rec)
	d := NewDispatcher(h.l, []*Route{route})
	d.Now, d.Logger = h.clock.Now, discardLogger()
	d.Jitter = func() float64 { return 0.999999 }
	if _, err := d.Flush(ctx); err != nil {
		t.Fatal(err)
	}
	// While the first event waits for its retry, the alert resolves.
	h.clock.Add(10 * time.Second)
	calm := suspectRow(1)
	calm.Outlier, calm.Influential, calm.Measures = false, false, nil
	mustAlert(t)(h.m.Point(ctx, calm))
	down = false
	if _, err := d.Flush(ctx); err != nil {
		t.Fatal(err)
	}
	if got := rec.ids(); len(got) != 1 {
		t.Fatalf("sent %v during the backoff, want only the first attempt", got)
	}
	h.clock.Add(time.Minute)
	if _, err := d.Flush(ctx); err != nil {
		t.Fatal(err)
	}
	want := []string{a.ID + "-1", a.ID + "-1", a.ID + "-2"}
	if got := rec.ids(); strings.Join(got, ",") != strings.Join(want, ",") {
		t.Errorf("sent %v, want %v (opened before resolved)", got, want)
	}
}
