package alerts

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"sort"
	"strings"
	"sync"
	"time"
)

// ErrNotOpen is returned (wrapped) by Ack and Resolve for an alert that is
// already resolved.
var ErrNotOpen = errors.New("alerts: alert is resolved")

// notOpenError says once that an alert is resolved (it matches ErrNotOpen).
type notOpenError struct{ id, verb string }

func (e *notOpenError) Error() string {
	return "alerts: alert " + e.id + " is resolved and cannot be " + e.verb
}
func (e *notOpenError) Is(target error) bool { return target == ErrNotOpen }

// ErrChanged is what a Ledger's conditional PutAlert returns (wrapped)
// when the stored alert is not at the expected revision: another writer
// changed it since it was read.
var ErrChanged = errors.New("alerts: the alert changed since it was read")

// maxRetries bounds how often a change is read and applied again after a
// conflicting write by another process.
const maxRetries = 8

// Config configures a Manager.
type Config struct {
	// Rules apply to every model without an entry in ModelRules. Every
	// model named in ModelRules counts as fed when NewManager runs, so a
	// feed that never delivers a row is still caught by the silence rule.
	Rules      Rules
	ModelRules map[string]Rules
	// Routes are the configured routes (only their names and filters are
	// used here; the Dispatcher sends). ModelRoutes names a model's own
	// routes; a model without an entry uses every route.
	Routes      []RouteConfig
	ModelRoutes map[string][]string
	// Host, when set, goes into the event source ("plumb://<host>/<model>").
	Host string
	// DataSchema is the dataschema attribute; "" means SchemaID.
	DataSchema string
	// DashboardURL, when set, is the dashboard's public address (e.g.
	// "https://plumb.example.org"); every alert document then carries
	// its page's URL, DashboardURL + "/alerts/" + id.
	DashboardURL string
	// Now is the clock; nil means time.Now.
	Now func() time.Time
	// OnEnqueue, when set, is called after events were stored (for
	// instance Dispatcher.Wake). It must not block.
	OnEnqueue func()
	// Quiet, when set, reports whether a quiet period holds the model's
	// deliveries at now. While it does, alerts are raised, updated and
	// stored as ever, but their events are not enqueued (the alert is
	// marked Held); QuietSummary sends one summary when the period ends.
	// It must not call the Manager.
	Quiet func(model string, now time.Time) bool
}

// Manager applies the rules to reported conditions and keeps the alerts'
// lifecycle. It is safe for use by multiple goroutines; calls are
// serialised. It caches which alerts are not resolved, but reads an
// alert's current record from the ledger before changing it, and Tick
// reloads the cache, so an acknowledgement or resolution written by
// another Manager on the same ledger (an offline command) is respected.
// Every write is conditional on the revision read: a change written by
// another process in between makes the write fail with ErrChanged, and
// the Manager reads the alert again and reapplies its change, so nothing
// written in between is lost.
// Only Managers change alerts: another process may acknowledge or resolve,
// but only the daemon's Manager should report conditions.
type Manager struct {
	ledger Ledger
	cfg    Config

	mu       sync.Mutex
	loaded   bool
	open     map[string]cached // every alert not resolved, by id
	lastData map[string]time.Time
}

// NewManager validates the configuration and returns a Manager. It does not
// touch the ledger; the open alerts are loaded on first use.
func NewManager(l Ledger, c Config) (*Manager, error) {
	if l == nil {
		panic("alerts: NewManager with nil Ledger")
	}
	if err := c.Rules.Validate(); err != nil {
		return nil, err
	}
	for model, r := range c.ModelRules {
		if err := r.Validate(); err != nil {
			var ce *ConfigError
			if errors.As(err, &ce) {
				ce.Section = fmt.Sprintf("model %q %s", model, ce.Section)
			}
			return nil, err
		}
	}
	if err := ValidateRoutes(c.Routes); err != nil {
		return nil, err
	}
	for model, names := range c.ModelRoutes {
		for _, n := range names {
			found := false
			for _, r := range c.Routes {
				found = found || r.Name == n
			}
			if !found {
				return nil, cfgErr(fmt.Sprintf("model %q", model), "routes", ErrInvalid, "no route is named %q", n)
			}
		}
	}
	if c.DataSchema == "" {
		c.DataSchema = SchemaID
	}
	if c.Now == nil {
		c.Now = time.Now
	}
	m := &Manager{ledger: l, cfg: c, open: make(map[string]cached), lastData: make(map[string]time.Time)}
	start := c.Now()
	for model := range c.ModelRules {
		m.lastData[model] = start
	}
	return m, nil
}

