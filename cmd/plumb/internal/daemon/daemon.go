// Package daemon wires plumb's pipeline in one place:
//
//	watcher (new rows of a file)
//	  -> ingest: decode, judge each row against the online fit that
//	     includes it, commit rows + read position in one transaction
//	  -> refresh (debounced): refit, full influence table, fragility,
//	     suggestions, fit summary and verdict changes to the store
//	  -> alerts manager (rules, lifecycle, outbox)
//	  -> dispatcher (routes)
//
// and gives the view (View) that the web server and the report read; the
// command that runs the daemon serves it over HTTP. Models are isolated:
// one model's failure never stops another.
package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"sort"
	"sync"
	"sync/atomic"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/metrics"
	"plumb/engine"
	"plumb/store"
	"plumb/store/backend"
	"plumb/store/postgres"
	"plumb/store/sqlite"
	"plumb/watcher"
)

// Options are the daemon's knobs beyond the config file.
type Options struct {
	Logger *slog.Logger
	// Progress, when set, receives backfill progress (for a terminal bar).
	Progress func(watcher.Progress)
	// Now is the clock; nil means time.Now.
	Now func() time.Time
	// OnAlert, when set, is called after every alert change the pipeline
	// makes (the demo narrates with it).
	OnAlert func(*alerts.Alert)
	// ReadOnly computes fits for the view without writing anything: no
	// fit records, no model states, no alerts (the report command).
	ReadOnly bool
}

// Daemon is one running plumb. New opens the store; Run watches until its
// context is cancelled; Close releases the store.
type Daemon struct {
	cfg   *config.Config
	opts  Options
	log   *slog.Logger
	store store.Store

	metrics  *metricsHook
	alerts   *alerts.Manager
	dispatch *alerts.Dispatcher

	mu     sync.RWMutex
	models map[string]*watchedModel
	order  []string
	ready  bool

	kick chan struct{}
	lock *sqlite.Lock // nil for a read-only daemon and for PostgreSQL

	// pg is the store when it is a shared PostgreSQL database; leases
	// (nil for SQLite and read-only daemons) says which configured
	// models this daemon owns, and health watches the server.
	pg     *postgres.DB
	leases *leases
	health *health

	// running is the dispatcher Run started: a rebuild (reload, lease)
	// makes a new one, but alerts wake the one that runs.
	running atomic.Pointer[alerts.Dispatcher]

	qmu   sync.Mutex
	quiet quietState // decide.go
}

// New opens the state database and prepares every model.
func New(ctx context.Context, cfg *config.Config, opts Options) (*Daemon, error) {
	if opts.Logger == nil {
		opts.Logger = slog.Default()
	}
	if opts.Now == nil {
		opts.Now = time.Now
	}
	path := cfg.Resolve(cfg.State)
	shared := backend.IsPostgres(path)
	if !shared {
		if err := os.MkdirAll(dirOf(path), 0o755); err != nil {
			return nil, fmt.Errorf("state folder: %w", err)
		}
	}
	// One writing daemon per SQLite state: a second one would store rows
	// twice and fight over alerts. Read-only users (report) do not lock.
	// A PostgreSQL state is shared: each model has its own lease instead.
	var lock *sqlite.Lock
	if !opts.ReadOnly && !shared {
		var err error
		if lock, err = sqlite.AcquireLock(path); err != nil {
			return nil, err
		}
	}
	db, err := backend.Open(ctx, path)
	if err != nil {
		lock.Release()
		return nil, err
	}
	d := &Daemon{cfg: cfg, opts: opts, log: opts.Logger, store: db, kick: make(chan struct{}, 1),
		metrics: &metricsHook{m: metrics.New()}, lock: lock}
	if pg, ok := db.(*postgres.DB); ok {
		d.pg = pg
		d.health = newHealth(pg, d.log)
		if !opts.ReadOnly {
			d.leases = newLeases(pg, postgres.ThisProcess(cfg.Path), d.log)
			d.leases.outage = func() bool { return d.health.err() != nil }
		}
	}
	if err := d.build(ctx, cfg); err != nil {
		db.Close()
		lock.Release()
		return nil, err
	}
	return d, nil
}

func dirOf(p string) string {
	for i := len(p) - 1; i >= 0; i-- {
		if os.IsPathSeparator(p[i]) {
			return p[:i]
		}
	}
	return "."
}

func (d *Daemon) now() time.Time { return d.opts.Now().UTC() }

