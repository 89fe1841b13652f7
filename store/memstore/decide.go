package memstore

import (
	"context"
	"fmt"
	"time"

	"plumb/store"
)

var _ store.Decisions = (*Store)(nil)

// decisions is the in-memory record of store.Decisions.
type decisions struct {
	decs  []store.Decision // ascending ID
	rebs  []store.Rebaseline
	quiet []store.QuietPeriod
	audit []store.AuditRecord // ascending Seq
}

// appendAudit seals r after the last record and appends it.
func (s *Store) appendAudit(r store.AuditRecord) store.AuditRecord {
	var last store.AuditRecord
	if n := len(s.dec.audit); n > 0 {
		last = s.dec.audit[n-1]
	}
	r.At = utc(r.At)
	r = store.Seal(r, last)
	s.dec.audit = append(s.dec.audit, r)
	return r
}

func (s *Store) stamp(t time.Time) time.Time {
	if t.IsZero() {
		return s.now().UTC()
	}
	return t.UTC()
}

// Decide implements store.Decisions.
func (s *Store) Decide(ctx context.Context, d store.Decision) (store.Decision, error) {
	fail := func(err error) (store.Decision, error) {
		return store.Decision{}, fmt.Errorf("store: %s reading %d of %s: %w", d.Action, d.ObsID, d.Model, err)
	}
	if err := store.CheckDecision(d); err != nil {
		return fail(err)
	}
	if err := s.begin(ctx); err != nil {
		return fail(err)
	}
	defer s.mu.Unlock()
	i, ok := s.obsIdx[d.ObsID]
	if !ok || s.obs[i].Model != d.Model {
		return fail(store.ErrNotFound)
	}
	var prior *store.Decision
	for j := len(s.dec.decs) - 1; j >= 0; j-- {
		if s.dec.decs[j].ObsID == d.ObsID {
			p := s.dec.decs[j]
			prior = &p
			break
		}
	}
	d.At = s.stamp(d.At)
	rec, err := store.DecisionAudit(d, s.obs[i], prior)
	if err != nil {
		return fail(err)
	}
	d.ID = int64(len(s.dec.decs) + 1)
	d.AuditSeq = s.appendAudit(rec).Seq
	s.dec.decs = append(s.dec.decs, d)
	return d, nil
}

// Decisions implements store.Decisions.
func (s *Store) Decisions(ctx context.Context, model string) ([]store.Decision, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: decisions %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var out []store.Decision
	for _, d := range s.dec.decs {
		if d.Model == model {
			out = append(out, d)
		}
	}
	return out, nil
}

// Rebaseline implements store.Decisions.
func (s *Store) Rebaseline(ctx context.Context, r store.Rebaseline) (store.Rebaseline, error) {
	fail := func(err error) (store.Rebaseline, error) {
		return store.Rebaseline{}, fmt.Errorf("store: re-baseline %s: %w", r.Model, err)
	}
	if err := store.CheckRebaseline(r); err != nil {
		return fail(err)
	}
	if err := s.begin(ctx); err != nil {
		return fail(err)
	}
	defer s.mu.Unlock()
	r.From, r.Recorded = r.From.UTC(), s.stamp(r.Recorded)
	var prior *store.Rebaseline
	var mine []store.Rebaseline
	for _, e := range s.dec.rebs {
		if e.Model == r.Model {
			mine = append(mine, e)
		}
	}
	if p, ok := store.BaselineFrom(mine, time.Time{}); ok {
		prior = &p
	}
	r.ID = int64(len(s.dec.rebs) + 1)
	r.AuditSeq = s.appendAudit(store.RebaselineAudit(r, prior)).Seq
	s.dec.rebs = append(s.dec.rebs, r)
	return r, nil
}

// Rebaselines implements store.Decisions.
func (s *Store) Rebaselines(ctx context.Context, model string) ([]store.Rebaseline, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: re-baselines %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var out []store.Rebaseline
	for _, r := range s.dec.rebs {
		if r.Model == model {
			out = append(out, r)
		}
	}
	return out, nil
}

