package daemon

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"
	"time"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/analysis"
	"plumb/cmd/plumb/internal/view"
	"plumb/engine"
	"plumb/store"
)

// refresher is a model's refresh loop: the full refit of the window that
// the daemon's refresh goroutine runs at most once per watch.refresh, and
// its latest result, which the view reads. The model's mutex guards it;
// ingest marks it dirty and queues the suspect rows whose alerts wait for
// the next refresh.
type refresher struct {
	m *watchedModel

	dirty bool
	// pendingSuspects are rows judged suspect at arrival whose alert waits
	// for the next refresh (which supplies the suggestion).
	pendingSuspects []suspect
	baseline        *baseline
	fits            int64 // fits recorded, this run and before
	// dec is what the last refresh read of the model's recorded
	// decisions (decide.go).
	dec decisionState

	// The latest refresh: the analysis of the window and the data
	// indices it used, in fit order.
	res       *analysis.Result
	window    []int
	fitAt     time.Time
	fitID     int64
	lastFitN  int
	refreshNs int64
}

// view returns the read model of the latest refresh, or nil before the
// first. Caller holds the model's mutex, for as long as it reads.
func (r *refresher) view() *view.Result {
	if r.res == nil {
		return nil
	}
	m := r.m
	return &view.Result{Result: r.res, Cutoffs: m.cut, Row: func(i int) view.RowRef {
		row := r.window[i]
		return view.RowRef{ID: m.rows.ids[row], File: m.rows.path(row), Line: m.rows.line(row), Label: m.rows.name(row)}
	}}
}

