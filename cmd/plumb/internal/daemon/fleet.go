package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync"
	"time"

	"plumb/cmd/plumb/internal/config"
	"plumb/store"
	"plumb/store/postgres"
)

// Several daemons, one PostgreSQL database.
//
// Each configured model is run by the daemon that holds its lease
// (postgres.DB.Acquire: a session advisory lock keyed by the model's
// name). A daemon starts with no model of its own; one acquirer per
// configured model waits for the lease, and every lease won or lost
// rebuilds the daemon's owned models from the store and restarts the
// pipeline with them (Run). A model owned by another daemon is neither
// watched, refreshed nor alerted here; its history shows in the fleet
// view. Ingest's read-position check keeps rows from being stored twice
// even in the moment two daemons both believe they own a model.

// owns reports whether this daemon runs the model now: always with
// SQLite (one daemon per file), only while it holds the model's lease
// with PostgreSQL.
func (d *Daemon) owns(model string) bool {
	if d.leases == nil {
		return true
	}
	return d.leases.held(model)
}

// leases keeps one acquirer per wanted model.
type leases struct {
	db  *postgres.DB
	who postgres.Owner
	log *slog.Logger

	// Poll and Check tune Acquire (postgres defaults when zero).
	poll, check time.Duration
	// outage, when set, tells whether a failure to connect is explained
	// by a server outage already logged.
	outage func() bool

	changed chan struct{} // one pending signal: a lease was won or lost

	mu      sync.Mutex
	owned   map[string]*postgres.Lease
	running map[string]context.CancelFunc
	wg      sync.WaitGroup
}

func newLeases(db *postgres.DB, who postgres.Owner, log *slog.Logger) *leases {
	return &leases{db: db, who: who, log: log, changed: make(chan struct{}, 1),
		owned: map[string]*postgres.Lease{}, running: map[string]context.CancelFunc{}}
}

func (l *leases) held(model string) bool {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.owned[model] != nil
}

func (l *leases) signal() {
	select {
	case l.changed <- struct{}{}:
	default:
	}
}

// want starts an acquirer for every model of cfg that has none and stops
// (releasing the lease) those of models no longer configured. A nil l
// does nothing.
func (l *leases) want(ctx context.Context, cfg *config.Config) {
	if l == nil {
		return
	}
	names := map[string]bool{}
	for _, m := range cfg.Models {
		names[m.Name] = true
	}
	l.mu.Lock()
	defer l.mu.Unlock()
	for name, stop := range l.running {
		if !names[name] {
			stop()
			delete(l.running, name)
		}
	}
	for name := range names {
		if l.running[name] != nil {
			continue
		}
		actx, stop := context.WithCancel(ctx)
		l.running[name] = stop
		l.wg.Add(1)
		go func() {
			defer l.wg.Done()
			l.keep(actx, name)
		}()
	}
}

// keep holds the model's lease until ctx ends: it waits for the lease,
// and when the lease is lost (the server restarted, the network went) it
// gives the model up and waits again.
func (l *leases) keep(ctx context.Context, name string) {
	log := l.log.With("model", name)
	backoff := time.Duration(0)
	failing := false
	for ctx.Err() == nil {
		lease, err := l.db.Acquire(ctx, name, l.who, postgres.AcquireOptions{Poll: l.poll, Check: l.check,
			Waiting: func(o postgres.Ownership) {
				log.Info("model owned by another daemon; standing by", "owner_host", o.Host, "owner_pid", o.PID,
					"owner", o.Label)
			}})
		if err != nil {
			if ctx.Err() != nil {
				return
			}
			if !failing && (l.outage == nil || !l.outage()) {
				log.Warn("cannot take the model's lease; retrying with backoff", "err", err)
			}
			failing = true
			backoff = min(max(2*backoff, 500*time.Millisecond), 30*time.Second)
			select {
			case <-ctx.Done():
				return
			case <-time.After(backoff):
			}
			continue
		}
		failing, backoff = false, 0
		log.Info("model owned by this daemon")
		l.mu.Lock()
		l.owned[name] = lease
		l.mu.Unlock()
		l.signal()
		select {
		case <-ctx.Done():
		case <-lease.Lost():
			log.Warn("lease on the model lost; stopping it and standing by")
		}
		l.mu.Lock()
		delete(l.owned, name)
		l.mu.Unlock()
		rctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		if err := lease.Release(rctx); err != nil && ctx.Err() == nil {
			log.Debug("release", "err", err)
		}
		cancel()
		if ctx.Err() == nil {
			l.signal()
		}
	}
}

// stop ends every acquirer and releases every lease.
func (l *leases) stop() {
	l.mu.Lock()
	for name, stop := range l.running {
		stop()
		delete(l.running, name)
	}
	l.mu.Unlock()
	l.wg.Wait()
}

// startFleet starts the acquirers and the server watch of a PostgreSQL
// daemon and returns the channel that says a lease changed hands (nil,
// which never fires, for SQLite).
func (d *Daemon) startFleet(ctx context.Context) <-chan struct{} {
	if d.health != nil {
		d.health.start(ctx)
	}
	if d.leases == nil {
		return nil
	}
	d.leases.want(ctx, d.cfg)
	return d.leases.changed
}

