package daemon

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"time"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/view"
	"plumb/engine"
	"plumb/store"
)

// viewSource is the daemon seen by the web server and the report writer.
// Besides view.Source it offers the optional view.RecentFitter and
// view.RecentQuarantiner, which read only the newest rows from the store.
type viewSource struct{ d *Daemon }

var (
	_ view.Source            = viewSource{}
	_ view.RecentFitter      = viewSource{}
	_ view.RecentQuarantiner = viewSource{}
)

// View returns the daemon as a view.Source (for the report command).
func (d *Daemon) View() view.Source { return viewSource{d} }

func (v viewSource) Ready(ctx context.Context) error {
	if err := v.d.health.err(); err != nil {
		return err
	}
	v.d.mu.RLock()
	defer v.d.mu.RUnlock()
	if !v.d.ready {
		return errors.New("first scan of the watched folders not finished")
	}
	return nil
}

func (v viewSource) model(name string) (*watchedModel, error) {
	v.d.mu.RLock()
	defer v.d.mu.RUnlock()
	m := v.d.models[name]
	if m == nil {
		return nil, &plainError{fmt.Sprintf("no model is named %q", name), view.ErrNotFound}
	}
	return m, nil
}

func (v viewSource) Models(ctx context.Context) ([]view.ModelSummary, error) {
	v.d.mu.RLock()
	order := append([]string(nil), v.d.order...)
	v.d.mu.RUnlock()
	open, err := v.openAlerts(ctx)
	if err != nil {
		return nil, err
	}
	out := make([]view.ModelSummary, 0, len(order))
	for _, name := range order {
		m, err := v.model(name)
		if err != nil {
			continue
		}
		out = append(out, m.summary(open[name]))
	}
	return v.addFleet(ctx, out)
}

func (v viewSource) openAlerts(ctx context.Context) (map[string]int, error) {
	counts := map[string]int{}
	for _, st := range []string{"open", "acknowledged"} {
		as, err := v.d.store.Alerts(ctx, store.AlertQuery{State: st})
		if err != nil {
			return nil, err
		}
		for _, a := range as {
			counts[a.Model]++
		}
	}
	return counts, nil
}

func (m *watchedModel) summary(openAlerts int) view.ModelSummary {
	m.mu.Lock()
	defer m.mu.Unlock()
	s := view.ModelSummary{
		Name: m.cfg.Name, State: m.state, Reason: m.reason, Response: m.spec.Response,
		Terms: m.spec.Names(), Predictors: m.predictors(), Rows: m.rowsAccepted, Quarantined: m.quarantined, Missing: m.missing,
		Fits: m.ref.fits, LastFitAt: m.ref.fitAt, OpenAlerts: openAlerts, MaxCook: view.NaN(),
	}
	if until, ok := m.d.QuietUntil(m.cfg.Name); ok {
		s.QuietUntil = until
	}
	s.SetAsideCount = len(m.ref.setAside())
	if vr := m.ref.view(); vr != nil {
		s.Fragility = m.fragView(vr)
		s.MaxCook = vr.MaxCook()
		s.Suspects = vr.Count(engine.WordSuspect)
	}
	return s
}

// fragView describes the latest fragility result with the configured
// search depth and limit. Caller holds mu.
func (m *watchedModel) fragView(vr *view.Result) view.Fragility {
	return vr.FragilityOf(m.cfg.Fragility.MaxRemoved, m.cfg.Fragility.Limit)
}

