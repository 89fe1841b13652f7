// Package memstore is an in-memory store.Store for tests of the packages
// that use a store (the daemon, the web API, reports). It keeps the same
// contract as the SQLite backend and passes the same conformance suite
// (store/storetest), but nothing survives Close.
//
//	s := memstore.New()
//	ids, err := s.Ingest(ctx, batch)
//
// A *Store is safe for use by multiple goroutines; every call holds one
// mutex, so each call is atomic as a transaction would be. Values handed in
// are copied, and values handed out are copies.
package memstore

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"slices"
	"sync"
	"time"

	"plumb/engine"
	"plumb/store"
)

var _ store.Store = (*Store)(nil)

// errClosed is returned by every method after Close.
var errClosed = errors.New("store is closed")

type sourceKey struct{ model, path string }

type provKey struct {
	model, path string
	gen, line   int
}

// Store is an in-memory store.Store.
type Store struct {
	// Now is the clock for defaults (Source.UpdatedAt, Delivery times). It
	// may be set before first use; nil means time.Now.
	Now func() time.Time

	mu       sync.Mutex
	closed   bool
	nextObs  int64
	nextQ    int64
	nextFit  int64
	nextDel  int64
	sources  map[sourceKey]*store.Source
	obs      []store.Observation // ascending id
	obsIdx   map[int64]int       // id -> index in obs
	prov     map[provKey]int64
	quar     []store.QuarantineRow
	fits     []store.FitRecord
	changes  map[int64][]store.VerdictChange
	states   map[string]store.ModelState
	alerts   map[string]store.AlertRecord
	dels     []store.Delivery // ascending id
	delIdx   map[int64]int
	delEvent map[[2]string]bool
	dec      decisions // decide.go
}

// New returns an empty store.
func New() *Store {
	return &Store{
		sources:  make(map[sourceKey]*store.Source),
		obsIdx:   make(map[int64]int),
		prov:     make(map[provKey]int64),
		changes:  make(map[int64][]store.VerdictChange),
		states:   make(map[string]store.ModelState),
		alerts:   make(map[string]store.AlertRecord),
		delIdx:   make(map[int64]int),
		delEvent: make(map[[2]string]bool),
	}
}

func (s *Store) now() time.Time {
	if s.Now != nil {
		return s.Now()
	}
	return time.Now()
}

// begin locks the store and checks the context and the closed state.
func (s *Store) begin(ctx context.Context) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return errClosed
	}
	return nil
}

func utc(t time.Time) time.Time {
	if t.IsZero() {
		return time.Time{}
	}
	return t.UTC()
}

func copyObs(o store.Observation) store.Observation {
	o.Values = slices.Clone(o.Values)
	if len(o.Values) == 0 {
		o.Values = nil
	}
	o.Time, o.ArrivedAt = utc(o.Time), utc(o.ArrivedAt)
	if o.Arrival != nil {
		d := *o.Arrival
		d.DFBETAS = slices.Clone(d.DFBETAS)
		if len(d.DFBETAS) == 0 {
			d.DFBETAS = nil
		}
		d.Flags = store.CopyFlags(d.Flags)
		o.Arrival = &d
	}
	return o
}

func copyFit(f store.FitRecord) store.FitRecord {
	f.Terms = slices.Clone(f.Terms)
	f.Estimates = slices.Clone(f.Estimates)
	f.StdErrors = slices.Clone(f.StdErrors)
	if len(f.Estimates) == 0 {
		f.Estimates = nil
	}
	if len(f.StdErrors) == 0 {
		f.StdErrors = nil
	}
	f.At = utc(f.At)
	return f
}

func copyDelivery(d store.Delivery) store.Delivery {
	d.Payload = slices.Clone(d.Payload)
	if d.Payload == nil {
		d.Payload = []byte{}
	}
	d.NextAttempt, d.CreatedAt, d.UpdatedAt = utc(d.NextAttempt), utc(d.CreatedAt), utc(d.UpdatedAt)
	return d
}

// Sources returns the read state of every file the model has read, by path.
func (s *Store) Sources(ctx context.Context, model string) ([]store.Source, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: sources %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var out []store.Source
	for k, src := range s.sources {
		if k.model == model {
			c := *src
			c.Digest = slices.Clone(c.Digest)
			out = append(out, c)
		}
	}
	slices.SortFunc(out, func(a, b store.Source) int { return cmp.Compare(a.Path, b.Path) })
	return out, nil
}