// stopFleet releases the leases (on shutdown) and stops the server watch.
func (d *Daemon) stopFleet() {
	if d.leases != nil {
		d.leases.stop()
	}
	if d.health != nil {
		d.health.stop()
	}
}

// rebuildOwned builds the owned models again from the store after a lease
// changed hands. Leases won or lost close together are taken in one
// rebuild. While the store cannot be read, it retries with backoff.
func (d *Daemon) rebuildOwned(ctx context.Context, changed <-chan struct{}) error {
	settle := time.NewTimer(200 * time.Millisecond)
	defer settle.Stop()
	for waiting := true; waiting; {
		select {
		case <-ctx.Done():
			return nil
		case <-changed:
		case <-settle.C:
			waiting = false
		}
	}
	backoff := time.Duration(0)
	for {
		err := d.build(ctx, d.cfg)
		if err == nil || ctx.Err() != nil {
			return nil
		}
		if backoff == 0 {
			d.log.Error("cannot load the owned models from the store; retrying with backoff", "err", err)
		}
		backoff = min(max(2*backoff, 500*time.Millisecond), 30*time.Second)
		select {
		case <-ctx.Done():
			return nil
		case <-time.After(backoff):
		}
	}
}

// ledger returns the alert ledger over the daemon's store. With a shared
// PostgreSQL store the dispatcher claims its deliveries (only those of
// routes this daemon has), so each is delivered once per route however
// many daemons share the outbox.
func (d *Daemon) ledger(cfg *config.Config) ledger {
	l := ledger{s: d.store}
	if d.pg == nil || d.opts.ReadOnly {
		return l
	}
	var routes []string
	slowest := time.Duration(0)
	for _, r := range cfg.Routes {
		routes = append(routes, r.Name)
		slowest = max(slowest, r.Timeout.Duration)
	}
	// A claim must outlast the dispatcher's pass over it: one route's
	// claimed deliveries are sent one after another, each within the
	// route's timeout.
	hold := time.Duration(claimBatch)*slowest + 30*time.Second
	pg := d.pg
	l.claim = func(ctx context.Context, now time.Time, limit int) ([]store.Delivery, error) {
		if limit <= 0 || limit > claimBatch {
			limit = claimBatch
		}
		return pg.ClaimRouteDeliveries(ctx, now, limit, hold, routes)
	}
	return l
}

// claimBatch is the most deliveries a daemon claims in one pass.
const claimBatch = 10

// health watches a PostgreSQL server: while it cannot be reached the
// daemon is not ready (/readyz says why), the outage is logged once when
// it starts and once when it ends, and the store errors it causes are
// not logged one by one.
type health struct {
	db    *postgres.DB
	log   *slog.Logger
	every time.Duration

	mu    sync.Mutex
	down  error
	since time.Time

	cancel context.CancelFunc
	done   chan struct{}
}

func newHealth(db *postgres.DB, log *slog.Logger) *health {
	return &health{db: db, log: log, every: time.Second}
}

func (h *health) start(ctx context.Context) {
	ctx, h.cancel = context.WithCancel(ctx)
	h.done = make(chan struct{})
	go func() {
		defer close(h.done)
		t := time.NewTicker(h.every)
		defer t.Stop()
		for {
			h.check(ctx)
			select {
			case <-ctx.Done():
				return
			case <-t.C:
			}
		}
	}()
}

func (h *health) stop() {
	if h.cancel != nil {
		h.cancel()
		<-h.done
	}
}

// check pings the server and records the outcome; it returns the outage
// (nil when the server answers).
func (h *health) check(ctx context.Context) error {
	pctx, cancel := context.WithTimeout(ctx, 2*time.Second)
	err := h.db.Ping(pctx)
	cancel()
	if ctx.Err() != nil {
		return h.err()
	}
	h.mu.Lock()
	defer h.mu.Unlock()
	switch {
	case err != nil && h.down == nil:
		h.down, h.since = err, time.Now()
		h.log.Error("state database unreachable; retrying with backoff until it is back", "state", h.db.String(), "err", err)
	case err != nil:
		h.down = err
	case h.down != nil:
		h.log.Info("state database reachable again", "state", h.db.String(), "outage", time.Since(h.since).Round(time.Millisecond))
		h.down = nil
	}
	return h.down
}

// err is the current outage, nil when the server answered the last ping.
func (h *health) err() error {
	if h == nil {
		return nil
	}
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.down != nil {
		return fmt.Errorf("state database unreachable since %s: %w", h.since.UTC().Format(time.RFC3339), h.down)
	}
	return nil
}

// outageLogged reports whether err (from the store) is explained by an outage
// already logged, checking the server at once if none is known yet. The
// pipeline logs store errors only when outageLogged is false.
func (d *Daemon) outageLogged(ctx context.Context, err error) bool {
	if d.health == nil || err == nil || errors.Is(err, context.Canceled) {
		return false
	}
	if d.health.err() != nil {
		return true
	}
	return d.health.check(context.WithoutCancel(ctx)) != nil
}
