package alerts

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"slices"
	"sync"
	"time"
)

// Dispatcher defaults.
const (
	DefaultPollInterval = time.Second
	DefaultBatch        = 100
)

// Dispatcher sends due deliveries through their routes. Each pass (Flush)
// takes the due deliveries, oldest first, and works each route's share in
// order in its own goroutine:
//
//   - a route over its rate limit holds the delivery back (pending, next
//     attempt when a token is free; no attempt counted);
//   - a success marks it delivered;
//   - a failure counts an attempt and schedules the next one after an
//     exponential backoff with jitter (Retry-After respected), or marks it
//     dead once the route's MaxAttempts is reached or the error is
//     Permanent; the route's other due deliveries wait for the same time
//     without counting an attempt, so an endpoint that is down is probed by
//     one event at a time, and events enqueued meanwhile wait too;
//   - a delivery for a route that is not configured is marked dead.
//
// Within a route, events go out in the order they were enqueued (by
// delivery ID) as long as one dispatcher runs; across a restart a newer
// event may overtake one that was waiting. Receivers order the events of
// one alert by the document's "sequence".
//
// Knobs may be changed before Run or the first Flush. A Dispatcher's Run
// and Flush must not be called concurrently.
type Dispatcher struct {
	// Interval between passes; 0 means DefaultPollInterval.
	Interval time.Duration
	// Batch is the most deliveries taken per pass; 0 means DefaultBatch.
	Batch int
	// Now is the clock; nil means time.Now.
	Now func() time.Time
	// Jitter returns a number in [0, 1); nil means math/rand/v2.
	Jitter func() float64
	// Logger receives failures; nil means slog.Default().
	Logger *slog.Logger
	// OnAttempt, when set, is told the outcome of every send attempt (for
	// metrics). It is called from the dispatcher's goroutines and must not
	// block.
	OnAttempt func(route string, ok bool)

	ledger Ledger
	routes map[string]*Route
	wake   chan struct{}

	mu      sync.Mutex
	buckets map[string]*bucket
	// holds is, per route, the time before which nothing is sent after a
	// failure, so newer events do not overtake the one being retried.
	holds map[string]time.Time
}

// NewDispatcher returns a Dispatcher over the ledger's outbox and the routes.
func NewDispatcher(l Ledger, routes []*Route) *Dispatcher {
	if l == nil {
		panic("alerts: NewDispatcher with nil Ledger")
	}
	d := &Dispatcher{ledger: l, routes: make(map[string]*Route, len(routes)),
		wake: make(chan struct{}, 1), buckets: make(map[string]*bucket), holds: make(map[string]time.Time)}
	for _, r := range routes {
		d.routes[r.Name()] = r
		if r.cfg.RateLimit > 0 {
			d.buckets[r.Name()] = newBucket(r.cfg.RateLimit, time.Minute)
		}
	}
	return d
}

// Wake asks a running dispatcher for a pass now (the Manager's
// Config.OnEnqueue can call it). It never blocks.
func (d *Dispatcher) Wake() {
	select {
	case d.wake <- struct{}{}:
	default:
	}
}

func (d *Dispatcher) now() time.Time {
	if d.Now != nil {
		return d.Now()
	}
	return time.Now()
}

func (d *Dispatcher) logger() *slog.Logger {
	if d.Logger != nil {
		return d.Logger
	}
	return slog.Default()
}

// Run makes passes until ctx is cancelled, then returns nil once the
// sends in flight have stopped (they are cancelled with ctx, so shutdown
// takes no longer than the slowest route needs to notice: a killed
// command's WaitDelay at most). A send cut off by shutdown counts no
// attempt; the delivery stays pending and is sent again on the next start.
func (d *Dispatcher) Run(ctx context.Context) error {
	every := d.Interval
	if every <= 0 {
		every = DefaultPollInterval
	}
	t := time.NewTimer(0)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return nil
		case <-t.C:
		case <-d.wake:
		}
		if _, err := d.Flush(ctx); err != nil && ctx.Err() == nil {
			d.logger().LogAttrs(ctx, slog.LevelError, "alert dispatch failed", slog.String("error", err.Error()))
		}
		if !t.Stop() {
			select {
			case <-t.C:
			default:
			}
		}
		t.Reset(every)
	}
}

// Flush makes one pass and returns how many deliveries it delivered.
func (d *Dispatcher) Flush(ctx context.Context) (int, error) {
	batch := d.Batch
	if batch <= 0 {
		batch = DefaultBatch
	}
	due, err := d.ledger.DueDeliveries(ctx, d.now(), batch)
	if err != nil {
		return 0, fmt.Errorf("alerts: due deliveries: %w", err)
	}
	var (
		order  []string
		groups = make(map[string][]Delivery)
	)
	for _, x := range due {
		if _, ok := groups[x.Route]; !ok {
			order = append(order, x.Route)
		}
		groups[x.Route] = append(groups[x.Route], x)
	}
	var (
		wg   sync.WaitGroup
		mu   sync.Mutex
		sent int
		errs []error
	)
	for _, name := range order {
		wg.Add(1)
		go func(name string, ds []Delivery) {
			defer wg.Done()
			n, err := d.work(ctx, name, ds)
			mu.Lock()
			sent += n
			errs = append(errs, err)
			mu.Unlock()
		}(name, groups[name])
	}
	wg.Wait()
	return sent, errors.Join(errs...)
}