// Store returns the daemon's store (for commands that read history).
func (d *Daemon) Store() store.Store { return d.store }

// Alerts returns the alert manager.
func (d *Daemon) Alerts() *alerts.Manager { return d.alerts }

// Registry returns the daemon's metrics registry, for /metrics.
func (d *Daemon) Registry() *prometheus.Registry { return d.metrics.m.Registry() }

// build makes the models, the alert manager and the routes from cfg.
func (d *Daemon) build(ctx context.Context, cfg *config.Config) error {
	models := map[string]*watchedModel{}
	var order []string
	var errs []error
	for _, mc := range cfg.Models {
		if !d.owns(mc.Name) {
			continue // another daemon owns it, or its lease is pending
		}
		m, err := newWatchedModel(d, mc)
		if err != nil {
			errs = append(errs, err)
			continue
		}
		models[mc.Name] = m
		order = append(order, mc.Name)
	}
	if len(errs) > 0 {
		return errors.Join(errs...)
	}
	routes := make([]alerts.RouteConfig, len(cfg.Routes))
	for i, r := range cfg.Routes {
		routes[i] = alerts.RouteConfig{
			Name: r.Name, Kind: r.Kind, URL: r.URL, SecretEnv: r.SecretEnv, SecretFile: cfg.Resolve(r.SecretFile),
			Path: cfg.Resolve(r.Path), Argv: r.Argv, Timeout: r.Timeout.Duration, MaxAttempts: r.MaxAttempts,
			Backoff: r.Backoff.Duration, RateLimit: r.RatePerMinute, Kinds: r.Kinds, MinSeverity: r.MinSeverity,
		}
	}
	ac := alerts.Config{
		Rules:       alerts.DefaultRules(),
		ModelRules:  map[string]alerts.Rules{},
		Routes:      routes,
		ModelRoutes: map[string][]string{},
		Now:         d.opts.Now,
		Quiet:       d.quietAt,
		// The alert page's address goes into every alert (its "url").
		DashboardURL: cfg.PublicURL,
	}
	if h, err := os.Hostname(); err == nil {
		ac.Host = h
	}
	for _, mc := range cfg.Models {
		if !d.owns(mc.Name) {
			continue
		}
		ac.ModelRules[mc.Name] = rulesFor(mc)
		if len(mc.Routes) > 0 {
			ac.ModelRoutes[mc.Name] = mc.Routes
		}
	}
	var dispatch *alerts.Dispatcher
	ac.OnEnqueue = func() {
		if r := d.running.Load(); r != nil {
			r.Wake()
		} else if dispatch != nil {
			dispatch.Wake()
		}
	}
	am, err := alerts.NewManager(d.ledger(cfg), ac)
	if err != nil {
		return err
	}
	// Only a daemon that sends builds the routes: that reads their
	// secrets, which a read-only reader (plumb report) need not have.
	sending := routes
	if d.opts.ReadOnly {
		sending = nil
	}
	rs, err := alerts.NewRoutes(sending, alerts.RouteOptions{Logger: d.log})
	if err != nil {
		return err
	}
	dispatch = alerts.NewDispatcher(d.ledger(cfg), rs)
	dispatch.Logger = d.log
	dispatch.OnAttempt = d.metrics.delivery

	if err := d.loadQuiet(ctx); err != nil {
		return fmt.Errorf("quiet periods: %w", err)
	}
	for _, name := range order {
		m := models[name]
		if err := m.restore(ctx, d.store); err != nil {
			return fmt.Errorf("model %q: restore: %w", name, err)
		}
		if err := m.restoreHeldSuspects(ctx); err != nil {
			return fmt.Errorf("model %q: restore: %w", name, err)
		}
		// Silence is measured from the last stored arrival, across restarts.
		if !m.lastArrival.IsZero() {
			if err := am.Activity(ctx, name, m.lastArrival); err != nil {
				return fmt.Errorf("model %q: %w", name, err)
			}
		}
		d.metrics.m.AddModel(name)
	}
	d.mu.Lock()
	d.models, d.order, d.alerts, d.dispatch, d.cfg = models, order, am, dispatch, cfg
	d.mu.Unlock()
	return nil
}