// cached is an alert as last read or written: its document and revision.
type cached struct {
	doc string
	rev int64
}

func (m *Manager) rules(model string) Rules {
	if r, ok := m.cfg.ModelRules[model]; ok {
		return r
	}
	return m.cfg.Rules
}

// load reads every alert that is not resolved into the cache, once.
func (m *Manager) load(ctx context.Context) error {
	if m.loaded {
		return nil
	}
	const page = 500
	for _, st := range []State{StateOpen, StateAcknowledged} {
		for off := 0; ; off += page {
			recs, err := m.ledger.Alerts(ctx, AlertQuery{State: string(st), Limit: page, Offset: off})
			if err != nil {
				return fmt.Errorf("alerts: load %s alerts: %w", st, err)
			}
			for _, r := range recs {
				if State(r.State) != StateResolved {
					m.open[r.ID] = cached{r.Doc, r.Revision}
				}
			}
			if len(recs) < page {
				break
			}
		}
	}
	m.loaded = true
	return nil
}

// find returns the current state of the alert with the id, read from the
// ledger (the source of truth: another process, such as an offline
// acknowledgement from the command line, may have changed it). With ask
// false the ledger is read only when the cache says the alert is not
// resolved, so a condition that is clear costs no ledger access in the
// common case. It returns nil when there is no alert, and the revision
// read (0 for none).
func (m *Manager) find(ctx context.Context, id, model string, kind Kind, subject string, ask bool) (*Alert, int64, error) {
	if _, ok := m.open[id]; !ok && !ask {
		return nil, 0, nil
	}
	recs, err := m.ledger.Alerts(ctx, AlertQuery{Model: model, Kind: string(kind), Subject: subject, Limit: 1})
	if err != nil {
		return nil, 0, fmt.Errorf("alerts: look up %s: %w", id, err)
	}
	for _, r := range recs {
		if r.ID == id {
			if State(r.State) == StateResolved {
				delete(m.open, id)
			} else {
				m.open[id] = cached{r.Doc, r.Revision}
			}
			a, err := decodeDoc(id, r.Doc)
			return a, r.Revision, err
		}
	}
	delete(m.open, id)
	return nil, 0, nil
}

// retry runs op until it does not fail with ErrChanged, at most
// maxRetries more times; op reads the alert afresh each time (retried
// says it is not the first).
func retry[T any](op func(retried bool) (T, error)) (T, error) {
	for i := 0; ; i++ {
		v, err := op(i > 0)
		if !errors.Is(err, ErrChanged) || i == maxRetries {
			return v, err
		}
	}
}

func decodeDoc(id, doc string) (*Alert, error) {
	a, err := DecodeAlert([]byte(doc))
	if err != nil {
		return nil, fmt.Errorf("alerts: alert %s: stored document: %w", id, err)
	}
	return a, nil
}

// change is one condition report, ready to apply.
type change struct {
	model   string
	kind    Kind
	subject string
	active  bool
	// fill writes the condition's detail into a (on open, reopen, update).
	fill func(a *Alert)
	// note says why the condition cleared (on auto-resolve).
	note string
}

// apply runs the lifecycle for one report and returns the alert as stored
// (nil when there is none). After a conflicting write it reads the alert
// from the ledger again, whatever the cache says.
func (m *Manager) apply(ctx context.Context, now time.Time, c change) (*Alert, error) {
	if err := m.load(ctx); err != nil {
		return nil, err
	}
	return retry(func(retried bool) (*Alert, error) { return m.applyOnce(ctx, now, c, retried) })
}

