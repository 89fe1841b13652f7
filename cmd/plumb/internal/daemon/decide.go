package daemon

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"time"

	"plumb/alerts"
	"plumb/engine"
	"plumb/store"
)

// How the daemon applies the recorded decisions (store.Decisions):
//
//   - A reading set aside (store.ExcludedAt) is left out of the window of
//     every refresh from the next one on: the refit, the drift check,
//     fragility and suggestions never see it. It stays in the columns, the
//     store and every list. The suspect-point alert it raised is resolved
//     with the decision's note (store.Decision.Note), by its author.
//   - A re-baseline (store.BaselineFrom) makes the drift baseline the fit
//     of the first baseline_rows readings not set aside whose time (the
//     time column, else the arrival) is at or after its From; a drift alert
//     raised before it was recorded is resolved with its note.
//   - A quiet period holds the deliveries of the alerts it covers
//     (alerts.Config.Quiet); when it ends the alerts still open are sent
//     once, as one summary (alerts.Manager.QuietSummary).
//
// The decisions are read at each refresh (they are few), so one recorded
// by the command line while the daemon runs takes effect at the next
// refresh, as one recorded through the API does.

// decisionStore returns the store's decisions, or nil when the backend
// has none.
func (d *Daemon) decisionStore() store.Decisions {
	ds, _ := d.store.(store.Decisions)
	return ds
}

// decisionState is what the refresher last read of the model's decisions.
type decisionState struct {
	read       bool
	nDecisions int
	nRebase    int
	excluded   map[int64]store.Decision
	rebase     store.Rebaseline
	rebaseOK   bool
	// resolved holds the decisions (exclusions by id; re-baselines by id)
	// whose alerts this run has resolved already.
	resolvedEx map[int64]bool
	resolvedRB map[int64]bool
	// reseed is set when the readings set aside changed: the online fit
	// that judges arrivals is rebuilt without them at the next refresh.
	reseed bool
}