func rulesFor(mc config.Model) alerts.Rules {
	r := alerts.DefaultRules()
	a := mc.Alerts
	set := func(dst *alerts.Rule, src config.Rule) {
		dst.Enabled = *src.Enabled
		dst.Severity = alerts.Severity(src.Severity)
		dst.Renotify = a.Renotify.Duration
	}
	set(&r.SuspectPoint.Rule, a.SuspectPoint)
	set(&r.FragileFit.Rule, a.FragileFit)
	set(&r.Drift.Rule, a.Drift.Rule)
	set(&r.Blocked.Rule, a.Blocked)
	r.SuspectPoint.Test = mc.Judge.OutlierTest
	r.FragileFit.Limit = mc.Fragility.Limit
	r.Drift.K = a.Drift.K
	r.Drift.BaselineRows = a.Drift.BaselineRows
	if a.Drift.Tolerance > 0 {
		r.Drift.Tolerance = map[string]float64{}
		for _, cp := range mc.Checkpoints {
			name := cp.Name
			if name == "" {
				name = "checkpoint " + formatAt(cp.At)
			}
			r.Drift.Tolerance[name] = a.Drift.Tolerance
		}
	}
	r.Blocked.Silence = a.Silence.Duration
	r.FormLapse = formRule(mc)
	return r
}

// Reload replaces the configuration: models that were added start, models
// that were removed stop (their history stays), models that changed are
// rebuilt from the store. It is called between two runs of the pipeline,
// so no batch is in hand.
func (d *Daemon) Reload(ctx context.Context, cfg *config.Config) error {
	if cfg.Resolve(cfg.State) != d.cfg.Resolve(d.cfg.State) {
		return errors.New("reload: the state database cannot change while running; restart plumb")
	}
	old := d.cfg
	if err := d.build(ctx, cfg); err != nil {
		d.mu.Lock()
		d.cfg = old
		d.mu.Unlock()
		return err
	}
	return nil
}

// Run watches every model's folder and serves HTTP until ctx is cancelled,
// or until reload receives a value, in which case Run loads the config
// again, applies it and goes on. It returns after the batch in hand is
// committed.
func (d *Daemon) Run(ctx context.Context, reload <-chan *config.Config) error {
	dctx, stopDispatch := context.WithCancel(context.Background())
	var dispWG sync.WaitGroup
	dispWG.Add(1)
	go func() {
		defer dispWG.Done()
		d.runDispatcher(dctx)
	}()
	defer func() {
		// Give pending deliveries a last short chance, then stop.
		fctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		d.dispatcherFlush(fctx)
		cancel()
		stopDispatch()
		dispWG.Wait()
	}()

	changed := d.startFleet(ctx)
	defer d.stopFleet()

	for {
		runCtx, stop := context.WithCancel(ctx)
		errc := make(chan error, 1)
		go func() { errc <- d.runPipeline(runCtx) }()
		select {
		case <-changed:
			// A lease was won or lost: rebuild the owned models from the
			// store (another daemon may have written them meanwhile).
			stop()
			if err := <-errc; err != nil && !errors.Is(err, context.Canceled) {
				return err
			}
			if err := d.rebuildOwned(ctx, changed); err != nil {
				return err
			}
		case err := <-errc:
			stop()
			if errors.Is(err, errRestart) {
				continue
			}
			return err
		case cfg := <-reload:
			stop()
			if err := <-errc; err != nil && !errors.Is(err, context.Canceled) {
				return err
			}
			if err := d.Reload(ctx, cfg); err != nil {
				d.log.Error("reload refused; keeping the running configuration", "err", err)
			} else {
				d.leases.want(ctx, cfg)
				d.log.Info("configuration reloaded", "models", len(cfg.Models), "routes", len(cfg.Routes))
			}
		}
	}
}

func (d *Daemon) runDispatcher(ctx context.Context) {
	d.mu.RLock()
	disp := d.dispatch
	d.mu.RUnlock()
	d.running.Store(disp)
	if err := disp.Run(ctx); err != nil && !errors.Is(err, context.Canceled) {
		d.log.Error("dispatcher", "err", err)
	}
}

func (d *Daemon) dispatcherFlush(ctx context.Context) {
	d.mu.RLock()
	disp := d.dispatch
	d.mu.RUnlock()
	if _, err := disp.Flush(ctx); err != nil && !errors.Is(err, context.Canceled) && !errors.Is(err, context.DeadlineExceeded) {
		d.log.Warn("final delivery pass", "err", err)
	}
}

