// Package viewtest provides an in-memory view.Source for tests of the web
// server, the report writer and anything else that consumes views.
//
// A Fake holds models, fit history, observations, quarantine and alerts
// that a test puts in; it implements the alert lifecycle (open ->
// acknowledged -> resolved) and records every Ack and Resolve call.
//
// StraightLine builds a realistic ModelDetail for a one-predictor model
// y = b0 + b1 x from data, with the exact closed-form diagnostics of simple
// linear regression, so that charts and tables have true numbers to show.
package viewtest

import (
	"cmp"
	"context"
	"encoding/json"
	"fmt"
	"slices"
	"sync"
	"time"

	"plumb/cmd/plumb/internal/view"
)

// Fake is an in-memory view.Source. The zero value is not usable; call New.
// A Fake is safe for use by multiple goroutines.
type Fake struct {
	mu       sync.Mutex
	models   map[string]view.ModelDetail
	fits     map[string][]view.FitView
	obs      map[string][]view.ObservationView
	quar     []view.QuarantineView
	alerts   map[string]view.AlertView
	readyErr error
	calls    []Call
	// Err, when set, is returned by every method (to test error paths).
	err error
}

// Call records one Ack or Resolve.
type Call struct {
	Op   string // "ack" or "resolve"
	ID   string
	Note string
	Who  string
}

var _ view.Source = (*Fake)(nil)

// New returns an empty, ready Fake.
func New() *Fake {
	return &Fake{
		models: map[string]view.ModelDetail{},
		fits:   map[string][]view.FitView{},
		obs:    map[string][]view.ObservationView{},
		alerts: map[string]view.AlertView{},
	}
}

// SetModel adds or replaces a model's picture.
func (f *Fake) SetModel(d view.ModelDetail) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.models[d.Name] = d
}

// AddFit appends to a model's fit history; a zero ID is assigned.
func (f *Fake) AddFit(model string, fv view.FitView) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if fv.ID == 0 {
		fv.ID = int64(len(f.fits[model]) + 1)
	}
	f.fits[model] = append(f.fits[model], fv)
}

// AddObservation appends an accepted row; a zero ID is assigned.
func (f *Fake) AddObservation(model string, o view.ObservationView) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if o.ID == 0 {
		o.ID = int64(len(f.obs[model]) + 1)
	}
	f.obs[model] = append(f.obs[model], o)
}

// AddQuarantine appends a quarantined row; a zero ID is assigned.
func (f *Fake) AddQuarantine(q view.QuarantineView) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if q.ID == 0 {
		q.ID = int64(len(f.quar) + 1)
	}
	f.quar = append(f.quar, q)
}

// PutAlert adds or replaces an alert.
func (f *Fake) PutAlert(a view.AlertView) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.alerts[a.ID] = a
}

// SetReady sets what Ready returns.
func (f *Fake) SetReady(err error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.readyErr = err
}

// FailWith makes every method but Ready return err (nil to stop).
func (f *Fake) FailWith(err error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.err = err
}

// Calls returns the Ack and Resolve calls made so far.
func (f *Fake) Calls() []Call {
	f.mu.Lock()
	defer f.mu.Unlock()
	return slices.Clone(f.calls)
}

// Ready implements view.Source.
func (f *Fake) Ready(ctx context.Context) error {
	f.mu.Lock()
	defer f.mu.Unlock()
	return f.readyErr
}

// Models implements view.Source.
func (f *Fake) Models(ctx context.Context) ([]view.ModelSummary, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return nil, f.err
	}
	out := make([]view.ModelSummary, 0, len(f.models))
	for _, d := range f.models {
		s := d.ModelSummary
		s.OpenAlerts = f.openAlerts(d.Name)
		s.Fits = int64(max(int(s.Fits), len(f.fits[d.Name])))
		out = append(out, s)
	}
	slices.SortFunc(out, func(a, b view.ModelSummary) int { return cmp.Compare(a.Name, b.Name) })
	return out, nil
}

func (f *Fake) openAlerts(model string) int {
	n := 0
	for _, a := range f.alerts {
		if a.Model == model && a.State == view.AlertOpen {
			n++
		}
	}
	return n
}

// Model implements view.Source.
func (f *Fake) Model(ctx context.Context, name string) (view.ModelDetail, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return view.ModelDetail{}, f.err
	}
	d, err := get(f.models, "model", name)
	if err != nil {
		return d, err
	}
	d.OpenAlerts = f.openAlerts(name)
	return d, nil
}

func page[T any](items []T, id func(T) int64, after int64, limit int) []T {
	var out []T
	for _, it := range items {
		if id(it) <= after {
			continue
		}
		if limit > 0 && len(out) == limit {
			break
		}
		out = append(out, it)
	}
	return out
}

// Fits implements view.Source.
func (f *Fake) Fits(ctx context.Context, name string, after int64, limit int) ([]view.FitView, error) {
	return modelPage(f, name, f.fits, func(v view.FitView) int64 { return v.ID }, after, limit)
}

// Observations implements view.Source.
func (f *Fake) Observations(ctx context.Context, name string, after int64, limit int) ([]view.ObservationView, error) {
	return modelPage(f, name, f.obs, func(v view.ObservationView) int64 { return v.ID }, after, limit)
}