// SetQuiet implements store.Decisions.
func (s *Store) SetQuiet(ctx context.Context, q store.QuietPeriod) (store.QuietPeriod, error) {
	fail := func(err error) (store.QuietPeriod, error) {
		return store.QuietPeriod{}, fmt.Errorf("store: set quiet period: %w", err)
	}
	if err := store.CheckQuiet(q); err != nil {
		return fail(err)
	}
	if err := s.begin(ctx); err != nil {
		return fail(err)
	}
	defer s.mu.Unlock()
	q.Start, q.End, q.Created = q.Start.UTC(), q.End.UTC(), s.stamp(q.Created)
	q.EndedBy, q.EndReason = "", ""
	q.ID = int64(len(s.dec.quiet) + 1)
	q.AuditSeq = s.appendAudit(store.QuietSetAudit(q)).Seq
	s.dec.quiet = append(s.dec.quiet, q)
	return q, nil
}

// EndQuiet implements store.Decisions.
func (s *Store) EndQuiet(ctx context.Context, id int64, at time.Time, actor, reason string) (store.QuietPeriod, error) {
	fail := func(err error) (store.QuietPeriod, error) {
		return store.QuietPeriod{}, fmt.Errorf("store: end quiet period %d: %w", id, err)
	}
	if err := s.begin(ctx); err != nil {
		return fail(err)
	}
	defer s.mu.Unlock()
	if id <= 0 || id > int64(len(s.dec.quiet)) {
		return fail(store.ErrNotFound)
	}
	q, rec, err := store.EndQuietAt(s.dec.quiet[id-1], s.stamp(at), actor, reason)
	if err != nil {
		return fail(err)
	}
	q.AuditSeq = s.appendAudit(rec).Seq
	s.dec.quiet[id-1] = q
	return q, nil
}

// QuietPeriods implements store.Decisions.
func (s *Store) QuietPeriods(ctx context.Context, model string, after time.Time) ([]store.QuietPeriod, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: quiet periods %s: %w", model, err)
	}
	defer s.mu.Unlock()
	var out []store.QuietPeriod
	for _, q := range s.dec.quiet {
		if (model == "" || q.Model == "" || q.Model == model) && (after.IsZero() || q.End.After(after)) {
			out = append(out, q)
		}
	}
	return out, nil
}

// AppendAudit implements store.Decisions.
func (s *Store) AppendAudit(ctx context.Context, r store.AuditRecord) (store.AuditRecord, error) {
	if err := store.CheckAudit(r); err != nil {
		return store.AuditRecord{}, fmt.Errorf("store: append audit record: %w", err)
	}
	if err := s.begin(ctx); err != nil {
		return store.AuditRecord{}, fmt.Errorf("store: append audit record: %w", err)
	}
	defer s.mu.Unlock()
	r.At = s.stamp(r.At)
	return s.appendAudit(r), nil
}

// Audit implements store.Decisions.
func (s *Store) Audit(ctx context.Context, q store.AuditQuery) ([]store.AuditRecord, error) {
	if err := s.begin(ctx); err != nil {
		return nil, fmt.Errorf("store: audit trail: %w", err)
	}
	defer s.mu.Unlock()
	var out []store.AuditRecord
	for _, r := range s.dec.audit {
		if r.Seq <= q.AfterSeq || (!q.From.IsZero() && r.At.Before(q.From)) || (!q.To.IsZero() && !r.At.Before(q.To)) {
			continue
		}
		out = append(out, r)
		if q.Limit > 0 && len(out) == q.Limit {
			break
		}
	}
	return out, nil
}

// PutAlertAudited implements store.Decisions.
func (s *Store) PutAlertAudited(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery, audit store.AlertAudit) error {
	return s.putAlert(ctx, a, deliveries, func(old *store.AlertRecord) error {
		rec, ok := audit(old, a)
		if !ok {
			return nil
		}
		if err := store.CheckAudit(rec); err != nil {
			return err
		}
		rec.At = s.stamp(rec.At)
		s.appendAudit(rec)
		return nil
	})
}