func (m *Manager) applyOnce(ctx context.Context, now time.Time, c change, ask bool) (*Alert, error) {
	rule := m.rules(c.model).rule(c.kind)
	id := ID(c.model, c.kind, c.subject)
	a, rev, err := m.find(ctx, id, c.model, c.kind, c.subject, ask || (c.active && rule.Enabled))
	if err != nil {
		return nil, err
	}
	if !c.active {
		if a == nil || a.State == StateResolved {
			return nil, nil
		}
		a.State = StateResolved
		a.Resolution = &ResolutionInfo{At: now, Auto: true, Note: c.note}
		a.Summary = "Resolved: " + a.Summary
		return a, m.put(ctx, now, a, Resolved, rev)
	}
	if !rule.Enabled {
		return nil, nil
	}
	var t Transition
	switch {
	case a == nil:
		a = &Alert{ID: id, Model: c.model, Kind: c.kind, Subject: c.subject, State: StateOpen,
			FirstSeen: now, LastSeen: now, Count: 1}
		t = Opened
	case a.State == StateResolved:
		a.State, a.Ack, a.Resolution = StateOpen, nil, nil
		a.Count++
		a.LastSeen = now
		t = Reopened
	default:
		a.Count++
		a.LastSeen = now
	}
	a.Severity = rule.Severity
	a.Caution = Caution
	c.fill(a)
	if a.Measures == nil {
		a.Measures = []Measure{}
	}
	return a, m.put(ctx, now, a, t, rev)
}

// put stores the alert and, when t is set, its next event for every route
// that takes it, provided the stored alert is still at revision rev (the
// one read; 0 for a new alert). Otherwise it returns an error wrapping
// ErrChanged and a is to be read again.
func (m *Manager) put(ctx context.Context, now time.Time, a *Alert, t Transition, rev int64) error {
	var ds []Delivery
	if t != "" {
		a.Sequence++
		a.Event = t
		a.NotifiedAt = now
		a.record(t, now)
	}
	if m.cfg.DashboardURL != "" {
		a.URL = strings.TrimRight(m.cfg.DashboardURL, "/") + "/alerts/" + a.ID
	}
	if t != "" {
		payload, err := newEvent(a, m.cfg.Host, m.cfg.DataSchema)
		if err != nil {
			return fmt.Errorf("alerts: alert %s: encode event: %w", a.ID, err)
		}
		eid := EventID(a.ID, a.Sequence)
		// Under a quiet period the event is stored with the alert but not
		// enqueued: the period's summary (QuietSummary) names the alert.
		a.Held = m.cfg.Quiet != nil && m.cfg.Quiet(a.Model, now)
		for _, r := range m.routesFor(a) {
			if a.Held {
				break
			}
			ds = append(ds, Delivery{AlertID: a.ID, Route: r, EventID: eid, Payload: payload,
				State: DeliveryPending, NextAttempt: now, CreatedAt: now, UpdatedAt: now})
		}
	}
	doc, err := json.Marshal(a)
	if err != nil {
		return fmt.Errorf("alerts: alert %s: encode: %w", a.ID, err)
	}
	rec := AlertRecord{ID: a.ID, Model: a.Model, Kind: string(a.Kind), Subject: a.Subject,
		Severity: string(a.Severity), State: string(a.State), FirstSeen: a.FirstSeen, LastSeen: a.LastSeen,
		Doc: string(doc), Revision: rev + 1}
	if err := m.ledger.PutAlert(ctx, rec, ds); err != nil {
		if errors.Is(err, ErrChanged) {
			delete(m.open, a.ID)
		}
		return fmt.Errorf("alerts: store alert %s: %w", a.ID, err)
	}
	if len(ds) > 0 && m.cfg.OnEnqueue != nil {
		m.cfg.OnEnqueue()
	}
	if a.State == StateResolved {
		delete(m.open, a.ID)
	} else {
		m.open[a.ID] = cached{string(doc), rec.Revision}
	}
	return nil
}

// routesFor names the routes that take the alert's events.
func (m *Manager) routesFor(a *Alert) []string {
	own, hasOwn := m.cfg.ModelRoutes[a.Model]
	var names []string
	for _, r := range m.cfg.Routes {
		if hasOwn && !contains(own, r.Name) {
			continue
		}
		if r.takes(a.Model, a.Kind, a.Severity) {
			names = append(names, r.Name)
		}
	}
	return names
}

// Point reports a newly judged row. It opens (or updates, or reopens) a
// suspect_point alert when the row is both an outlier and influential under
// the rule, and resolves the row's alert when it no longer is.
//
// Point, Fragility, Drift and Blocked return the alert they opened,
// updated or resolved, or nil when nothing changed (no alert, or a
// resolved one whose condition stays clear).
func (m *Manager) Point(ctx context.Context, c PointCondition) (*Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	rule := m.rules(c.Model).SuspectPoint
	out, infl := rule.suspect(c)
	return m.apply(ctx, m.cfg.Now(), change{
		model: c.Model, kind: KindSuspectPoint, subject: LabeledPointSubject(c.Model, c.File, c.Line, c.Label),
		active: out && infl,
		note:   "the row is no longer both an outlier and influential under the current fit",
		fill:   func(a *Alert) { fillPoint(a, c, rule) },
	})
}