// get looks key up in m; a missing key is what's view.ErrNotFound.
func get[V any](m map[string]V, what, key string) (V, error) {
	v, ok := m[key]
	if !ok {
		return v, fmt.Errorf("%s %q: %w", what, key, view.ErrNotFound)
	}
	return v, nil
}

// modelPage pages through one model's items of by (fits, observations),
// under the lock, with the Fake's failure and an unknown model's error.
func modelPage[T any](f *Fake, name string, by map[string][]T, id func(T) int64, after int64, limit int) ([]T, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return nil, f.err
	}
	if _, err := get(f.models, "model", name); err != nil {
		return nil, err
	}
	return page(by[name], id, after, limit), nil
}

// Quarantine implements view.Source.
func (f *Fake) Quarantine(ctx context.Context, model string, after int64, limit int) ([]view.QuarantineView, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return nil, f.err
	}
	sel := f.quarantineOf(model)
	return page(sel, func(v view.QuarantineView) int64 { return v.ID }, after, limit), nil
}

// Alerts implements view.Source.
func (f *Fake) Alerts(ctx context.Context, q view.AlertFilter) ([]view.AlertView, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return nil, f.err
	}
	var sel []view.AlertView
	for _, a := range f.alerts {
		if (q.State == "" || a.State == q.State) && (q.Model == "" || a.Model == q.Model) && (q.Kind == "" || a.Kind == q.Kind) {
			sel = append(sel, a)
		}
	}
	slices.SortFunc(sel, func(a, b view.AlertView) int {
		if c := b.LastSeen.Compare(a.LastSeen); c != 0 {
			return c
		}
		return cmp.Compare(a.ID, b.ID)
	})
	if q.Offset > 0 {
		if q.Offset >= len(sel) {
			return nil, nil
		}
		sel = sel[q.Offset:]
	}
	if q.Limit > 0 && len(sel) > q.Limit {
		sel = sel[:q.Limit]
	}
	return sel, nil
}

// Alert implements view.Source.
func (f *Fake) Alert(ctx context.Context, id string) (view.AlertView, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return view.AlertView{}, f.err
	}
	return get(f.alerts, "alert", id)
}

// Ack implements view.Source.
func (f *Fake) Ack(ctx context.Context, id, note, who string) error {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return f.err
	}
	f.calls = append(f.calls, Call{Op: "ack", ID: id, Note: note, Who: who})
	a, err := get(f.alerts, "alert", id)
	if err != nil {
		return err
	}
	if a.State != view.AlertOpen {
		return fmt.Errorf("acknowledge alert %q (%s): %w", id, a.State, view.ErrState)
	}
	a.State, a.Note, a.By = view.AlertAcknowledged, note, who
	a.Doc = withEvent(a.Doc, map[string]any{"event": "acknowledged", "at": time.Now().UTC(), "by": who, "note": note})
	f.alerts[id] = a
	return nil
}

// withEvent appends an entry to the history of an alert document, as the
// alerts package does on every event (a document that is not a JSON
// object is left as it is).
func withEvent(doc json.RawMessage, ev map[string]any) json.RawMessage {
	var m map[string]any
	if json.Unmarshal(doc, &m) != nil || m == nil {
		return doc
	}
	h, _ := m["history"].([]any)
	m["history"] = append(h, ev)
	b, err := json.Marshal(m)
	if err != nil {
		return doc
	}
	return b
}

// Resolve implements view.Source.
func (f *Fake) Resolve(ctx context.Context, id, note string) error {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return f.err
	}
	f.calls = append(f.calls, Call{Op: "resolve", ID: id, Note: note})
	a, err := get(f.alerts, "alert", id)
	if err != nil {
		return err
	}
	if a.State == view.AlertResolved {
		return fmt.Errorf("resolve alert %q: %w", id, view.ErrState)
	}
	a.State, a.Note = view.AlertResolved, note
	a.LastSeen = a.LastSeen.Add(time.Second)
	a.Doc = withEvent(a.Doc, map[string]any{"event": "resolved", "at": time.Now().UTC(), "note": note})
	f.alerts[id] = a
	return nil
}

// RecentFits implements view.RecentFitter.
func (f *Fake) RecentFits(ctx context.Context, name string, n int) ([]view.FitView, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return nil, f.err
	}
	if _, err := get(f.models, "model", name); err != nil {
		return nil, err
	}
	return latest(slices.Clone(f.fits[name]), n), nil
}

// latest is the last n of all (all when n <= 0).
func latest[T any](all []T, n int) []T {
	if n > 0 && len(all) > n {
		return all[len(all)-n:]
	}
	return all
}

// quarantineOf returns the quarantined rows of model ("" for all) in id
// order. Caller holds mu.
func (f *Fake) quarantineOf(model string) []view.QuarantineView {
	var sel []view.QuarantineView
	for _, q := range f.quar {
		if model == "" || q.Model == model {
			sel = append(sel, q)
		}
	}
	return sel
}

// RecentQuarantine implements view.RecentQuarantiner.
func (f *Fake) RecentQuarantine(ctx context.Context, model string, n int) ([]view.QuarantineView, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.err != nil {
		return nil, f.err
	}
	return latest(f.quarantineOf(model), n), nil
}

var (
	_ view.RecentFitter      = (*Fake)(nil)
	_ view.RecentQuarantiner = (*Fake)(nil)
)