// runPipeline runs the watcher and the refresh loop for the current
// configuration until ctx is cancelled.
func (d *Daemon) runPipeline(ctx context.Context) error {
	d.mu.RLock()
	cfg := d.cfg
	models := d.models
	order := d.order
	d.mu.RUnlock()

	var srcs []watcher.Source
	var missing []string
	for _, name := range order {
		m := models[name]
		folder := cfg.Resolve(m.cfg.Folder)
		if fi, err := os.Stat(folder); err != nil || !fi.IsDir() {
			// One model's missing folder never stops the others: the model
			// waits, blocked with the reason, and the pipeline restarts
			// when the folder appears.
			reason := fmt.Sprintf("folder %s does not exist (or is not a folder); waiting for it", folder)
			m.setState(ctx, stateBlocked, reason, alerts.CauseNotFittable)
			missing = append(missing, folder)
			continue
		}
		states, err := d.store.Sources(ctx, name)
		if err != nil {
			return err
		}
		m.sweepRefused(ctx, folder)
		srcs = append(srcs, watcher.Source{
			Model:     name,
			Folder:    folder,
			Pattern:   m.cfg.Pattern,
			Recursive: m.cfg.Recursive,
			Dialect:   m.cfg.Dialect(),
			Numeric:   m.numeric(),
			Text:      m.text(),
			States:    toFileStates(states),
		})
	}
	var w *watcher.Watcher
	if len(srcs) > 0 {
		var err error
		w, err = watcher.New(watcher.Config{
			Sources:   srcs,
			Debounce:  cfg.Watch.Debounce.Duration,
			IdleFlush: cfg.Watch.IdleFlush.Duration,
			Rescan:    cfg.Watch.Rescan.Duration,
			Progress:  d.opts.Progress,
		}, sink{d}, d.log)
		if err != nil {
			return err
		}
		defer w.Close()
	}

	// pctx ends with ctx, or earlier when a missing folder appears and the
	// pipeline must be built again.
	pctx, stopPipeline := context.WithCancel(ctx)
	defer stopPipeline()
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		d.refreshLoop(pctx, cfg.Watch.Refresh.Duration)
	}()
	if len(missing) > 0 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			if d.awaitFolders(pctx, missing, cfg.Watch.Rescan.Duration) {
				stopPipeline()
			}
		}()
	}
	var err error
	if w != nil {
		err = w.Run(pctx)
	} else {
		<-pctx.Done() // every folder is missing: wait for one to appear
	}
	stopPipeline()
	wg.Wait()
	if errors.Is(err, context.Canceled) {
		err = nil
	}
	if err == nil && ctx.Err() == nil {
		return errRestart // a missing folder appeared
	}
	return err
}

// errRestart asks Run to build the pipeline again.
var errRestart = errors.New("daemon: restart the pipeline")

// awaitFolders polls the missing folders every interval and reports true
// as soon as one exists, false when ctx ends.
func (d *Daemon) awaitFolders(ctx context.Context, folders []string, every time.Duration) bool {
	if every <= 0 {
		every = 5 * time.Second
	}
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return false
		case <-t.C:
		}
		for _, f := range folders {
			if fi, err := os.Stat(f); err == nil && fi.IsDir() {
				d.log.Info("watched folder appeared", "folder", f)
				return true
			}
		}
	}
}

// refreshLoop refreshes dirty models, each at most once per interval, and
// ticks the alert manager (silence checks, reminders).
func (d *Daemon) refreshLoop(ctx context.Context, every time.Duration) {
	if every <= 0 {
		every = time.Second
	}
	t := time.NewTicker(every)
	defer t.Stop()
	first := true
	for {
		d.mu.RLock()
		order, models := d.order, d.models
		d.mu.RUnlock()
		for _, name := range order {
			if ctx.Err() != nil {
				return
			}
			if err := models[name].ref.refresh(ctx); err != nil && ctx.Err() == nil && !d.outageLogged(ctx, err) {
				models[name].log.Error("refresh", "err", err)
			}
		}
		if first {
			d.mu.Lock()
			d.ready = true
			d.mu.Unlock()
			first = false
		}
		if err := d.loadQuiet(ctx); err != nil && ctx.Err() == nil {
			d.log.Error("quiet periods", "err", err)
		}
		if err := d.alerts.Tick(ctx, d.opts.Now()); err != nil && ctx.Err() == nil && !d.outageLogged(ctx, err) {
			d.log.Error("alert tick", "err", err)
		}
		if err := d.summariseQuiet(ctx); err != nil && ctx.Err() == nil {
			d.log.Error("quiet summary", "err", err)
		}
		d.metrics.alertsOpen(ctx, d.store)
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		case <-d.kick:
		}
	}
}