// Ingest commits the batch atomically; see store.Store.
func (s *Store) Ingest(ctx context.Context, b store.Batch) ([]int64, error) {
	src := b.Source
	fail := func(err error) ([]int64, error) {
		return nil, fmt.Errorf("store: ingest %s/%s: %w", src.Model, src.Path, err)
	}
	if src.Model == "" || src.Path == "" {
		return fail(errors.New("source needs a model and a path"))
	}
	if err := s.begin(ctx); err != nil {
		return fail(err)
	}
	defer s.mu.Unlock()
	key := sourceKey{src.Model, src.Path}
	old, known := s.sources[key]
	if known && (src.Generation < old.Generation || (src.Generation == old.Generation && src.Offset <= old.Offset)) {
		return fail(fmt.Errorf("generation %d offset %d, stored generation %d offset %d: %w",
			src.Generation, src.Offset, old.Generation, old.Offset, store.ErrStale))
	}
	// Validate everything before changing anything.
	seen := make(map[int]bool, len(b.Observations))
	for _, o := range b.Observations {
		if err := store.CheckProvenance(src, o.Model, o.Path, o.Generation); err != nil {
			return fail(fmt.Errorf("observation line %d: %w", o.Line, err))
		}
		if _, dup := s.prov[provKey{src.Model, src.Path, src.Generation, o.Line}]; dup || seen[o.Line] {
			return fail(fmt.Errorf("observation line %d already stored (same file, generation and line)", o.Line))
		}
		seen[o.Line] = true
	}
	for _, q := range b.Quarantine {
		if err := store.CheckProvenance(src, q.Model, q.Path, q.Generation); err != nil {
			return fail(fmt.Errorf("quarantined line %d: %w", q.Line, err))
		}
	}
	ns := src
	ns.Digest = slices.Clone(ns.Digest) // the caller may reuse its slice
	ns.UpdatedAt = utc(ns.UpdatedAt)
	if ns.UpdatedAt.IsZero() {
		ns.UpdatedAt = s.now().UTC()
	}
	ns.Rows, ns.Quarantined, ns.Missing = int64(len(b.Observations)), int64(len(b.Quarantine)), b.Missing
	if known {
		ns.Rows += old.Rows
		ns.Quarantined += old.Quarantined
		ns.Missing += old.Missing
	}
	s.sources[key] = &ns
	ids := make([]int64, len(b.Observations))
	for i, o := range b.Observations {
		s.nextObs++
		o = copyObs(o)
		o.ID, o.Model, o.Path, o.Generation = s.nextObs, src.Model, src.Path, src.Generation
		ids[i] = o.ID
		s.obsIdx[o.ID] = len(s.obs)
		s.obs = append(s.obs, o)
		s.prov[provKey{src.Model, src.Path, src.Generation, o.Line}] = o.ID
	}
	for _, q := range b.Quarantine {
		s.nextQ++
		q.ID, q.Model, q.Path, q.Generation, q.At = s.nextQ, src.Model, src.Path, src.Generation, utc(q.At)
		s.quar = append(s.quar, q)
	}
	return ids, nil
}

// Observations returns the model's observations in ascending id order.
func (s *Store) Observations(ctx context.Context, model string, q store.ObsQuery) ([]store.Observation, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: observations %s: %w", model, err)
	}
	defer s.mu.Unlock()
	start, _ := slices.BinarySearchFunc(s.obs, q.AfterID+1, func(o store.Observation, id int64) int { return cmp.Compare(o.ID, id) })
	var out []store.Observation
	for _, o := range s.obs[start:] {
		if q.Limit > 0 && len(out) == q.Limit {
			break
		}
		if o.Model == model && (q.Path == "" || o.Path == q.Path) {
			out = append(out, copyObs(o))
		}
	}
	return out, nil
}

// ObservationAt returns the observation at the file's line in the newest
// generation holding it.
func (s *Store) ObservationAt(ctx context.Context, model, path string, line int) (store.Observation, error) {
	if err := s.begin(ctx); err != nil {
		return store.Observation{}, fmt.Errorf("store: observation %s/%s:%d: %w", model, path, line, err)
	}
	defer s.mu.Unlock()
	best := int64(0)
	bestGen := 0
	for k, id := range s.prov {
		if k.model == model && k.path == path && k.line == line && (best == 0 || k.gen > bestGen) {
			best, bestGen = id, k.gen
		}
	}
	if best == 0 {
		return store.Observation{}, fmt.Errorf("store: observation %s/%s:%d: %w", model, path, line, store.ErrNotFound)
	}
	return copyObs(s.obs[s.obsIdx[best]]), nil
}