// refresh refits the model on its window, rejudges every row, measures
// fragility and where to collect more data, stores the fit summary with the
// verdicts that changed, and reports the conditions to the alert manager.
//
// The heavy computation runs on a copy of the window's values, outside the
// model's lock, so ingest is never held up by a refit.
func (r *refresher) refresh(ctx context.Context) error {
	m := r.m
	start := time.Now()
	if err := r.readDecisions(ctx); err != nil {
		return err
	}
	m.mu.Lock()
	if !r.dirty {
		m.mu.Unlock()
		return nil
	}
	r.dirty = false
	// Readings set aside are left out of everything computed below.
	win := r.keepIncluded(m.rows.window(m.cfg.Window))
	nAtCopy := m.rows.len()
	cols := m.rows.copyRows(win, m.numeric())
	text := m.copyLabels(win)
	// The model is read under the lock: ingest may extend its levels.
	an := m.analysis(func(row int) string { return m.labelOf(win, row) })
	lastID := int64(0)
	if len(m.rows.ids) > 0 {
		lastID = m.rows.ids[len(m.rows.ids)-1]
	}
	headerBlocked := len(m.headerBlocked) > 0
	m.mu.Unlock()

	name := m.cfg.Name
	if headerBlocked {
		return nil // blocked until the header is restored; reason already set
	}
	if len(win) < m.minRows {
		reason := fmt.Sprintf("waiting for rows: %d of the %d needed before judging", len(win), m.minRows)
		m.setState(ctx, stateWaiting, reason, "")
		return nil
	}
	res, err := an.RunData(ctx, engine.Data{Num: cols, Text: text})
	if err != nil {
		var se *analysis.StepError
		if !errors.As(err, &se) {
			return err // cancelled
		}
		err = se.Err
		cause := alerts.CauseNotFittable
		switch {
		case errors.Is(err, engine.ErrTooFewRows):
			cause = alerts.CauseTooFewRows
		case errors.Is(err, engine.ErrCollinear), errors.Is(err, engine.ErrConstantColumn):
			cause = alerts.CauseCollinear
		}
		m.setState(ctx, stateBlocked, "cannot fit: "+err.Error(), cause)
		if aerr := m.d.blocked(ctx, alerts.BlockedCondition{Model: name, Blocked: true, Cause: cause, Reason: err.Error()}); aerr != nil {
			m.log.Error("alert", "err", aerr)
		}
		return nil
	}
	for _, p := range res.Problems {
		m.log.Warn(string(p.Step), "err", p.Err)
	}
	fit, inf, verdicts, frag, sugg := res.Fit, res.Influence, res.Verdicts, res.Fragility, res.Suggestions

	// Verdict changes against the latest known verdict of each row.
	m.mu.Lock()
	// Suspects judged at arrival are reported only now that a fit stands:
	// those that arrived while the model was blocked or not fittable
	// waited for it, and are alerted as if judging had never stopped.
	pendingSuspects := r.pendingSuspects[:0:0]
	for _, sp := range r.pendingSuspects {
		if !r.excludedRow(sp.row) { // set aside before its alert was sent
			pendingSuspects = append(pendingSuspects, sp)
		}
	}
	r.pendingSuspects = nil
	var changes []store.VerdictChange
	now := m.d.now()
	var resolvedSuspects []int
	for i, row := range win {
		w := verdicts[i].Word()
		if m.rows.current[row] != w {
			changes = append(changes, store.VerdictChange{ObsID: m.rows.ids[row], At: now, From: m.rows.current[row], To: w, Flags: verdicts[i].Flags})
			if m.rows.current[row] == engine.WordSuspect {
				resolvedSuspects = append(resolvedSuspects, row)
			}
			m.rows.current[row] = w
		}
	}
	m.mu.Unlock()

	rec := store.FitRecord{
		Model: name, At: now, N: fit.N, P: fit.P, Terms: res.Model.Names(), Sigma: fit.Sigma,
		RSquared: fit.RSquared, Fragility: -2, LastObsID: lastID,
	}
	for _, c := range fit.Coef {
		rec.Estimates = append(rec.Estimates, c.Estimate)
		rec.StdErrors = append(rec.StdErrors, c.StdError)
	}
	maxCook := 0.0
	for _, o := range inf.Rows {
		if o.Cook > maxCook {
			maxCook = o.Cook
		}
	}
	detail := map[string]any{"max_cooks_distance": view.Float(maxCook), "adj_r_squared": view.Float(fit.AdjRSquared), "df": fit.DF,
		"response": m.spec.Response}
	if frag != nil {
		rec.FragilityK = m.cfg.Fragility.MaxRemoved
		rec.Fragility = -1
		if frag.Index > 0 {
			rec.Fragility = frag.Index
		}
		detail["fragility"] = r.fragilityJSON(win, frag)
	}
	if len(sugg) > 0 {
		ss := make([]map[string]any, len(sugg))
		for i, s := range sugg {
			at := make(map[string]view.Float, len(s.At))
			for k, x := range s.At {
				at[k] = view.Float(x)
			}
			ss[i] = map[string]any{"at": at, "replicates": s.Replicates, "d_gain": view.Float(s.DGain), "text": s.Text}
		}
		detail["suggestions"] = ss
	}
	recordAnswers(detail, res)
	r.afterRefresh(res, detail)
	dj, err := json.Marshal(detail)
	if err != nil {
		m.log.Error("fit detail", "err", err) // stored without it
		dj = []byte("{}")
	}
	rec.Detail = string(dj)
	var fitID int64
	if !m.d.opts.ReadOnly {
		if fitID, err = m.d.store.RecordFit(ctx, rec, changes); err != nil {
			return fmt.Errorf("record fit: %w", err)
		}
	}

	m.mu.Lock()
	r.res, r.window = res, win
	r.fitAt, r.fitID, r.lastFitN = now, fitID, fit.N
	r.reseedOnline(fit, nAtCopy)
	r.fits++
	r.refreshNs = time.Since(start).Nanoseconds()
	if r.baseline == nil {
		r.baseline = r.makeBaseline()
	}
	base := r.baseline
	m.mu.Unlock()
	m.setState(ctx, stateJudging, "", "")
	m.d.metrics.fit(name, time.Since(start), fit.N, frag, maxCook)

	// Alerts. A fit that succeeds clears a blocked model.
	m.mu.Lock()
	stillBlocked := len(m.headerBlocked) > 0
	m.mu.Unlock()
	if !stillBlocked {
		if err := m.d.blocked(ctx, alerts.BlockedCondition{Model: name, Blocked: false}); err != nil {
			m.log.Error("alert", "err", err)
		}
	}
	var top *alerts.Suggestion
	if len(sugg) > 0 {
		top = alertSuggestion(sugg[0])
	}
	for _, sp := range pendingSuspects {
		r.reportPoint(ctx, sp, top)
	}
	r.resolveByDecisions(ctx)
	for _, row := range resolvedSuspects {
		m.mu.Lock()
		path, line, label := m.rows.path(row), m.rows.line(row), m.rows.name(row)
		vals := m.valuesOf(row)
		m.mu.Unlock()
		if err := m.d.point(ctx, alerts.PointCondition{Model: name, File: path, Line: line, Label: label, Values: vals}); err != nil {
			m.log.Error("alert", "err", err)
		}
	}
	if frag != nil {
		fc := alerts.FragilityCondition{Model: name, Index: frag.Index, Conclusion: frag.Conclusion, Suggestion: top}
		if frag.Index > 0 {
			for _, row := range frag.RemovedRows {
				fc.Removed = append(fc.Removed, m.labelOf(win, row))
			}
			fc.Before = fmtNum(frag.Before)
			fc.After = fmtNum(frag.After)
		}
		if err := m.d.fragility(ctx, fc); err != nil {
			m.log.Error("alert", "err", err)
		}
	}
	r.reportForm(ctx, res)
	if base != nil && base.fit != fit {
		if df := r.driftFit(res.Model, cols, text, verdicts, fit); df != nil {
			// The baseline's rows are all in the drift fit when the
			// window starts at the first row and no suspect was left out.
			nested := len(win) > 0 && win[0] == 0 && len(engine.Flagged(verdicts, engine.WordSuspect)) == 0
			if err := m.d.drift(ctx, r.driftCondition(base, df, res.Region, nested)); err != nil {
				m.log.Error("alert", "err", err)
			}
		}
	}
	return nil
}

