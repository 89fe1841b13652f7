package daemon

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
	"time"

	"plumb/alerts"
	"plumb/engine"
	"plumb/store"
)

// refresh refits the model on its window, rejudges every row, measures
// fragility and where to collect more data, stores the fit summary with the
// verdicts that changed, and reports the conditions to the alert manager.
//
// The heavy computation runs on a copy of the window's values, outside the
// model's lock, so ingest is never held up by a refit.
func (m *modelRT) refresh(ctx context.Context) error {
	start := time.Now()
	m.mu.Lock()
	if !m.dirty {
		m.mu.Unlock()
		return nil
	}
	m.dirty = false
	win := m.windowRows()
	cols := make(map[string][]float64, len(m.cols)+1)
	y := make([]float64, len(win))
	for i, r := range win {
		y[i] = m.vals[0][r]
	}
	cols[m.spec.Response] = y
	for j, c := range m.cols {
		v := make([]float64, len(win))
		for i, r := range win {
			v[i] = m.vals[1+j][r]
		}
		cols[c] = v
	}
	lastID := int64(0)
	if len(m.ids) > 0 {
		lastID = m.ids[len(m.ids)-1]
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
	X, yy, err := m.spec.Design(cols)
	var fit *engine.Fit
	if err == nil {
		fit, err = engine.Refit(m.spec, X, yy)
	}
	if err != nil {
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
	inf, verdicts := engine.Assess(fit, m.cut)

	var frag *engine.FragilityResult
	if *m.cfg.Fragility.Enabled {
		fr, ferr := engine.Fragility(fit, inf, m.conclusions(), engine.FragilityOptions{
			MaxRemoved: m.cfg.Fragility.MaxRemoved, Limit: m.cfg.Fragility.Limit,
		})
		if ferr != nil {
			m.log.Warn("fragility", "err", ferr)
		} else {
			frag = &fr
		}
	}
	label := func(row int) string { return m.labelOf(win, row) }
	sugg, serr := engine.Suggest(fit, inf, verdicts, m.region(cols), engine.SuggestOptions{
		Replicates: m.cfg.Suggest.Replicates, Top: m.cfg.Suggest.Count,
		Conclusions: m.conclusions(), Fragility: engine.FragilityOptions{MaxRemoved: m.cfg.Fragility.MaxRemoved, Limit: m.cfg.Fragility.Limit},
		Label: label,
	})
	if serr != nil {
		m.log.Warn("suggestions", "err", serr)
	}

	// Verdict changes against the latest known verdict of each row.
	m.mu.Lock()
	// Suspects judged at arrival are reported only now that a fit stands:
	// those that arrived while the model was blocked or not fittable
	// waited for it, and are alerted as if judging had never stopped.
	pendingSuspects := m.pendingSuspects
	m.pendingSuspects = nil
	var changes []store.VerdictChange
	now := m.d.now()
	var resolvedSuspects []int
	for i, r := range win {
		w := verdicts[i].Word()
		if m.current[r] != w {
			fl, _ := json.Marshal(flagsJSON(verdicts[i].Flags))
			changes = append(changes, store.VerdictChange{ObsID: m.ids[r], At: now, From: m.current[r], To: w, Flags: string(fl)})
			if m.current[r] == "suspect" {
				resolvedSuspects = append(resolvedSuspects, r)
			}
			m.current[r] = w
		}
	}
	m.mu.Unlock()

	rec := store.FitRecord{
		Model: name, At: now, N: fit.N, P: fit.P, Terms: m.spec.Names(), Sigma: fit.Sigma,
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
	detail := map[string]any{"max_cooks_distance": finite(maxCook), "adj_r_squared": finite(fit.AdjRSquared), "df": fit.DF}
	if frag != nil {
		rec.FragilityK = m.cfg.Fragility.MaxRemoved
		rec.Fragility = -1
		if frag.Index > 0 {
			rec.Fragility = frag.Index
		}
		detail["fragility"] = m.fragilityJSON(win, frag)
	}
	if len(sugg) > 0 {
		ss := make([]map[string]any, len(sugg))
		for i, s := range sugg {
			ss[i] = map[string]any{"at": s.At, "replicates": s.Replicates, "d_gain": finite(s.DGain), "text": s.Text}
		}
		detail["suggestions"] = ss
	}
	dj, _ := json.Marshal(detail)
	rec.Detail = string(dj)
	var fitID int64
	if !m.d.opts.ReadOnly {
		if fitID, err = m.d.store.RecordFit(ctx, rec, changes); err != nil {
			return fmt.Errorf("record fit: %w", err)
		}
	}

	m.mu.Lock()
	m.fit, m.inf, m.verdicts, m.window, m.frag, m.sugg = fit, inf, verdicts, win, frag, sugg
	m.fitAt, m.fitID, m.lastFitN = now, fitID, fit.N
	m.fits++
	m.refreshNs = time.Since(start).Nanoseconds()
	if m.baseline == nil {
		m.baseline = m.makeBaseline()
	}
	base := m.baseline
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
	for _, r := range pendingSuspects {
		m.reportPoint(ctx, r, top)
	}
	for _, r := range resolvedSuspects {
		m.mu.Lock()
		path, line := m.pathNames[m.paths[r]], int(m.lines[r])
		vals := m.valuesOf(r)
		m.mu.Unlock()
		if err := m.d.point(ctx, alerts.PointCondition{Model: name, File: path, Line: line, Values: vals}); err != nil {
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
	if base != nil && base.fit != fit {
		if df := m.driftFit(cols, verdicts, fit); df != nil {
			if err := m.d.drift(ctx, m.driftCondition(base, df, top)); err != nil {
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
func (m *modelRT) driftFit(cols map[string][]float64, verdicts []engine.Verdict, fit *engine.Fit) *engine.Fit {
	suspects := engine.Flagged(verdicts, "suspect")
	if len(suspects) == 0 {
		return fit
	}
	keep := make(map[string][]float64, len(cols))
	for c, v := range cols {
		kv := make([]float64, 0, len(v)-len(suspects))
		k := 0
		for i, x := range v {
			if k < len(suspects) && suspects[k] == i {
				k++
				continue
			}
			kv = append(kv, x)
		}
		keep[c] = kv
	}
	X, y, err := m.spec.Design(keep)
	if err != nil {
		return nil
	}
	f, err := engine.Refit(m.spec, X, y)
	if err != nil {
		return nil
	}
	return f
}

// windowRows returns the data indices the next fit uses. Caller holds mu.
func (m *modelRT) windowRows() []int {
	n := len(m.ids)
	first := 0
	switch {
	case m.cfg.Window.Rows > 0 && n > m.cfg.Window.Rows:
		first = n - m.cfg.Window.Rows
	case m.cfg.Window.Span.Duration > 0 && n > 0:
		newest := int64(math.MinInt64)
		for _, t := range m.times {
			newest = max(newest, t)
		}
		cut := newest - m.cfg.Window.Span.Nanoseconds()
		win := make([]int, 0, n)
		for i, t := range m.times {
			if t >= cut {
				win = append(win, i)
			}
		}
		return win
	}
	win := make([]int, n-first)
	for i := range win {
		win[i] = first + i
	}
	return win
}

// labelOf names the 1-based window row as "file:line".
func (m *modelRT) labelOf(win []int, row int) string {
	m.mu.Lock()
	defer m.mu.Unlock()
	if row < 1 || row > len(win) {
		return fmt.Sprintf("row %d", row)
	}
	r := win[row-1]
	return fmt.Sprintf("%s:%d", m.pathNames[m.paths[r]], m.lines[r])
}

// valuesOf returns row r's values by column name. Caller holds mu.
func (m *modelRT) valuesOf(r int) alerts.Values {
	v := alerts.Values{m.spec.Response: m.vals[0][r]}
	for j, c := range m.cols {
		v[c] = m.vals[1+j][r]
	}
	return v
}

func (m *modelRT) reportPoint(ctx context.Context, r int, sugg *alerts.Suggestion) {
	m.mu.Lock()
	path, line := m.pathNames[m.paths[r]], int(m.lines[r])
	vals := m.valuesOf(r)
	id := m.ids[r]
	m.mu.Unlock()
	o, err := m.d.store.ObservationAt(ctx, m.cfg.Name, path, line)
	if err != nil || o.ID != id || o.Arrival == nil {
		m.log.Error("suspect point: arrival diagnostics", "file", path, "line", line, "err", err)
		return
	}
	var fl []flagJSON
	_ = json.Unmarshal([]byte(o.Arrival.Flags), &fl)
	c := alerts.PointCondition{Model: m.cfg.Name, File: path, Line: line, Values: vals, Outlier: true, Influential: true, Suggestion: sugg}
	// The alert names the outlier test and the cutoffs of the family that
	// decides "influential"; the other family's flags stay with the
	// observation's stored diagnostics.
	deciding := engine.FamilyAbsolute
	if m.cut.Family == engine.SizeAdjusted {
		deciding = engine.FamilySizeAdjusted
	}
	for _, f := range fl {
		if f.Family != deciding && f.Family != engine.FamilyTest {
			continue
		}
		c.Measures = append(c.Measures, alerts.Measure{Name: f.Measure, Family: f.Family, Term: f.Term, Value: f.Value, Cutoff: f.Cutoff})
	}
	if err := m.d.point(ctx, c); err != nil {
		m.log.Error("alert", "err", err)
	}
}

func (m *modelRT) conclusions() engine.Conclusions {
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

// region returns the configured operating region, with the observed range
// for every predictor the config leaves out.
func (m *modelRT) region(cols map[string][]float64) engine.Region {
	r := engine.Region{}
	for _, c := range m.cols {
		if b, ok := m.cfg.Region[c]; ok && len(b) == 2 {
			r[c] = [2]float64{b[0], b[1]}
			continue
		}
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, v := range cols[c] {
			lo, hi = min(lo, v), max(hi, v)
		}
		r[c] = [2]float64{lo, hi}
	}
	return r
}

func (m *modelRT) fragilityJSON(win []int, f *engine.FragilityResult) map[string]any {
	out := map[string]any{"searched": f.Searched, "fragile": f.Fragile}
	if f.Index > 0 {
		out["index"] = f.Index
		var rows []string
		for _, r := range f.RemovedRows {
			rows = append(rows, m.labelOf(win, r))
		}
		out["removed"] = rows
		out["conclusion"] = f.Conclusion
		out["before"] = finite(f.Before)
		out["after"] = finite(f.After)
	} else {
		out["index"] = nil
	}
	return out
}

// makeBaseline fixes the drift baseline: a pinned one from the config, or
// the fit of the first baseline_rows rows. Caller holds mu.
func (m *modelRT) makeBaseline() *baseline {
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
	if len(m.ids) < d.BaselineRows {
		return nil
	}
	cols := map[string][]float64{m.spec.Response: m.vals[0][:d.BaselineRows]}
	for j, c := range m.cols {
		cols[c] = m.vals[1+j][:d.BaselineRows]
	}
	X, y, err := m.spec.Design(cols)
	if err != nil {
		return nil
	}
	f, err := engine.Refit(m.spec, X, y)
	if err != nil {
		return nil
	}
	b := &baseline{label: fmt.Sprintf("fit after the first %d rows", d.BaselineRows), terms: names, fit: f}
	for _, c := range f.Coef {
		b.est = append(b.est, c.Estimate)
		b.se = append(b.se, c.StdError)
	}
	return b
}

func (m *modelRT) driftCondition(b *baseline, f *engine.Fit, sugg *alerts.Suggestion) alerts.DriftCondition {
	c := alerts.DriftCondition{Model: m.cfg.Name, Baseline: b.label, Suggestion: sugg}
	for i, c0 := range f.Coef {
		if i >= len(b.est) || math.IsNaN(b.est[i]) {
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
			c.Measures = append(c.Measures, alerts.DriftMeasure{Name: name, Kind: alerts.DriftPrediction, At: alerts.Values(cp.At), Baseline: y0, Current: y1, StdError: se0})
		}
	}
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
func (m *modelRT) setState(ctx context.Context, state, reason, cause string) {
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