// sink receives the watcher's batches and notices.
type sink struct{ d *Daemon }

func (s sink) Deliver(ctx context.Context, b watcher.Batch) error {
	s.d.mu.RLock()
	m := s.d.models[b.Model]
	s.d.mu.RUnlock()
	if m == nil {
		return fmt.Errorf("batch for unknown model %q", b.Model)
	}
	// The batch is committed even if ctx is cancelled meanwhile: SIGTERM
	// finishes the batch in hand.
	if err := m.ingest(context.WithoutCancel(ctx), b); err != nil {
		if !s.d.outageLogged(ctx, err) {
			m.log.Error("ingest", "file", b.Path, "err", err)
		}
		return err
	}
	m.fileReadable(ctx, b.Path)
	if s.d.alerts != nil && len(b.Records) > 0 {
		if err := s.d.alerts.Activity(ctx, b.Model, s.d.opts.Now()); err != nil {
			m.log.Warn("alert activity", "err", err)
		}
	}
	return nil
}

func (s sink) Notice(ctx context.Context, n watcher.Notice) {
	s.d.mu.RLock()
	m := s.d.models[n.Model]
	s.d.mu.RUnlock()
	if m == nil {
		return
	}
	switch {
	case n.Blocked && n.Refused:
		m.refuseFile(ctx, n) // a stray file: refused alone, the model goes on
	case n.Kind == watcher.Unblocked:
		m.clearFileBlock(ctx, n.Path, n.Detail)
	case n.Blocked && (n.Kind == watcher.HeaderChanged || n.Kind == watcher.Error):
		what := "header of %s changed: %s"
		if n.Kind == watcher.Error {
			what = "%s cannot be read: %s"
		}
		reason := fmt.Sprintf(what, n.Path, n.Detail)
		m.mu.Lock()
		m.headerBlocked[n.Path] = reason
		m.mu.Unlock()
		m.setState(ctx, stateBlocked, reason, alerts.CauseHeaderChanged)
		if err := s.d.blocked(ctx, alerts.BlockedCondition{Model: n.Model, Blocked: true, Cause: alerts.CauseHeaderChanged, Reason: reason}); err != nil {
			m.log.Error("alert", "err", err)
		}
	default:
		m.log.Info("file notice", "file", n.Path, "kind", n.Kind.String(), "detail", n.Detail)
	}
}

func toFileStates(ss []store.Source) []watcher.FileState {
	out := make([]watcher.FileState, len(ss))
	for i, s := range ss {
		out[i] = watcher.FileState{
			Path: s.Path, Generation: s.Generation, Inode: s.Inode, Size: s.Size, Offset: s.Offset,
			Line: s.Line, Fingerprint: s.Fingerprint, FingerprintLen: s.FingerprintLen, Header: splitHeader(s.Header),
			Digest: s.Digest,
		}
	}
	return out
}

func sourceOf(model string, b watcher.Batch) store.Source {
	return store.Source{
		Model: model, Path: b.Path, Generation: b.Generation, Inode: b.Inode, Size: b.Size,
		Offset: b.EndOffset, Line: b.EndLine, Fingerprint: b.Fingerprint, FingerprintLen: b.FingerprintLen,
		Header: joinHeader(b.Header), Digest: b.Digest,
	}
}

func joinHeader(h []string) string {
	s := ""
	for i, c := range h {
		if i > 0 {
			s += "\x1f"
		}
		s += c
	}
	return s
}

func splitHeader(s string) []string {
	if s == "" {
		return nil
	}
	var out []string
	start := 0
	for i := 0; i < len(s); i++ {
		if s[i] == '\x1f' {
			out = append(out, s[start:i])
			start = i + 1
		}
	}
	return append(out, s[start:])
}

// RefreshAll refits every model once, now, for the view (the report
// command uses it with Options.ReadOnly, beside or without a running
// daemon).
func (d *Daemon) RefreshAll(ctx context.Context) error {
	d.mu.RLock()
	order, models := d.order, d.models
	d.mu.RUnlock()
	for _, name := range order {
		m := models[name]
		m.mu.Lock()
		m.ref.dirty = true
		m.mu.Unlock()
		if err := m.ref.refresh(ctx); err != nil {
			return fmt.Errorf("model %q: %w", name, err)
		}
	}
	d.mu.Lock()
	d.ready = true
	d.mu.Unlock()
	return nil
}