// driftFit returns the fit that drift is judged on: the current fit, or,
// when some rows are currently suspect points, the fit without them. A
// suspect point has an alert of its own; leaving it out of the drift check
// keeps one bad reading from raising two alerts. Nothing is removed from
// the data or the history.
func (r *refresher) driftFit(spec engine.Model, cols map[string][]float64, text map[string][]string, verdicts []engine.Verdict, fit *engine.Fit) *engine.Fit {
	m := r.m
	suspects := engine.Flagged(verdicts, engine.WordSuspect)
	if len(suspects) == 0 {
		return fit
	}
	keep := make(map[string][]float64, len(cols))
	for c, v := range cols {
		keep[c] = without(v, suspects)
	}
	var keepText map[string][]string
	if text != nil {
		keepText = make(map[string][]string, len(text))
		for c, v := range text {
			keepText[c] = without(v, suspects)
		}
	}
	f, err := m.fitData(spec, keep, keepText)
	if err != nil {
		return nil
	}
	return f
}

// without returns v without the elements at the ascending indices drop.
func without[T any](v []T, drop []int) []T {
	out := make([]T, 0, len(v)-len(drop))
	k := 0
	for i, x := range v {
		if k < len(drop) && drop[k] == i {
			k++
			continue
		}
		out = append(out, x)
	}
	return out
}

// labelOf names the 1-based window row as "file:line".
func (m *watchedModel) labelOf(win []int, row int) string {
	m.mu.Lock()
	defer m.mu.Unlock()
	if row < 1 || row > len(win) {
		return fmt.Sprintf("row %d", row)
	}
	return m.rows.label(win[row-1])
}

// valuesOf returns row r's values by column name. Caller holds mu.
func (m *watchedModel) valuesOf(r int) alerts.Values {
	return alerts.Values(m.rows.values(r, m.numeric()))
}

