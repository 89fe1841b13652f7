package daemon

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"plumb/cmd/plumb/internal/view"
	"plumb/store"
)

var (
	_ view.Decider        = viewSource{}
	_ view.DecisionLister = viewSource{}
)

// Decisions lists the model's exclusions and reinstatements, oldest first.
func (v viewSource) Decisions(ctx context.Context, model string) ([]view.DecisionView, error) {
	if err := v.exists(ctx, model); err != nil { // a model of the fleet's history too
		return nil, err
	}
	ds := v.d.decisionStore()
	if ds == nil {
		return nil, nil
	}
	dec, err := ds.Decisions(ctx, model)
	if err != nil {
		return nil, err
	}
	out := make([]view.DecisionView, len(dec))
	for i, d := range dec {
		out[i] = decisionView(d)
	}
	return out, nil
}

func decisionView(d store.Decision) view.DecisionView {
	return view.DecisionView{ID: d.ID, Model: d.Model, ObsID: d.ObsID, Action: d.Action, By: d.Actor, Reason: d.Reason,
		At: d.At, Note: d.Note(), AuditSeq: d.AuditSeq}
}

// decisions returns the store's decisions or an error saying the backend
// keeps none.
func (v viewSource) decisions() (store.Decisions, error) {
	ds := v.d.decisionStore()
	if ds == nil {
		return nil, errors.New("this state store keeps no decisions")
	}
	return ds, nil
}

// decisionErr maps the store's errors to the view's.
func decisionErr(err error) error {
	switch {
	case err == nil:
		return nil
	case errors.Is(err, store.ErrNotFound):
		return fmt.Errorf("%w: %v", view.ErrNotFound, err)
	case errors.Is(err, store.ErrInvalid):
		return fmt.Errorf("%w: %v", view.ErrInvalid, err)
	case errors.Is(err, store.ErrConflict):
		return fmt.Errorf("%w: %v", view.ErrState, err)
	}
	return err
}

// obsOf finds the observation id of a row key among the model's rows in
// memory: by id, or by "file:line" (the label every view shows).
func (m *watchedModel) obsOf(k view.RowKey) (int64, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if k.Line == "" {
		if k.ID <= 0 {
			return 0, fmt.Errorf("%w: name the reading (obs id or file:line)", view.ErrInvalid)
		}
		return k.ID, nil // the store checks it belongs to the model
	}
	i := strings.LastIndexByte(k.Line, ':')
	line, err := strconv.Atoi(k.Line[i+1:])
	if i < 0 || err != nil {
		return 0, fmt.Errorf("%w: row %q: want file:line", view.ErrInvalid, k.Line)
	}
	file := k.Line[:i]
	for r := m.rows.len() - 1; r >= 0; r-- {
		if m.rows.line(r) == line && (m.rows.path(r) == file || strings.HasSuffix(m.rows.path(r), "/"+file)) {
			return m.rows.ids[r], nil
		}
	}
	return 0, fmt.Errorf("%w: model %q has no reading at %s", view.ErrNotFound, m.cfg.Name, k.Line)
}

func (v viewSource) decide(ctx context.Context, model string, k view.RowKey, action, by, reason, subject string) (view.DecisionView, error) {
	ds, err := v.decisions()
	if err != nil {
		return view.DecisionView{}, err
	}
	m, err := v.model(model)
	if err != nil {
		return view.DecisionView{}, err
	}
	obs, err := m.obsOf(k)
	if err != nil {
		return view.DecisionView{}, err
	}
	d, err := ds.Decide(ctx, store.Decision{Model: model, ObsID: obs, Action: action, Actor: by, Reason: reason, Subject: subject})
	if err != nil {
		return view.DecisionView{}, decisionErr(err)
	}
	v.d.changed(m)
	return decisionView(d), nil
}

// changed marks the model for a refresh now: a decision applies from the
// next refresh, which should not wait for the next row.
func (d *Daemon) changed(m *watchedModel) {
	m.mu.Lock()
	m.ref.dirty = true
	m.mu.Unlock()
	select {
	case d.kick <- struct{}{}:
	default:
	}
}

func (v viewSource) Exclude(ctx context.Context, model string, k view.RowKey, by, reason, alert string) (view.DecisionView, error) {
	return v.decide(ctx, model, k, store.ActionExclude, by, reason, alert)
}

func (v viewSource) Reinstate(ctx context.Context, model string, k view.RowKey, by, reason string) (view.DecisionView, error) {
	return v.decide(ctx, model, k, store.ActionReinstate, by, reason, "")
}

func (v viewSource) Rebaseline(ctx context.Context, model string, from time.Time, by, reason string) (view.RebaselineView, error) {
	ds, err := v.decisions()
	if err != nil {
		return view.RebaselineView{}, err
	}
	m, err := v.model(model)
	if err != nil {
		return view.RebaselineView{}, err
	}
	if from.IsZero() {
		from = v.d.now()
	}
	r, err := ds.Rebaseline(ctx, store.Rebaseline{Model: model, From: from, Actor: by, Reason: reason})
	if err != nil {
		return view.RebaselineView{}, decisionErr(err)
	}
	v.d.changed(m)
	return rebaselineView(r), nil
}