// Fragility reports a fit's fragility index. The model's fragile_fit alert
// opens when 1 <= Index <= the rule's Limit and resolves when the index
// rises above it or no removal changes the conclusion (Index <= 0).
func (m *Manager) Fragility(ctx context.Context, c FragilityCondition) (*Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	rule := m.rules(c.Model).FragileFit
	active := c.Index >= 1 && c.Index <= rule.Limit
	note := fmt.Sprintf("the fragility index rose to %d, above the limit %d", c.Index, rule.Limit)
	if c.Index <= 0 {
		note = "no removal of a few rows changes the conclusion any more"
	}
	return m.apply(ctx, m.cfg.Now(), change{
		model: c.Model, kind: KindFragileFit, subject: c.Model, active: active, note: note,
		fill: func(a *Alert) { fillFragility(a, c, rule) },
	})
}

// Drift reports a refit compared with the baseline. The model's drift
// alert opens while any measure is out of its band and resolves when all
// are back inside.
func (m *Manager) Drift(ctx context.Context, c DriftCondition) (*Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	rule := m.rules(c.Model).Drift
	ms := append([]DriftMeasure(nil), c.Measures...)
	active := false
	for i := range ms {
		rule.band(&ms[i])
		active = active || !ms[i].InBand
	}
	c.Measures = ms
	return m.apply(ctx, m.cfg.Now(), change{
		model: c.Model, kind: KindDrift, subject: c.Model, active: active,
		note: "every compared quantity is back inside its band",
		fill: func(a *Alert) { fillDrift(a, c, rule) },
	})
}

// Blocked reports whether a model can be fitted.
func (m *Manager) Blocked(ctx context.Context, c BlockedCondition) (*Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if c.Cause == "" {
		c.Cause = CauseNotFittable
	}
	subject, note := c.Model, "the model can be fitted again"
	if c.File != "" {
		subject, note = FileSubject(c.Model, c.File), "the file was removed, replaced or fixed"
	}
	return m.apply(ctx, m.cfg.Now(), change{
		model: c.Model, kind: KindBlocked, subject: subject, active: c.Blocked,
		note: note,
		fill: func(a *Alert) { fillBlocked(a, c) },
	})
}

// Activity records that the model's feed delivered a row at the given time
// (call it per batch, and once at start with the last stored arrival so
// silence is measured across restarts). It resolves an open silence alert.
func (m *Manager) Activity(ctx context.Context, model string, at time.Time) error {
	m.mu.Lock()
	defer m.mu.Unlock()
	if at.After(m.lastData[model]) {
		m.lastData[model] = at
	}
	_, err := m.apply(ctx, m.cfg.Now(), change{
		model: model, kind: KindBlocked, subject: SilenceSubject(model), active: false,
		note: "rows arrive again",
	})
	return err
}