// reportPoint reports a row judged suspect at arrival, with the cutoffs it
// crossed then.
func (r *refresher) reportPoint(ctx context.Context, sp suspect, sugg *alerts.Suggestion) {
	m := r.m
	m.mu.Lock()
	path, line, label := m.rows.path(sp.row), m.rows.line(sp.row), m.rows.name(sp.row)
	vals := m.valuesOf(sp.row)
	m.mu.Unlock()
	c := alerts.PointCondition{Model: m.cfg.Name, File: path, Line: line, Label: label, Values: vals, Outlier: true, Influential: true, Suggestion: sugg}
	// The alert names the outlier test and the cutoffs of the family that
	// decides "influential"; the other family's flags stay with the
	// observation's stored diagnostics.
	deciding := engine.FamilyAbsolute
	if m.cut.Family == engine.SizeAdjusted {
		deciding = engine.FamilySizeAdjusted
	}
	for _, f := range sp.flags {
		if f.Family != deciding && f.Family != engine.FamilyTest {
			continue
		}
		c.Measures = append(c.Measures, alerts.Measure(f))
	}
	if err := m.d.point(ctx, c); err != nil {
		m.log.Error("alert", "err", err)
	}
}

// analysis is the model's analysis as configured: the judgement's
// cutoffs, fragility when enabled, and suggestions over the configured
// operating region (the observed range for the columns it leaves out).
func (m *watchedModel) analysis(label func(int) string) *analysis.Analysis {
	fopt := engine.FragilityOptions{MaxRemoved: m.cfg.Fragility.MaxRemoved, Limit: m.cfg.Fragility.Limit}
	a := &analysis.Analysis{Model: m.fitSpec(), Options: analysis.Options{
		Cutoffs:          m.cut,
		Conclusions:      m.conclusions(),
		Fragility:        *m.cfg.Fragility.Enabled,
		FragilityOptions: fopt,
		Suggest:          m.canSuggest(),
		SuggestOptions:   engine.SuggestOptions{Replicates: m.cfg.Suggest.Replicates, Top: m.cfg.Suggest.Count},
		Region:           engine.Region{},
		Answers:          m.answers(),
		Label:            label,
		Form:             formInRefresh,
		Pool:             m.grouped(),
		PoolAlpha:        m.cfg.PoolLevel,
	}}
	for c, b := range m.cfg.Region {
		if len(b) == 2 {
			a.Region[c] = [2]float64{b[0], b[1]}
		}
	}
	return a
}

func (m *watchedModel) conclusions() engine.Conclusions {
	c := engine.DefaultConclusions()
	c.Alpha = m.cfg.Judge.Alpha
	for _, b := range m.cfg.Fragility.Bands {
		c.Coefficients = append(c.Coefficients, engine.CoefBand{Term: b.Term, K: b.K})
	}
	for _, cp := range m.cfg.Checkpoints {
		c.Checkpoints = append(c.Checkpoints, engine.Checkpoint{Name: cp.Name, At: cp.At, Tolerance: cp.Tolerance})
	}
	return c
}

func (r *refresher) fragilityJSON(win []int, f *engine.FragilityResult) map[string]any {
	m := r.m
	out := map[string]any{"searched": f.Searched, "fragile": f.Fragile}
	if f.Index > 0 {
		out["index"] = f.Index
		var rows []string
		for _, row := range f.RemovedRows {
			rows = append(rows, m.labelOf(win, row))
		}
		out["removed"] = rows
		out["conclusion"] = f.Conclusion
		out["before"] = view.Float(f.Before)
		out["after"] = view.Float(f.After)
	} else {
		out["index"] = nil
	}
	return out
}

// makeBaseline fixes the drift baseline: a pinned one from the config, or
// the fit of the first baseline_rows rows. Caller holds mu.
func (r *refresher) makeBaseline() *baseline {
	m := r.m
	d := m.cfg.Alerts.Drift
	names := m.spec.Names()
	if len(d.Pinned) > 0 {
		b := &baseline{label: "pinned coefficients", terms: names}
		for _, t := range names {
			v, ok := d.Pinned[t]
			if !ok {
				v = math.NaN()
			}
			b.est = append(b.est, v)
			b.se = append(b.se, math.NaN())
		}
		return b
	}
	rows := r.baselineRows(d.BaselineRows)
	if len(rows) < d.BaselineRows {
		return nil
	}
	cols := m.rows.copyRows(rows, m.numeric())
	spec := m.spec
	if m.grouped() {
		spec.Levels = nil // the levels of these rows; later ones are not compared
	}
	f, err := m.fitData(spec, cols, m.copyLabels(rows))
	if err != nil {
		return nil
	}
	b := &baseline{label: r.baselineLabel(d.BaselineRows), terms: f.Model.Names(), fit: f}
	for _, c := range f.Coef {
		b.est = append(b.est, c.Estimate)
		b.se = append(b.se, c.StdError)
	}
	return b
}