// CountObservations returns how many observations the model holds.
func (s *Store) CountObservations(ctx context.Context, model string) (int64, error) {
	if err := s.begin(ctx); err != nil {
		return 0, fmt.Errorf("store: count observations %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var n int64
	for k, src := range s.sources {
		if k.model == model {
			n += src.Rows
		}
	}
	return n, nil
}

// RecordFit stores the fit and its verdict changes atomically.
func (s *Store) RecordFit(ctx context.Context, f store.FitRecord, changes []store.VerdictChange) (int64, error) {
	fail := func(err error) (int64, error) { return 0, fmt.Errorf("store: record fit %s: %w", f.Model, err) }
	if f.Model == "" {
		return fail(errors.New("fit needs a model"))
	}
	if err := s.begin(ctx); err != nil {
		return fail(err)
	}
	defer s.mu.Unlock()
	seen := make(map[int64]bool, len(changes))
	for _, c := range changes {
		i, ok := s.obsIdx[c.ObsID]
		if !ok || s.obs[i].Model != f.Model {
			return fail(fmt.Errorf("verdict change: observation %d of model %s: %w", c.ObsID, f.Model, store.ErrNotFound))
		}
		if seen[c.ObsID] {
			return fail(fmt.Errorf("verdict change of observation %d given twice", c.ObsID))
		}
		seen[c.ObsID] = true
	}
	s.nextFit++
	f = copyFit(f)
	f.ID = s.nextFit
	s.fits = append(s.fits, f)
	for _, c := range changes {
		c.FitID = f.ID
		if c.At.IsZero() {
			c.At = f.At
		}
		c.At = utc(c.At)
		c.Flags = store.CopyFlags(c.Flags)
		s.changes[c.ObsID] = append(s.changes[c.ObsID], c)
	}
	return f.ID, nil
}

// Fits returns the model's fits after afterID, oldest first.
func (s *Store) Fits(ctx context.Context, model string, afterID int64, limit int) ([]store.FitRecord, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: fits %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var out []store.FitRecord
	for _, f := range s.fits {
		if limit > 0 && len(out) == limit {
			break
		}
		if f.Model == model && f.ID > afterID {
			out = append(out, copyFit(f))
		}
	}
	return out, nil
}

// LatestFits returns the model's n most recent fits (n <= 0: all), oldest
// first.
func (s *Store) LatestFits(ctx context.Context, model string, n int) ([]store.FitRecord, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: latest fits %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var out []store.FitRecord
	for i := len(s.fits) - 1; i >= 0 && (n <= 0 || len(out) < n); i-- {
		if s.fits[i].Model == model {
			out = append(out, copyFit(s.fits[i]))
		}
	}
	slices.Reverse(out)
	return out, nil
}

// CountFits returns how many fits the model has.
func (s *Store) CountFits(ctx context.Context, model string) (int64, error) {
	if err := s.begin(ctx); err != nil {
		return 0, fmt.Errorf("store: count fits %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var n int64
	for _, f := range s.fits {
		if f.Model == model {
			n++
		}
	}
	return n, nil
}

// LastFit returns the model's most recent fit, or store.ErrNotFound.
func (s *Store) LastFit(ctx context.Context, model string) (store.FitRecord, error) {
	if err := s.begin(ctx); err != nil {
		return store.FitRecord{}, fmt.Errorf("store: last fit %s: %w", model, err)
	}
	defer s.mu.Unlock()
	for i := len(s.fits) - 1; i >= 0; i-- {
		if s.fits[i].Model == model {
			return copyFit(s.fits[i]), nil
		}
	}
	return store.FitRecord{}, fmt.Errorf("store: last fit %s: %w", model, store.ErrNotFound)
}

// VerdictChanges returns the verdict history of one observation.
func (s *Store) VerdictChanges(ctx context.Context, obsID int64) ([]store.VerdictChange, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: verdict changes of observation %d: %w", obsID, err)
	}
	defer s.mu.Unlock()
	cs := slices.Clone(s.changes[obsID])
	for i := range cs {
		cs[i].Flags = store.CopyFlags(cs[i].Flags)
	}
	return cs, nil
}

// CurrentVerdicts returns the latest verdict of each of the model's
// observations whose latest verdict differs from its arrival verdict.
func (s *Store) CurrentVerdicts(ctx context.Context, model string) (map[int64]engine.Word, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: current verdicts %s: %w", model, err)
	}
	defer s.mu.Unlock()
	out := make(map[int64]engine.Word)
	for id, cs := range s.changes {
		o := s.obs[s.obsIdx[id]]
		if o.Model != model || len(cs) == 0 {
			continue
		}
		last := cs[len(cs)-1].To
		if o.Arrival == nil || o.Arrival.Verdict != last {
			out[id] = last
		}
	}
	return out, nil
}

// Quarantined returns quarantined rows of the model ("" for all), oldest first.
func (s *Store) Quarantined(ctx context.Context, model string, afterID int64, limit int) ([]store.QuarantineRow, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: quarantined %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var out []store.QuarantineRow
	for _, q := range s.quar {
		if limit > 0 && len(out) == limit {
			break
		}
		if (model == "" || q.Model == model) && q.ID > afterID {
			out = append(out, q)
		}
	}
	return out, nil
}

// LatestQuarantined returns the n most recent quarantined rows of the
// model ("" for all; n <= 0: all), oldest first.
func (s *Store) LatestQuarantined(ctx context.Context, model string, n int) ([]store.QuarantineRow, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: latest quarantined %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var out []store.QuarantineRow
	for i := len(s.quar) - 1; i >= 0 && (n <= 0 || len(out) < n); i-- {
		if model == "" || s.quar[i].Model == model {
			out = append(out, s.quar[i])
		}
	}
	slices.Reverse(out)
	return out, nil
}

// CountQuarantined returns how many rows of the model ("" for all) are quarantined.
func (s *Store) CountQuarantined(ctx context.Context, model string) (int64, error) {
	if err := s.begin(ctx); err != nil {
		return 0, fmt.Errorf("store: count quarantined %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var n int64
	for k, src := range s.sources {
		if model == "" || k.model == model {
			n += src.Quarantined
		}
	}
	return n, nil
}

// SetModelState records the model's current state.
func (s *Store) SetModelState(ctx context.Context, st store.ModelState) error {
	if st.Model == "" {
		return errors.New("store: set model state: state needs a model")
	}
	if err := s.begin(ctx); err != nil {
		return fmt.Errorf("store: set model state %s: %w", st.Model, err)
	}
	defer s.mu.Unlock()
	st.At = utc(st.At)
	s.states[st.Model] = st
	return nil
}

// ModelStates returns the recorded state of every model, by name.
func (s *Store) ModelStates(ctx context.Context) ([]store.ModelState, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: model states: %w", err)
	}
	defer s.mu.Unlock()
	var out []store.ModelState
	for _, st := range s.states {
		out = append(out, st)
	}
	slices.SortFunc(out, func(a, b store.ModelState) int { return cmp.Compare(a.Model, b.Model) })
	return out, nil
}

// PutAlert upserts the alert (keeping FirstSeen) and enqueues deliveries.
func (s *Store) PutAlert(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery) error {
	return s.putAlert(ctx, a, deliveries, nil)
}

// putAlert is PutAlert; before, when not nil, is called with the stored
// alert (nil: none) once the write is known to succeed, before anything
// changes (PutAlertAudited appends the audit record there).
func (s *Store) putAlert(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery, before func(old *store.AlertRecord) error) error {
	fail := func(err error) error { return fmt.Errorf("store: put alert %s: %w", a.ID, err) }
	if a.ID == "" {
		return fail(errors.New("alert needs an id"))
	}
	if err := s.begin(ctx); err != nil {
		return fail(err)
	}
	defer s.mu.Unlock()
	now := s.now()
	ds := make([]store.Delivery, len(deliveries))
	for i, d := range deliveries {
		d, err := store.DeliveryDefaults(d, a.ID, now)
		if err != nil {
			return fail(err)
		}
		ds[i] = copyDelivery(d)
	}
	a.FirstSeen, a.LastSeen = utc(a.FirstSeen), utc(a.LastSeen)
	old, had := s.alerts[a.ID]
	if a.Revision > 0 && old.Revision != a.Revision-1 {
		return fail(fmt.Errorf("%w: revision %d stored, %d written", store.ErrChanged, old.Revision, a.Revision))
	}
	if before != nil {
		var prev *store.AlertRecord
		if had {
			prev = &old
		}
		if err := before(prev); err != nil {
			return fail(err)
		}
	}
	if had && !old.FirstSeen.IsZero() {
		a.FirstSeen = old.FirstSeen
	}
	a.Revision = old.Revision + 1
	s.alerts[a.ID] = a
	for _, d := range ds {
		ev := [2]string{d.Route, d.EventID}
		if d.EventID != "" && s.delEvent[ev] {
			continue
		}
		if d.EventID != "" {
			s.delEvent[ev] = true
		}
		s.nextDel++
		d.ID = s.nextDel
		s.delIdx[d.ID] = len(s.dels)
		s.dels = append(s.dels, d)
	}
	return nil
}

// Alert returns one alert by id, or store.ErrNotFound.
func (s *Store) Alert(ctx context.Context, id string) (store.AlertRecord, error) {
	if err := s.begin(ctx); err != nil {
		return store.AlertRecord{}, fmt.Errorf("store: alert %s: %w", id, err)
	}
	defer s.mu.Unlock()
	a, ok := s.alerts[id]
	if !ok {
		return store.AlertRecord{}, fmt.Errorf("store: alert %s: %w", id, store.ErrNotFound)
	}
	return a, nil
}

// Alerts lists matching alerts, newest LastSeen first (ties by id).
func (s *Store) Alerts(ctx context.Context, q store.AlertQuery) ([]store.AlertRecord, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: alerts: %w", err)
	}
	defer s.mu.Unlock()
	var out []store.AlertRecord
	for _, a := range s.alerts {
		if (q.State == "" || a.State == q.State) && (q.Model == "" || a.Model == q.Model) &&
			(q.Kind == "" || a.Kind == q.Kind) && (q.Subject == "" || a.Subject == q.Subject) {
			out = append(out, a)
		}
	}
	slices.SortFunc(out, func(a, b store.AlertRecord) int {
		if c := b.LastSeen.Compare(a.LastSeen); c != 0 {
			return c
		}
		return cmp.Compare(a.ID, b.ID)
	})
	off := max(q.Offset, 0)
	if off >= len(out) {
		return nil, nil
	}
	out = out[off:]
	if q.Limit > 0 && len(out) > q.Limit {
		out = out[:q.Limit]
	}
	return out, nil
}

// DueDeliveries returns pending deliveries due at now, by NextAttempt then id.
func (s *Store) DueDeliveries(ctx context.Context, now time.Time, limit int) ([]store.Delivery, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: due deliveries: %w", err)
	}
	defer s.mu.Unlock()
	var out []store.Delivery
	for _, d := range s.dels {
		if d.State == store.DeliveryPending && !d.NextAttempt.After(now) {
			out = append(out, copyDelivery(d))
		}
	}
	slices.SortStableFunc(out, func(a, b store.Delivery) int { return a.NextAttempt.Compare(b.NextAttempt) })
	if limit > 0 && len(out) > limit {
		out = out[:limit]
	}
	return out, nil
}

// UpdateDelivery stores a delivery's new status after an attempt.
func (s *Store) UpdateDelivery(ctx context.Context, d store.Delivery) error {
	fail := func(err error) error { return fmt.Errorf("store: update delivery %d: %w", d.ID, err) }
	if !store.ValidDeliveryState(d.State) {
		return fail(fmt.Errorf("delivery state %q unknown", d.State))
	}
	if err := s.begin(ctx); err != nil {
		return fail(err)
	}
	defer s.mu.Unlock()
	i, ok := s.delIdx[d.ID]
	if !ok {
		return fail(store.ErrNotFound)
	}
	cur := &s.dels[i]
	cur.State, cur.Attempts, cur.LastError = d.State, d.Attempts, d.LastError
	if !d.NextAttempt.IsZero() {
		cur.NextAttempt = utc(d.NextAttempt)
	}
	if d.UpdatedAt.IsZero() {
		d.UpdatedAt = s.now()
	}
	cur.UpdatedAt = utc(d.UpdatedAt)
	return nil
}

// Deliveries lists deliveries in a state ("" for all), newest first.
func (s *Store) Deliveries(ctx context.Context, state store.DeliveryState, limit int) ([]store.Delivery, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: deliveries %s: %w", state, err)
	}
	defer s.mu.Unlock()
	var out []store.Delivery
	for i := len(s.dels) - 1; i >= 0; i-- {
		if limit > 0 && len(out) == limit {
			break
		}
		if state == "" || s.dels[i].State == state {
			out = append(out, copyDelivery(s.dels[i]))
		}
	}
	return out, nil
}

// Close releases the store; later calls fail.
func (s *Store) Close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.closed = true
	return nil
}