// readDecisions reads the model's decisions and re-baselines and reports
// whether they changed since the last read (the first read counts as a
// change when there are any). A change marks the model dirty and drops
// the drift baseline, which is rebuilt from the rows now in force.
func (r *refresher) readDecisions(ctx context.Context) error {
	m := r.m
	ds := m.d.decisionStore()
	if ds == nil {
		return nil
	}
	dec, err := ds.Decisions(ctx, m.cfg.Name)
	if err != nil {
		return fmt.Errorf("decisions: %w", err)
	}
	rbs, err := ds.Rebaselines(ctx, m.cfg.Name)
	if err != nil {
		return fmt.Errorf("re-baselines: %w", err)
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	st := &r.dec
	if st.read && st.nDecisions == len(dec) && st.nRebase == len(rbs) {
		return nil
	}
	first := !st.read
	st.read, st.nDecisions, st.nRebase = true, len(dec), len(rbs)
	before := len(st.excluded)
	st.excluded = store.ExcludedAt(dec, time.Time{})
	st.reseed = st.reseed || len(st.excluded) > 0 || before > 0
	st.rebase, st.rebaseOK = store.BaselineFrom(rbs, time.Time{})
	if st.resolvedEx == nil {
		st.resolvedEx, st.resolvedRB = map[int64]bool{}, map[int64]bool{}
	}
	if !first || len(dec) > 0 || len(rbs) > 0 {
		r.dirty = r.dirty || len(m.rows.ids) > 0
		r.baseline = nil
	}
	return nil
}

// reseedOnline rebuilds the online fit that judges arriving rows of a
// model without a window after the readings set aside changed: the rows
// of the refresh's fit (all rows not set aside when the refresh copied
// them), then those that arrived since (rows from index since on), not
// set aside. A windowed model refits its window per arrival and leaves
// the rows set aside out there (windowArrival). Caller holds mu.
func (r *refresher) reseedOnline(fit *engine.Fit, since int) {
	m := r.m
	if !r.dec.reseed || m.windowed() {
		return
	}
	r.dec.reseed = false
	m.online.Seed(fit)
	v := make([]float64, len(m.rows.vals))
	lab := make([]string, len(m.form.groups))
	for i := since; i < m.rows.len(); i++ {
		if r.excludedRow(i) {
			continue
		}
		for j := range v {
			v[j] = m.rows.vals[j][i]
		}
		for g := range lab {
			lab[g] = m.form.labels[g][i]
		}
		if m.designRow(v, lab) != nil {
			continue
		}
		if w, err := m.rowWeight(v); err == nil {
			m.online.AddWeighted(m.xrow, v[0], w)
		}
	}
}

// keepIncluded returns win without the rows set aside. Caller holds mu.
func (r *refresher) keepIncluded(win []int) []int {
	ex := r.dec.excluded
	if len(ex) == 0 {
		return win
	}
	out := make([]int, 0, len(win))
	for _, row := range win {
		if _, ok := ex[r.m.rows.ids[row]]; !ok {
			out = append(out, row)
		}
	}
	return out
}

// excludedRow reports whether data row row is set aside. Caller holds mu.
func (r *refresher) excludedRow(row int) bool {
	_, ok := r.dec.excluded[r.m.rows.ids[row]]
	return ok
}

// resolveByDecisions resolves, once per run, the suspect-point alert of
// each reading set aside (with the decision's note, by its author) and
// the drift alert raised before the re-baseline in force (with its note).
// An alert opened or reopened after the decision is left alone.
func (r *refresher) resolveByDecisions(ctx context.Context) {
	m := r.m
	if m.d.opts.ReadOnly || m.d.alerts == nil {
		return
	}
	type job struct {
		id   string
		at   time.Time
		note string
		by   string
		done func()
	}
	var jobs []job
	m.mu.Lock()
	byID := make(map[int64]int, len(r.dec.excluded))
	if len(r.dec.excluded) > 0 {
		for i, id := range m.rows.ids {
			byID[id] = i
		}
	}
	for obs, dec := range r.dec.excluded {
		if r.dec.resolvedEx[dec.ID] {
			continue
		}
		row, ok := byID[obs]
		if !ok {
			continue
		}
		subj := alerts.PointSubject(m.cfg.Name, m.rows.path(row), m.rows.line(row))
		decID := dec.ID
		jobs = append(jobs, job{alerts.ID(m.cfg.Name, alerts.KindSuspectPoint, subj), dec.At, dec.Note(), dec.Actor,
			func() { r.dec.resolvedEx[decID] = true }})
	}
	if rb := r.dec.rebase; r.dec.rebaseOK && !r.dec.resolvedRB[rb.ID] {
		jobs = append(jobs, job{alerts.ID(m.cfg.Name, alerts.KindDrift, m.cfg.Name), rb.Recorded, rb.Note(), rb.Actor,
			func() { r.dec.resolvedRB[rb.ID] = true }})
	}
	m.mu.Unlock()
	for _, j := range jobs {
		a, err := m.d.alerts.Get(ctx, j.id)
		switch {
		case errors.Is(err, store.ErrNotFound):
		case err != nil:
			m.log.Error("alert", "err", err)
			continue
		case a.State == alerts.StateResolved:
		case !a.FirstSeen.Before(j.at) || (a.Event == alerts.Reopened && !a.NotifiedAt.Before(j.at)):
			// raised after the decision: it stands on its own
		default:
			if err := m.d.alerted(m.d.alerts.ResolveBy(ctx, j.id, j.note, j.by)); err != nil && !errors.Is(err, alerts.ErrNotOpen) {
				m.log.Error("alert", "err", err)
				continue
			}
		}
		m.mu.Lock()
		j.done()
		m.mu.Unlock()
	}
}

// baselineRows returns the data rows the drift baseline is fitted on: the
// first n rows not set aside, from the re-baseline's From when one is in
// force. Caller holds mu.
func (r *refresher) baselineRows(n int) []int {
	c := r.m.rows
	var from int64
	if r.dec.rebaseOK {
		from = r.dec.rebase.From.UnixNano()
	}
	out := make([]int, 0, n)
	for i := 0; i < c.len() && len(out) < n; i++ {
		if r.excludedRow(i) {
			continue
		}
		if r.dec.rebaseOK {
			t := c.times[i]
			if t == 0 {
				t = c.arrived[i]
			}
			if t < from {
				continue
			}
		}
		out = append(out, i)
	}
	return out
}

// baselineLabel names the baseline for the drift alert.
func (r *refresher) baselineLabel(n int) string {
	if r.dec.rebaseOK {
		return fmt.Sprintf("fit of the first %d rows from %s (%s)", n, r.dec.rebase.From.UTC().Format("2006-01-02 15:04 UTC"), r.dec.rebase.Note())
	}
	return fmt.Sprintf("fit after the first %d rows", n)
}

// SetAside returns the readings of the model now set aside, by
// observation id, for the views. Caller holds mu.
func (r *refresher) setAside() map[int64]store.Decision { return r.dec.excluded }

// ---- quiet periods ----

// quietState caches the quiet periods the daemon knows, read at each
// refresh pass and after each change through the daemon.
type quietState struct {
	periods []store.QuietPeriod
	// summarised holds the periods whose summary this run has enqueued.
	summarised map[int64]bool
}

// quietLookback bounds how far back a period's end is looked at for its
// summary (after a long stop the summary is still sent once).
const quietLookback = 7 * 24 * time.Hour

func (d *Daemon) loadQuiet(ctx context.Context) error {
	ds := d.decisionStore()
	if ds == nil {
		return nil
	}
	qs, err := ds.QuietPeriods(ctx, "", d.now().Add(-quietLookback))
	if err != nil {
		return err
	}
	d.qmu.Lock()
	d.quiet.periods = qs
	d.qmu.Unlock()
	return nil
}

// quietAt reports whether a quiet period holds the model's deliveries at
// now (the alerts.Config.Quiet hook).
func (d *Daemon) quietAt(model string, now time.Time) bool {
	d.qmu.Lock()
	defer d.qmu.Unlock()
	return len(store.QuietAt(d.quiet.periods, model, now)) > 0
}

// QuietUntil returns when the model's current quiet ends (ok false when
// none is in force), for the dashboard's mark.
func (d *Daemon) QuietUntil(model string) (time.Time, bool) {
	d.qmu.Lock()
	defer d.qmu.Unlock()
	return store.QuietUntil(d.quiet.periods, model, d.now())
}

// summariseQuiet sends the summary of each period that has ended and is
// not followed by another still in force: the alerts still open of the
// models it covered. Each is enqueued once (alerts.Manager.QuietSummary).
func (d *Daemon) summariseQuiet(ctx context.Context) error {
	if d.opts.ReadOnly {
		return nil
	}
	now := d.now()
	d.qmu.Lock()
	qs := append([]store.QuietPeriod(nil), d.quiet.periods...)
	if d.quiet.summarised == nil {
		d.quiet.summarised = map[int64]bool{}
	}
	done := make(map[int64]bool, len(d.quiet.summarised))
	for k, v := range d.quiet.summarised {
		done[k] = v
	}
	d.qmu.Unlock()
	var errs []error
	for _, p := range qs {
		if done[p.ID] || p.End.After(now) || !p.End.After(p.Start) {
			continue
		}
		if p.Model != "" && len(store.QuietAt(qs, p.Model, now)) > 0 {
			continue // followed by another period: its end summarises
		}
		covered := func(model string) bool {
			return (p.Model == "" || p.Model == model) && len(store.QuietAt(qs, model, now)) == 0
		}
		ap := alerts.QuietPeriod{Key: strconv.FormatInt(p.ID, 10), Model: p.Model, Start: p.Start, End: p.End, Owner: p.Owner, Reason: p.Reason}
		n, err := d.alerts.QuietSummary(ctx, ap, covered, now)
		if err != nil {
			errs = append(errs, err)
			continue
		}
		if n > 0 {
			d.log.Info("quiet period ended: summary enqueued", "period", p.ID, "model", p.Model, "open", n)
		}
		d.qmu.Lock()
		d.quiet.summarised[p.ID] = true
		d.qmu.Unlock()
	}
	return errors.Join(errs...)
}