// driftCondition compares f with the baseline b; nested says the
// baseline's rows are all in f (see shiftOf). Its suggestion is not
// where the data are thin (more readings do nothing for a calibration
// that moves) but a check against reference standards at the model's
// checkpoints, or across region when it names none (alerts.DriftSuggestion).
func (r *refresher) driftCondition(b *baseline, f *engine.Fit, region engine.Region, nested bool) alerts.DriftCondition {
	m := r.m
	c := alerts.DriftCondition{Model: m.cfg.Name, Baseline: b.label}
	var moved map[string]bool
	if b.fit != nil {
		moved = movedByReference(b.fit.Model, f.Model)
	}
	for _, c0 := range f.Coef {
		// By name: a group level added since the baseline adds
		// coefficients, one the baseline lacks is not compared; a new
		// reference level changes what some mean (movedByReference).
		i := slices.Index(b.terms, c0.Term)
		if i < 0 || i >= len(b.est) || math.IsNaN(b.est[i]) || moved[c0.Term] {
			continue
		}
		se := b.se[i]
		if math.IsNaN(se) {
			se = c0.StdError
		}
		c.Measures = append(c.Measures, alerts.DriftMeasure{Name: c0.Term, Kind: alerts.DriftCoefficient, Baseline: b.est[i], Current: c0.Estimate, StdError: se})
	}
	if b.fit != nil {
		x := make([]float64, m.spec.P())
		for _, cp := range m.cfg.Checkpoints {
			if err := m.spec.DesignRow(x, func(col string) float64 {
				if v, ok := cp.At[col]; ok {
					return v
				}
				return math.NaN()
			}); err != nil {
				continue
			}
			y0, se0 := b.fit.Predict(x)
			y1, _ := f.Predict(x)
			name := cp.Name
			if name == "" {
				name = "checkpoint " + formatAt(cp.At)
			}
			dm := alerts.DriftMeasure{Name: name, Kind: alerts.DriftPrediction, At: alerts.Values(cp.At), Baseline: y0, Current: y1, StdError: se0}
			m.shiftOf(&dm, b.fit, f, x, nested)
			c.Measures = append(c.Measures, dm)
		}
	}
	c.Suggestion = alerts.DriftSuggestion(c.Measures, region)
	return c
}

func alertSuggestion(s engine.Suggestion) *alerts.Suggestion {
	return &alerts.Suggestion{At: alerts.Values(s.At), Text: s.Text}
}

func formatAt(at map[string]float64) string {
	keys := make([]string, 0, len(at))
	for k := range at {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = fmt.Sprintf("%s = %s", k, fmtNum(at[k]))
	}
	return strings.Join(parts, ", ")
}

func fmtNum(v float64) string {
	return fmt.Sprintf("%.6g", v)
}

// setState records the model's state when it changes.
func (m *watchedModel) setState(ctx context.Context, state, reason, cause string) {
	m.mu.Lock()
	if state != stateBlocked && len(m.headerBlocked) > 0 {
		// A file of the model is blocked (its header changed while a
		// refit was under way): the model stays blocked until it clears.
		m.mu.Unlock()
		return
	}
	changed := m.state != state || m.reason != reason
	m.state, m.reason, m.cause = state, reason, cause
	m.mu.Unlock()
	if !changed || m.d.opts.ReadOnly {
		return
	}
	if err := m.d.store.SetModelState(ctx, store.ModelState{Model: m.cfg.Name, State: state, Reason: reason, At: m.d.now()}); err != nil {
		m.log.Error("model state", "err", err)
	}
	if state == stateBlocked {
		m.log.Warn("model blocked", "reason", reason)
	}
}