func (v viewSource) Model(ctx context.Context, name string) (view.ModelDetail, error) {
	m, err := v.model(name)
	if err != nil {
		if d, ok, ferr := v.remoteDetail(ctx, name); ferr != nil || ok {
			return d, ferr
		}
		return view.ModelDetail{}, err
	}
	open, err := v.openAlerts(ctx)
	if err != nil {
		return view.ModelDetail{}, err
	}
	d := view.ModelDetail{ModelSummary: m.summary(open[name]), Units: m.cfg.Units}
	if ds := v.d.decisionStore(); ds != nil {
		rbs, err := ds.Rebaselines(ctx, name)
		if err != nil {
			return view.ModelDetail{}, err
		}
		for _, r := range rbs {
			d.Rebaselines = append(d.Rebaselines, rebaselineView(r))
		}
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	d.SetAside = m.setAsidePoints()
	vr := m.ref.view()
	if vr == nil {
		return d, nil
	}
	f := vr.Fit
	d.FitID, d.FitAt, d.N, d.P = m.ref.fitID, m.ref.fitAt, f.N, f.P
	d.Sigma, d.RSquared, d.AdjRSquared = view.Float(f.Sigma), view.Float(f.RSquared), view.Float(f.AdjRSquared)
	d.Coefficients = vr.Coefficients()
	d.Points = vr.Points()
	d.Cutoffs = vr.Lines()
	d.Curves = vr.Curves(curveSteps)
	d.Suggestions = vr.SuggestionViews()
	d.Predictions, d.Inverse = vr.Predictions(), vr.Inverses()
	d.Weights, d.Form, d.Pool = vr.Weights(), vr.FormChecks(), vr.Poolability()
	d.FormLevel = m.cfg.Alerts.FormLapse.Level
	if b := m.ref.baseline; b != nil {
		k := m.cfg.Alerts.Drift.K
		for i, t := range b.terms {
			if math.IsNaN(b.est[i]) {
				continue
			}
			se := b.se[i]
			if math.IsNaN(se) && i < len(f.Coef) {
				se = f.Coef[i].StdError
			}
			d.Drift = append(d.Drift, view.DriftBand{Term: t, Baseline: view.Float(b.est[i]),
				Lower: view.Float(b.est[i] - k*se), Upper: view.Float(b.est[i] + k*se)})
		}
	}
	return d, nil
}

// curveSteps is the number of intervals each fitted curve is drawn with.
const curveSteps = 60

func (v viewSource) Fits(ctx context.Context, name string, after int64, limit int) ([]view.FitView, error) {
	if err := v.exists(ctx, name); err != nil {
		return nil, err
	}
	fs, err := v.d.store.Fits(ctx, name, after, limit)
	if err != nil {
		return nil, err
	}
	return fitViews(fs), nil
}

// RecentFits returns the model's latest n fits, oldest first, reading only
// those from the store (store.LatestFits). n <= 0 gives the whole history,
// as view.RecentFitter says; a model that is not configured is
// view.ErrNotFound, as for Fits.
func (v viewSource) RecentFits(ctx context.Context, name string, n int) ([]view.FitView, error) {
	if err := v.exists(ctx, name); err != nil {
		return nil, err
	}
	fs, err := v.d.store.LatestFits(ctx, name, n)
	if err != nil {
		return nil, err
	}
	return fitViews(fs), nil
}

func fitViews(fs []store.FitRecord) []view.FitView {
	out := make([]view.FitView, len(fs))
	for i, f := range fs {
		out[i] = fitView(f)
	}
	return out
}

func fitView(f store.FitRecord) view.FitView {
	fv := view.FitView{ID: f.ID, At: f.At, N: f.N, P: f.P, Terms: f.Terms, Sigma: view.Float(f.Sigma),
		RSquared: view.Float(f.RSquared), LastObsID: f.LastObsID, MaxCook: view.NaN()}
	for _, e := range f.Estimates {
		fv.Estimates = append(fv.Estimates, view.Float(e))
	}
	for _, e := range f.StdErrors {
		fv.StdErrors = append(fv.StdErrors, view.Float(e))
	}
	switch {
	case f.Fragility >= 0:
		fv.Fragility = view.Fragility{Computed: true, Found: true, Index: f.Fragility, K: f.FragilityK}
	case f.Fragility == -1:
		fv.Fragility = view.Fragility{Computed: true, K: f.FragilityK}
	}
	var detail struct {
		MaxCook     *float64          `json:"max_cooks_distance"`
		Predictions []view.Prediction `json:"predictions"`
		Inverse     []view.Inverse    `json:"inverse"`
		Fragility   struct {
			Conclusion string `json:"conclusion"`
			Searched   string `json:"searched"`
			Fragile    bool   `json:"fragile"`
		} `json:"fragility"`
	}
	if json.Unmarshal([]byte(f.Detail), &detail) == nil {
		if detail.MaxCook != nil {
			fv.MaxCook = view.Float(*detail.MaxCook)
		}
		fv.Fragility.Conclusion = detail.Fragility.Conclusion
		fv.Fragility.Searched = detail.Fragility.Searched
		fv.Fragility.Fragile = detail.Fragility.Fragile
		fv.Predictions, fv.Inverse = detail.Predictions, detail.Inverse
	}
	return fv
}

func (v viewSource) Observations(ctx context.Context, name string, after int64, limit int) ([]view.ObservationView, error) {
	if err := v.exists(ctx, name); err != nil {
		return nil, err
	}
	obs, err := v.d.store.Observations(ctx, name, store.ObsQuery{AfterID: after, Limit: limit})
	if err != nil {
		return nil, err
	}
	cur, err := v.d.store.CurrentVerdicts(ctx, name)
	if err != nil {
		return nil, err
	}
	var aside map[int64]store.Decision
	if ds := v.d.decisionStore(); ds != nil {
		dec, err := ds.Decisions(ctx, name)
		if err != nil {
			return nil, err
		}
		aside = store.ExcludedAt(dec, time.Time{})
	}
	out := make([]view.ObservationView, len(obs))
	for i, o := range obs {
		ov := view.ObservationView{ID: o.ID, File: o.Path, Generation: o.Generation, Line: o.Line, Raw: o.Raw, Label: o.Label,
			Time: o.Time, ArrivedAt: o.ArrivedAt, Leverage: view.NaN(), Cook: view.NaN(), StudentizedExternal: view.NaN()}
		for _, x := range o.Values {
			ov.Values = append(ov.Values, view.Float(x))
		}
		if a := o.Arrival; a != nil {
			ov.ArrivalVerdict, ov.Verdict = string(a.Verdict), string(a.Verdict)
			ov.Leverage, ov.Cook, ov.StudentizedExternal = view.Float(a.Leverage), view.Float(a.CooksDistance), view.Float(a.StudentizedExternal)
		}
		if w, ok := cur[o.ID]; ok {
			ov.Verdict = string(w)
		}
		if d, ok := aside[o.ID]; ok {
			ov.SetAside = setAsideOf(d)
		}
		out[i] = ov
	}
	return out, nil
}

func (v viewSource) Quarantine(ctx context.Context, model string, after int64, limit int) ([]view.QuarantineView, error) {
	qs, err := v.d.store.Quarantined(ctx, model, after, limit)
	if err != nil {
		return nil, err
	}
	return quarantineViews(qs), nil
}

// RecentQuarantine returns the latest n quarantined rows of the model
// (model "" for all), oldest first, reading only those from the store
// (store.LatestQuarantined). n <= 0 gives every row; like Quarantine, a
// model with no rows (or none configured) gives none.
func (v viewSource) RecentQuarantine(ctx context.Context, model string, n int) ([]view.QuarantineView, error) {
	qs, err := v.d.store.LatestQuarantined(ctx, model, n)
	if err != nil {
		return nil, err
	}
	return quarantineViews(qs), nil
}

func quarantineViews(qs []store.QuarantineRow) []view.QuarantineView {
	out := make([]view.QuarantineView, len(qs))
	for i, q := range qs {
		out[i] = view.QuarantineView{ID: q.ID, Model: q.Model, File: q.Path, Line: q.Line, Column: q.Column,
			ColumnName: q.ColumnName, Field: q.Field, Raw: q.Raw, Reason: q.Reason, At: q.At}
	}
	return out
}

func (v viewSource) Alerts(ctx context.Context, f view.AlertFilter) ([]view.AlertView, error) {
	as, err := v.d.store.Alerts(ctx, store.AlertQuery{State: f.State, Model: f.Model, Kind: f.Kind, Limit: f.Limit, Offset: f.Offset})
	if err != nil {
		return nil, err
	}
	out := make([]view.AlertView, len(as))
	for i, a := range as {
		out[i] = alertView(a)
	}
	return out, nil
}

func alertView(a store.AlertRecord) view.AlertView {
	av := view.AlertView{ID: a.ID, Model: a.Model, Kind: a.Kind, Severity: a.Severity, Subject: a.Subject,
		State: a.State, FirstSeen: a.FirstSeen, LastSeen: a.LastSeen, Doc: json.RawMessage(a.Doc)}
	if doc, err := alerts.DecodeAlert([]byte(a.Doc)); err == nil {
		av.Summary = doc.Summary
		av.Held = doc.Held
		if doc.Ack != nil {
			av.Note, av.By = doc.Ack.Note, doc.Ack.By
		}
		if doc.Resolution != nil && doc.Resolution.Note != "" {
			av.Note = doc.Resolution.Note
		}
		if doc.Resolution != nil && doc.Resolution.By != "" {
			av.By = doc.Resolution.By
		}
	}
	return av
}

func (v viewSource) Alert(ctx context.Context, id string) (view.AlertView, error) {
	a, err := v.d.store.Alert(ctx, id)
	if errors.Is(err, store.ErrNotFound) {
		return view.AlertView{}, noAlert(id)
	}
	if err != nil {
		return view.AlertView{}, err
	}
	return alertView(a), nil
}

func (v viewSource) Ack(ctx context.Context, id, note, who string) error {
	_, err := v.d.alerts.Ack(ctx, id, note, who)
	return v.actionErr(id, err)
}

func (v viewSource) Resolve(ctx context.Context, id, note string) error {
	_, err := v.d.alerts.Resolve(ctx, id, note)
	return v.actionErr(id, err)
}

// ResolveBy resolves an alert naming who did (view.ResolverBy).
func (v viewSource) ResolveBy(ctx context.Context, id, note, who string) error {
	_, err := v.d.alerts.ResolveBy(ctx, id, note, who)
	return v.actionErr(id, err)
}

func (v viewSource) actionErr(id string, err error) error {
	switch {
	case err == nil:
		return nil
	case errors.Is(err, store.ErrNotFound):
		return noAlert(id)
	case errors.Is(err, alerts.ErrNotOpen):
		return &plainError{fmt.Sprintf("alert %s is already resolved; nothing was changed", id), view.ErrState}
	}
	return err
}

// plainError is an error for people, in one line, that matches a view
// sentinel (errors.Is) without repeating its text.
type plainError struct {
	msg string
	is  error
}

func (e *plainError) Error() string        { return e.msg }
func (e *plainError) Is(target error) bool { return target == e.is }

func noAlert(id string) error {
	return &plainError{fmt.Sprintf("no alert has the id %q", id), view.ErrNotFound}
}