// work sends one route's due deliveries in the order they were enqueued.
func (d *Dispatcher) work(ctx context.Context, name string, ds []Delivery) (int, error) {
	r := d.routes[name]
	slices.SortStableFunc(ds, func(a, b Delivery) int { return cmp.Compare(a.ID, b.ID) })
	d.mu.Lock()
	bk := d.buckets[name]
	// holdUntil, once set, postpones the rest of this pass's deliveries.
	holdUntil := d.holds[name]
	d.mu.Unlock()
	if !holdUntil.After(d.now()) {
		holdUntil = time.Time{}
	}
	var (
		sent int
		errs []error
	)
	defer func() {
		d.mu.Lock()
		if holdUntil.IsZero() {
			delete(d.holds, name)
		} else {
			d.holds[name] = holdUntil
		}
		d.mu.Unlock()
	}()
	for _, x := range ds {
		if ctx.Err() != nil {
			break
		}
		now := d.now()
		if r == nil {
			x.State, x.LastError, x.UpdatedAt = DeliveryDead, fmt.Sprintf("route %q is not configured", name), now
			errs = append(errs, d.update(ctx, x))
			continue
		}
		if !holdUntil.IsZero() {
			x.NextAttempt, x.UpdatedAt = holdUntil, now
			errs = append(errs, d.update(ctx, x))
			continue
		}
		if bk != nil {
			if ok, next := bk.take(now); !ok {
				x.NextAttempt, x.UpdatedAt = next, now
				holdUntil = next
				errs = append(errs, d.update(ctx, x))
				continue
			}
		}
		err := r.Send(ctx, x)
		if err != nil && ctx.Err() != nil {
			// Shutdown cut the send short: no attempt, still pending.
			break
		}
		now = d.now()
		x.Attempts++
		x.UpdatedAt = now
		if d.OnAttempt != nil {
			d.OnAttempt(name, err == nil)
		}
		if err == nil {
			x.State, x.LastError = DeliveryDelivered, ""
			sent++
			errs = append(errs, d.update(ctx, x))
			continue
		}
		x.LastError = truncate(err.Error(), 1000)
		var perm *PermanentError
		if errors.As(err, &perm) || x.Attempts >= r.cfg.MaxAttempts {
			x.State = DeliveryDead
			d.logger().LogAttrs(ctx, slog.LevelError, "alert delivery dead-lettered",
				slog.String("route", name), slog.String("event_id", x.EventID),
				slog.Int("attempts", x.Attempts), slog.String("error", x.LastError))
		} else {
			wait := d.backoff(r.cfg, x.Attempts)
			var ra *RetryAfterError
			if errors.As(err, &ra) && ra.After > wait {
				wait = min(ra.After, r.cfg.MaxBackoff)
			}
			x.NextAttempt = now.Add(wait)
			holdUntil = x.NextAttempt
			d.logger().LogAttrs(ctx, slog.LevelWarn, "alert delivery failed, will retry",
				slog.String("route", name), slog.String("event_id", x.EventID),
				slog.Int("attempts", x.Attempts), slog.Time("next_attempt", x.NextAttempt),
				slog.String("error", x.LastError))
		}
		errs = append(errs, d.update(ctx, x))
	}
	return sent, errors.Join(errs...)
}

// update stores a delivery's state even while shutting down.
func (d *Dispatcher) update(ctx context.Context, x Delivery) error {
	ctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), 5*time.Second)
	defer cancel()
	if err := d.ledger.UpdateDelivery(ctx, x); err != nil {
		return fmt.Errorf("alerts: update delivery %d (%s): %w", x.ID, x.EventID, err)
	}
	return nil
}

// backoff is the wait after the n-th failed attempt: Backoff * 2^(n-1),
// capped at MaxBackoff, of which a random half to all is taken.
func (d *Dispatcher) backoff(c RouteConfig, n int) time.Duration {
	w := c.Backoff
	for i := 1; i < n && w < c.MaxBackoff; i++ {
		w *= 2
	}
	w = min(w, c.MaxBackoff)
	j := rand.Float64
	if d.Jitter != nil {
		j = d.Jitter
	}
	return w/2 + time.Duration(j()*float64(w/2))
}

func truncate(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return s[:n] + "..."
}

// bucket is a token bucket: size tokens, refilled evenly over per.
type bucket struct {
	size   float64
	every  time.Duration // one token per every
	tokens float64
	at     time.Time
}

func newBucket(size int, per time.Duration) *bucket {
	return &bucket{size: float64(size), every: per / time.Duration(size), tokens: float64(size)}
}

// take takes a token at now; without one it returns when the next is due.
func (b *bucket) take(now time.Time) (bool, time.Time) {
	if b.at.IsZero() {
		b.at = now
	}
	if now.After(b.at) {
		b.tokens = min(b.size, b.tokens+float64(now.Sub(b.at))/float64(b.every))
		b.at = now
	}
	if b.tokens >= 1 {
		b.tokens--
		return true, time.Time{}
	}
	return false, now.Add(time.Duration((1 - b.tokens) * float64(b.every)))
}