// Tick opens blocked alerts for feeds silent longer than their rule's
// Silence and sends a reminder for every open alert whose rule's Renotify
// interval has passed since its last notification. Call it periodically
// (every minute or so); it does nothing between due times.
func (m *Manager) Tick(ctx context.Context, now time.Time) error {
	m.mu.Lock()
	defer m.mu.Unlock()
	// Start from the ledger's view: states changed by another process
	// (an offline acknowledgement) must not get reminders.
	m.loaded, m.open = false, make(map[string]cached)
	if err := m.load(ctx); err != nil {
		return err
	}
	var errs []error
	models := make([]string, 0, len(m.lastData))
	for model := range m.lastData {
		models = append(models, model)
	}
	sort.Strings(models)
	for _, model := range models {
		last := m.lastData[model]
		rule := m.rules(model).Blocked
		if !rule.Enabled || rule.Silence <= 0 || now.Sub(last) <= rule.Silence {
			continue
		}
		sid := ID(model, KindBlocked, SilenceSubject(model))
		if _, open := m.open[sid]; open {
			continue
		}
		c := BlockedCondition{Model: model, Blocked: true, Cause: CauseSilent,
			Reason: fmt.Sprintf("no row for %s (limit %s)", now.Sub(last).Round(time.Second), rule.Silence)}
		_, err := m.apply(ctx, now, change{model: model, kind: KindBlocked, subject: SilenceSubject(model),
			active: true, fill: func(a *Alert) { fillSilence(a, c, last, rule.Silence) }})
		errs = append(errs, err)
	}
	ids := make([]string, 0, len(m.open))
	for id := range m.open {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	for _, id := range ids {
		_, err := retry(func(retried bool) (*Alert, error) { return m.remind(ctx, now, id, retried) })
		errs = append(errs, err)
	}
	return errors.Join(errs...)
}

// remind sends the alert's reminder when it is open and due: judged on
// the cached record, or on the ledger's after a conflict.
func (m *Manager) remind(ctx context.Context, now time.Time, id string, fresh bool) (*Alert, error) {
	c := m.open[id]
	if fresh {
		rec, err := m.ledger.Alert(ctx, id)
		if err != nil {
			return nil, fmt.Errorf("alerts: alert %s: %w", id, err)
		}
		c = cached{rec.Doc, rec.Revision}
	}
	a, err := decodeDoc(id, c.doc)
	if err != nil {
		return nil, err
	}
	every := m.rules(a.Model).rule(a.Kind).Renotify
	if a.State != StateOpen || every <= 0 || now.Sub(a.NotifiedAt) < every {
		return nil, nil
	}
	return a, m.put(ctx, now, a, Reminder, c.rev)
}

// byID returns an alert by id from the ledger, with its revision.
func (m *Manager) byID(ctx context.Context, id string) (*Alert, int64, error) {
	if err := m.load(ctx); err != nil {
		return nil, 0, err
	}
	rec, err := m.ledger.Alert(ctx, id)
	if err != nil {
		return nil, 0, fmt.Errorf("alerts: alert %s: %w", id, err)
	}
	a, err := decodeDoc(id, rec.Doc)
	return a, rec.Revision, err
}

// Get returns an alert by id. A missing id gives the ledger's not-found
// error, wrapped.
func (m *Manager) Get(ctx context.Context, id string) (*Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	a, _, err := m.byID(ctx, id)
	return a, err
}

// Ack acknowledges an open alert: who has seen it and is on it. It sends an
// "acknowledged" event; reminders stop. Acknowledging an acknowledged alert
// updates the note and sends nothing; a resolved alert gives ErrNotOpen.
func (m *Manager) Ack(ctx context.Context, id, note, who string) (*Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	now := m.cfg.Now()
	return retry(func(bool) (*Alert, error) {
		a, rev, err := m.byID(ctx, id)
		if err != nil {
			return nil, err
		}
		switch a.State {
		case StateResolved:
			return a, &notOpenError{id, "acknowledged"}
		case StateAcknowledged:
			a.Ack = &AckInfo{By: who, Note: note, At: now}
			return a, m.put(ctx, now, a, "", rev)
		}
		a.State = StateAcknowledged
		a.Ack = &AckInfo{By: who, Note: note, At: now}
		return a, m.put(ctx, now, a, Acknowledged, rev)
	})
}

// Resolve resolves an alert by hand and sends a "resolved" event. If its
// condition is reported again later, the alert reopens under the same id.
// A resolved alert gives ErrNotOpen.
func (m *Manager) Resolve(ctx context.Context, id, note string) (*Alert, error) {
	return m.ResolveBy(ctx, id, note, "")
}

// ResolveBy is Resolve naming who resolved the alert (a user, or the
// author of the recorded decision that answers it); the name goes into
// the resolution (ResolutionInfo.By) and from there into the audit trail.
func (m *Manager) ResolveBy(ctx context.Context, id, note, who string) (*Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	now := m.cfg.Now()
	return retry(func(bool) (*Alert, error) {
		a, rev, err := m.byID(ctx, id)
		if err != nil {
			return nil, err
		}
		if a.State == StateResolved {
			return a, &notOpenError{id, "resolved again"}
		}
		a.State = StateResolved
		a.Resolution = &ResolutionInfo{At: now, Note: note, By: who}
		a.Summary = "Resolved: " + a.Summary
		return a, m.put(ctx, now, a, Resolved, rev)
	})
}