func rebaselineView(r store.Rebaseline) view.RebaselineView {
	return view.RebaselineView{ID: r.ID, Model: r.Model, From: r.From, By: r.Actor, Reason: r.Reason, Recorded: r.Recorded,
		Note: r.Note(), AuditSeq: r.AuditSeq}
}

func quietView(q store.QuietPeriod) view.QuietView {
	return view.QuietView{ID: q.ID, Model: q.Model, Start: q.Start, End: q.End, Owner: q.Owner, Reason: q.Reason,
		EndedBy: q.EndedBy, EndReason: q.EndReason, AuditSeq: q.AuditSeq}
}

// SetQuiet records a quiet period, refusing one longer than the
// configured quiet_max, one that is already over, and one for a model
// that is not configured.
func (v viewSource) SetQuiet(ctx context.Context, q view.QuietView) (view.QuietView, error) {
	ds, err := v.decisions()
	if err != nil {
		return view.QuietView{}, err
	}
	if q.Model != "" {
		if _, err := v.model(q.Model); err != nil {
			return view.QuietView{}, err
		}
	}
	now := v.d.now()
	if q.Start.IsZero() {
		q.Start = now
	}
	v.d.mu.RLock()
	limit := v.d.cfg.QuietMax.Duration
	v.d.mu.RUnlock()
	switch {
	case q.End.IsZero():
		return view.QuietView{}, fmt.Errorf("%w: a quiet period needs an end", view.ErrInvalid)
	case !q.End.After(q.Start):
		return view.QuietView{}, fmt.Errorf("%w: the end must be after the start", view.ErrInvalid)
	case !q.End.After(now):
		return view.QuietView{}, fmt.Errorf("%w: the period is over already (end %s)", view.ErrInvalid, q.End.UTC().Format(time.RFC3339))
	case limit > 0 && q.End.Sub(q.Start) > limit:
		return view.QuietView{}, fmt.Errorf("%w: a quiet period may last at most %s (quiet_max), this one %s", view.ErrInvalid, limit, q.End.Sub(q.Start).Round(time.Second))
	}
	r, err := ds.SetQuiet(ctx, store.QuietPeriod{Model: q.Model, Start: q.Start, End: q.End, Owner: q.Owner, Reason: q.Reason})
	if err != nil {
		return view.QuietView{}, decisionErr(err)
	}
	if err := v.d.loadQuiet(ctx); err != nil {
		v.d.log.Warn("quiet periods", "err", err) // read again at the next pass
	}
	return quietView(r), nil
}

// EndQuiet ends a quiet period now; its summary goes out at the daemon's
// next pass.
func (v viewSource) EndQuiet(ctx context.Context, id int64, by, reason string) (view.QuietView, error) {
	ds, err := v.decisions()
	if err != nil {
		return view.QuietView{}, err
	}
	r, err := ds.EndQuiet(ctx, id, v.d.now(), by, reason)
	if err != nil {
		return view.QuietView{}, decisionErr(err)
	}
	if err := v.d.loadQuiet(ctx); err != nil {
		v.d.log.Warn("quiet periods", "err", err)
	}
	select {
	case v.d.kick <- struct{}{}:
	default:
	}
	return quietView(r), nil
}

func (v viewSource) QuietPeriods(ctx context.Context) ([]view.QuietView, error) {
	ds, err := v.decisions()
	if err != nil {
		return nil, err
	}
	qs, err := ds.QuietPeriods(ctx, "", v.d.now().Add(-24*time.Hour))
	if err != nil {
		return nil, err
	}
	out := make([]view.QuietView, len(qs))
	for i, q := range qs {
		out[i] = quietView(q)
	}
	return out, nil
}

// setAsideOf is the view's mark of a decision.
func setAsideOf(d store.Decision) *view.SetAside {
	return &view.SetAside{By: d.Actor, At: d.At, Reason: d.Reason, Note: d.Note()}
}

// setAsidePoints lists the model's readings set aside, in arrival order.
// Caller holds mu.
func (m *watchedModel) setAsidePoints() []view.SetAsidePoint {
	ex := m.ref.setAside()
	if len(ex) == 0 {
		return nil
	}
	var out []view.SetAsidePoint
	names := m.numeric()
	for r, id := range m.rows.ids {
		d, ok := ex[id]
		if !ok {
			continue
		}
		p := view.SetAsidePoint{ID: id, File: m.rows.path(r), Line: m.rows.line(r), X: map[string]view.Float{},
			Y: view.Float(m.rows.vals[0][r]), SetAside: *setAsideOf(d)}
		for j, c := range names[1:] {
			p.X[c] = view.Float(m.rows.vals[1+j][r])
		}
		out = append(out, p)
	}
	return out
}