// Close releases the store and the state's lock.
func (d *Daemon) Close() error {
	err := d.store.Close()
	if lerr := d.lock.Release(); err == nil {
		err = lerr
	}
	return err
}

// Summary is what a run did, for the demo's closing lines.
type Summary struct {
	Rows        int64          `json:"rows"`
	Quarantined int64          `json:"quarantined"`
	Missing     int64          `json:"missing"`
	Fits        int64          `json:"fits"`
	Alerts      []AlertSummary `json:"alerts"`
}

// AlertSummary is one alert in a Summary.
type AlertSummary struct {
	ID       string `json:"id"`
	Model    string `json:"model"`
	Kind     string `json:"kind"`
	Severity string `json:"severity"`
	Subject  string `json:"subject"`
	State    string `json:"state"`
}

// Summary counts rows, fits and alerts across every model.
func (d *Daemon) Summary(ctx context.Context) (Summary, error) {
	var s Summary
	d.mu.RLock()
	models := d.models
	d.mu.RUnlock()
	for _, m := range models {
		m.mu.Lock()
		s.Rows += m.rowsAccepted
		s.Quarantined += m.quarantined
		s.Missing += m.missing
		s.Fits += m.ref.fits
		m.mu.Unlock()
	}
	as, err := d.store.Alerts(ctx, store.AlertQuery{})
	if err != nil {
		return s, err
	}
	for _, a := range as {
		s.Alerts = append(s.Alerts, AlertSummary{ID: a.ID, Model: a.Model, Kind: a.Kind, Severity: a.Severity, Subject: a.Subject, State: a.State})
	}
	sort.Slice(s.Alerts, func(i, j int) bool { return s.Alerts[i].ID < s.Alerts[j].ID })
	return s, nil
}

// metricsHook feeds the Prometheus collectors.
type metricsHook struct{ m *metrics.Metrics }

func (h *metricsHook) rows(model string, accepted, quarantined int) {
	h.m.RowsIngested(model, accepted)
	h.m.RowsQuarantined(model, quarantined)
}

func (h *metricsHook) fit(model string, took time.Duration, n int, frag *engine.FragilityResult, maxCook float64) {
	h.m.FitDone(model, took)
	found := frag != nil && frag.Index > 0
	idx := 0
	if found {
		idx = frag.Index
	}
	h.m.FitState(model, n, maxCook, idx, found)
}

func (h *metricsHook) delivery(route string, ok bool) { h.m.Delivery(route, ok) }

func (h *metricsHook) alertsOpen(ctx context.Context, s store.Store) {
	counts := map[string]int{}
	for _, k := range alerts.Kinds {
		counts[string(k)] = 0
	}
	for _, st := range []string{"open", "acknowledged"} {
		as, err := s.Alerts(ctx, store.AlertQuery{State: st})
		if err != nil {
			return
		}
		for _, a := range as {
			counts[a.Kind]++
		}
	}
	for k, n := range counts {
		h.m.SetAlertsOpen(k, n)
	}
}

// The alert calls of the pipeline go through these, so that Options.OnAlert
// sees every change.

func (d *Daemon) point(ctx context.Context, c alerts.PointCondition) error {
	return report(d, ctx, c, d.alerts.Point)
}

func (d *Daemon) fragility(ctx context.Context, c alerts.FragilityCondition) error {
	return report(d, ctx, c, d.alerts.Fragility)
}

func (d *Daemon) drift(ctx context.Context, c alerts.DriftCondition) error {
	return report(d, ctx, c, d.alerts.Drift)
}

func (d *Daemon) blocked(ctx context.Context, c alerts.BlockedCondition) error {
	return report(d, ctx, c, d.alerts.Blocked)
}

// report passes one condition to the alert manager's method for it;
// a read-only daemon reports nothing.
func report[C any](d *Daemon, ctx context.Context, c C, to func(context.Context, C) (*alerts.Alert, error)) error {
	if d.opts.ReadOnly {
		return nil
	}
	return d.alerted(to(ctx, c))
}

func (d *Daemon) alerted(a *alerts.Alert, err error) error {
	if err == nil && a != nil && d.opts.OnAlert != nil {
		d.opts.OnAlert(a)
	}
	return err
}
