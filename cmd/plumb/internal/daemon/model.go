package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"slices"
	"strings"
	"sync"
	"time"

	"plumb/cmd/plumb/internal/config"
	"plumb/engine"
	"plumb/store"
	"plumb/watcher"
	"plumb/watcher/decode"
)

// Model states, as status and the dashboard show them.
const (
	stateWaiting = "waiting" // fewer rows than min_rows
	stateJudging = "judging"
	stateBlocked = "blocked"
)

// watchedModel is one model the daemon watches: its spec and state, its
// rows in memory (columns), the online fit that judges each arriving row
// (ingest, this file), and its refresh loop (refresher, refresh.go).
//
// mu guards everything below it, the columns and the refresher included. Ingest (watcher goroutine) and refresh
// (refresh goroutine) take it; view readers take it briefly to copy.
type watchedModel struct {
	d    *Daemon
	cfg  config.Model
	spec engine.Model
	// cols are the model's numeric columns besides the response: the
	// predictors used as numbers, in spec.Columns() order, then a weight
	// column not among them (form.go); the decoder's numeric selection is
	// the response, then cols.
	cols    []string
	cut     engine.Cutoffs
	minRows int
	log     *slog.Logger

	mu     sync.Mutex
	state  string
	reason string
	cause  string
	// header holds the blocked reason for a file whose header changed.
	headerBlocked map[string]string
	// refused holds the reason for each file refused alone (fileblock.go).
	refused map[string]string

	// rows are the model's rows in memory, in arrival order.
	rows *columns

	online *engine.Online
	xrow   []float64
	// arrive judges each arriving row (Bonferroni outlier test).
	arrive *engine.ArrivalJudge

	rowsAccepted int64
	quarantined  int64
	missing      int64 // rows left out for a missing value (the sources' counts)
	lastArrival  time.Time

	// ref is the refresh loop's side: what the next refresh must do and
	// what the latest one found.
	ref refresher

	// form holds the group labels and the form checks' streaks (form.go).
	form formState
}

// suspect is a row judged suspect at arrival, with the cutoffs it crossed
// then: the alert is built from these, as the pipeline judged the row.
type suspect struct {
	row   int // data index
	flags []engine.Flag
}

// baseline is the fit that drift is measured against.
type baseline struct {
	label string
	terms []string
	est   []float64
	se    []float64
	fit   *engine.Fit // nil for a pinned baseline
}

func newWatchedModel(d *Daemon, mc config.Model) (*watchedModel, error) {
	spec, err := specFor(mc)
	if err != nil {
		return nil, fmt.Errorf("model %q: %w", mc.Name, err)
	}
	if err := CheckCalibration(spec, mc); err != nil {
		return nil, fmt.Errorf("model %q: %w", mc.Name, err)
	}
	num, groups := splitColumns(spec)
	m := &watchedModel{
		d:             d,
		cfg:           mc,
		spec:          spec,
		cols:          num,
		cut:           cutoffsFor(mc.Judge),
		minRows:       mc.MinRowsFor(spec.P()),
		log:           d.log.With("model", mc.Name),
		state:         stateWaiting,
		headerBlocked: map[string]string{},
		rows:          newColumns(1+len(num), mc.IDColumn != ""),
		online:        engine.NewOnline(spec.P()),
		xrow:          make([]float64, spec.P()),
	}
	m.arrive = engine.NewArrivalJudge(spec, m.cut)
	m.ref.m = m
	m.form.groups = groups
	m.form.labels = make([][]string, len(groups))
	m.form.textBase = len(m.text()) - len(groups)
	if mc.MinRows > 0 && m.minRows > mc.MinRows {
		m.log.Warn("min_rows raised to what the model needs", "min_rows", mc.MinRows, "coefficients", spec.P(), "waits_for", m.minRows)
	}
	return m, nil
}

func cutoffsFor(j config.Judge) engine.Cutoffs { return j.Engine() }

// numeric returns the columns the decoder parses as numbers: the response,
// then the predictors.
func (m *watchedModel) numeric() []string {
	return append([]string{m.spec.Response}, m.cols...)
}

// text returns the columns the decoder keeps as text: the filter column,
// the time column and the id column, in that order, when configured (a
// column named twice is read once).
func (m *watchedModel) text() []string {
	var t []string
	if m.cfg.Filter != nil {
		t = append(t, m.cfg.Filter.Column)
	}
	if m.cfg.TimeColumn != "" && !slices.Contains(t, m.cfg.TimeColumn) {
		t = append(t, m.cfg.TimeColumn)
	}
	if m.cfg.IDColumn != "" && !slices.Contains(t, m.cfg.IDColumn) {
		t = append(t, m.cfg.IDColumn)
	}
	return append(t, m.form.groups...)
}

// textIndex is the place of column c in text(), or -1.
func (m *watchedModel) textIndex(c string) int {
	if c == "" {
		return -1
	}
	return slices.Index(m.text(), c)
}

// designRow builds the design row of the values v (response first) and
// the group labels lab (in form.groups order) into m.xrow.
func (m *watchedModel) designRow(v []float64, lab []string) error {
	if !m.grouped() {
		return m.spec.DesignRow(m.xrow, m.value(v))
	}
	return m.spec.DesignRowData(m.xrow, m.value(v), m.label(lab))
}

// restore loads the model's rows from the store and rebuilds the online
// fit, so a restart resumes where the last run stopped.
func (m *watchedModel) restore(ctx context.Context, s store.Store) error {
	cur, err := s.CurrentVerdicts(ctx, m.cfg.Name)
	if err != nil {
		return err
	}
	var after int64
	const page = 50000
	m.mu.Lock()
	defer m.mu.Unlock()
	lr, err := m.labelReader(ctx, s)
	if err != nil {
		return err
	}
	for {
		obs, err := s.Observations(ctx, m.cfg.Name, store.ObsQuery{AfterID: after, Limit: page})
		if err != nil {
			return err
		}
		for _, o := range obs {
			if len(o.Values) != len(m.rows.vals) {
				// The model's columns changed since these rows were stored:
				// they belong to the old definition and stay in the history.
				after = o.ID
				continue
			}
			lab, ok := lr.labels(o)
			if !ok {
				after = o.ID
				continue
			}
			w, err := m.rowWeight(o.Values)
			if err != nil {
				after = o.ID
				continue
			}
			if m.grouped() {
				// The levels are known once every row is read: the
				// online fit is built after the loop.
				m.noteLevels(lab)
			} else {
				if err := m.designRow(o.Values, nil); err != nil {
					after = o.ID
					continue
				}
				m.online.AddWeighted(m.xrow, o.Values[0], w)
			}
			var arr engine.Word
			if o.Arrival != nil {
				arr = o.Arrival.Verdict
			}
			now := arr
			if v, ok := cur[o.ID]; ok {
				now = v
			}
			var t int64
			if !o.Time.IsZero() {
				t = o.Time.UnixNano()
			}
			m.appendRow(o.ID, o.Path, o.Line, o.Label, t, o.ArrivedAt.UnixNano(), o.Values, lab, arr, now)
			after = o.ID
			if o.ArrivedAt.After(m.lastArrival) {
				m.lastArrival = o.ArrivedAt
			}
		}
		if len(obs) < page {
			break
		}
	}
	if m.grouped() && len(m.form.newLevels) > 0 {
		spec := m.spec
		for col, ls := range m.form.newLevels {
			spec = spec.WithLevels(col, ls...)
		}
		m.form.newLevels = nil
		m.adopt(spec)
	}
	q, err := s.CountQuarantined(ctx, m.cfg.Name)
	if err != nil {
		return err
	}
	m.quarantined = q
	srcs, err := s.Sources(ctx, m.cfg.Name)
	if err != nil {
		return err
	}
	m.missing = 0
	for _, src := range srcs {
		m.missing += src.Missing
	}
	// Count the fits and find the last one without reading the history.
	if m.ref.fits, err = s.CountFits(ctx, m.cfg.Name); err != nil {
		return err
	}
	if last, err := s.LastFit(ctx, m.cfg.Name); err == nil {
		m.ref.fitID = last.ID
	} else if !errors.Is(err, store.ErrNotFound) {
		return err
	}
	m.ref.dirty = len(m.rows.ids) > 0
	return nil
}

func (m *watchedModel) appendRow(id int64, path string, line int, label string, t, arrived int64, v []float64, lab []string, arrival, current engine.Word) {
	m.rows.add(id, path, line, label, t, arrived, v, arrival, current)
	m.appendLabels(lab)
	m.rowsAccepted++
}

// pending is one decoded row on its way into the store.
type pending struct {
	rec   decode.Record
	vals  []float64
	lab   []string
	w     float64
	t     int64
	label string // the id column's text
	diag  *store.Diagnostics
}

// arrivals holds the judgements of one batch's rows in blocks allocated
// once per batch (not per row): the stored diagnostics, their DFBETAS and
// their flags. A batch's blocks are never reused, since the store and the
// pending suspects may keep what points into them.
type arrivals struct {
	diags []store.Diagnostics
	dfb   []float64
	flags []engine.Flag
}

func newArrivals(rows, p int) *arrivals {
	return &arrivals{diags: make([]store.Diagnostics, 0, rows), dfb: make([]float64, 0, rows*p)}
}

// add judges one row with the model's arrival judge and returns its stored
// diagnostics.
func (a *arrivals) add(j *engine.ArrivalJudge, o engine.Obs, dfb []float64, n int) *store.Diagnostics {
	var v engine.Verdict
	v, a.flags = j.Judge(a.flags, o, dfb, n)
	start := len(a.dfb)
	a.dfb = append(a.dfb, dfb...)
	a.diags = append(a.diags, store.Diagnostics{
		Leverage: o.Leverage, Residual: o.Residual,
		StudentizedInternal: o.StudentInternal, StudentizedExternal: o.StudentExternal,
		CooksDistance: o.Cook, DFFITS: o.DFFITS, DFBETAS: a.dfb[start:len(a.dfb):len(a.dfb)],
		COVRATIO: o.COVRATIO, OutlierPBonferroni: o.BonferroniP,
		Verdict: v.Word(), Flags: v.Flags,
	})
	return &a.diags[len(a.diags)-1]
}

// ingest turns one watcher batch into observations and quarantined rows,
// judges each new row against the online fit that includes it, and commits
// rows and read position in one transaction.
func (m *watchedModel) ingest(ctx context.Context, b watcher.Batch) error {
	m.mu.Lock()
	defer m.mu.Unlock()
	now := m.d.now()
	var quar []store.QuarantineRow
	rows := make([]pending, 0, len(b.Records))
	// diags is sized for every record, so the pointers it hands out stay
	// valid (append never moves it).
	judged := newArrivals(len(b.Records), m.spec.P())
	var filter map[string]bool
	if m.cfg.Filter != nil {
		filter = make(map[string]bool, len(m.cfg.Filter.Values))
		for _, v := range m.cfg.Filter.Values {
			filter[v] = true
		}
	}
	mark := m.online.Snapshot()
	missing := 0
	fi, ti, idi := -1, m.textIndex(m.cfg.TimeColumn), m.textIndex(m.cfg.IDColumn)
	if filter != nil {
		fi = m.textIndex(m.cfg.Filter.Column)
	}
	for _, rec := range b.Records {
		if rec.Err != nil {
			q := quarantineRow(m.cfg.Name, b, rec, now, rec.Err.Error()+m.groupHint(rec.Err))
			q.Column, q.ColumnName, q.Field = rec.Err.Column, rec.Err.Name, rec.Err.Field
			quar = append(quar, q)
			continue
		}
		if filter != nil && !filter[strings.TrimSpace(rec.Text[fi])] {
			continue // deliberately excluded by the model's filter
		}
		if rec.Missing != nil {
			// A missing value (config "missing") in a column the model
			// uses: the row is left out of the fit and counted, not
			// quarantined.
			missing++
			continue
		}
		if m.missingLabel(rec) {
			missing++ // a group label that means "no value", likewise
			continue
		}
		var t int64
		if m.cfg.TimeColumn != "" {
			layout := m.cfg.TimeLayout
			if layout == "" {
				layout = time.RFC3339Nano
			}
			tt, err := time.Parse(layout, strings.TrimSpace(rec.Text[ti]))
			if err != nil {
				at, why := m.cellError(b, rec, m.cfg.TimeColumn, fmt.Sprintf("not a time in layout %q: %q", layout, rec.Text[ti]))
				quar = append(quar, at.row(quarantineRow(m.cfg.Name, b, rec, now, why)))
				continue
			}
			t = tt.UnixNano()
		}
		lab := m.labelsOf(rec)
		var label string
		if idi >= 0 {
			label = strings.TrimSpace(rec.Text[idi])
		}
		w, err := m.rowWeight(rec.Values)
		if err != nil {
			quar = append(quar, m.weightQuarantine(b, rec, rec.Values, now))
			continue
		}
		if m.grouped() && m.noteLevels(lab) {
			if m.online.N() >= m.minRows && m.ref.res != nil {
				// Judging: the model extends at the next refresh; the row
				// is kept but not judged against a model without its level.
				m.log.Info("new group level; the model extends at the next refresh", "file", b.Path, "line", rec.Line, "levels", fmtLevels(m.form.newLevels))
				rows = append(rows, pending{rec: rec, vals: rec.Values, lab: lab, w: w, t: t, label: label, diag: newLevelDiagnostics()})
				continue
			}
			m.extendLevels(lab) // nothing judged yet: extend now
			m.log.Info("new group level", "file", b.Path, "line", rec.Line, "levels", fmtLevels(m.form.newLevels))
		}
		if err := m.designRow(rec.Values, lab); err != nil {
			at, why := m.designError(b, rec, err)
			quar = append(quar, at.row(quarantineRow(m.cfg.Name, b, rec, now, why)))
			continue
		}
		p := pending{rec: rec, vals: rec.Values, lab: lab, w: w, t: t, label: label}
		o, ok := m.online.AddWeighted(m.xrow, rec.Values[0], w)
		dfb := m.online.DFBETAS()
		n := m.online.N()
		if m.windowed() {
			o, dfb, n, ok = m.windowArrival(rows, p)
		}
		if ok && n >= m.minRows {
			p.diag = judged.add(m.arrive, o, dfb, n)
		}
		rows = append(rows, p)
	}
	obs := make([]store.Observation, 0, len(rows))
	for _, p := range rows {
		o := store.Observation{
			Model: m.cfg.Name, Path: b.Path, Generation: b.Generation, Line: p.rec.Line,
			Raw: p.rec.Raw, Label: p.label, Values: p.vals, ArrivedAt: now, Arrival: p.diag,
		}
		if p.t != 0 {
			o.Time = time.Unix(0, p.t).UTC()
		}
		obs = append(obs, o)
	}
	src := sourceOf(m.cfg.Name, b)
	src.Rows = int64(len(obs))
	src.Quarantined = int64(len(quar))
	ids, err := m.d.store.Ingest(ctx, store.Batch{Source: src, Observations: obs, Quarantine: quar, Missing: int64(missing)})
	if err != nil {
		m.online.Restore(mark)
		if errors.Is(err, store.ErrStale) {
			// Already committed by an earlier delivery: nothing to add.
			return nil
		}
		return err
	}
	for i, p := range rows {
		var arr engine.Word
		if p.diag != nil {
			arr = p.diag.Verdict
		}
		m.appendRow(ids[i], b.Path, p.rec.Line, p.label, p.t, now.UnixNano(), p.vals, p.lab, arr, arr)
		if arr == engine.WordSuspect {
			m.ref.pendingSuspects = append(m.ref.pendingSuspects, suspect{row: len(m.rows.ids) - 1, flags: p.diag.Flags})
		}
	}
	m.quarantined += int64(len(quar))
	if missing > 0 {
		m.missing += int64(missing)
		m.log.Info("rows with a missing value left out", "file", b.Path, "count", missing)
	}
	if _, ok := m.headerBlocked[b.Path]; ok && len(b.Records) > 0 {
		// The file is read again: its header matches the columns once more.
		delete(m.headerBlocked, b.Path)
		m.ref.dirty = true
	}
	if len(rows) > 0 {
		m.lastArrival = now
		m.ref.dirty = true
	}
	m.d.metrics.rows(m.cfg.Name, len(rows), len(quar))
	if len(quar) > 0 {
		m.log.Warn("rows quarantined", "file", b.Path, "count", len(quar), "first", quar[0].Reason)
	}
	return nil
}

// quarantineRow keeps rec aside: where it is, its text, the reason, and
// when it arrived.
func quarantineRow(model string, b watcher.Batch, rec decode.Record, at time.Time, reason string) store.QuarantineRow {
	return store.QuarantineRow{
		Model: model, Path: b.Path, Generation: b.Generation, Line: rec.Line,
		Raw: rec.Raw, Reason: reason, At: at,
	}
}

// windowed reports whether the model fits a window of its rows rather
// than all of them.
func (m *watchedModel) windowed() bool {
	return m.cfg.Window.Rows > 0 || m.cfg.Window.Span.Duration > 0
}

// windowArrival judges a new row of a windowed model against the fit of
// the window that includes it: the stored rows, the batch's earlier rows
// and this one, cut to the window. The online fit covers all rows, so a
// windowed model refits its window per arriving row (O(w p²) for a window
// of w rows). Caller holds mu.
func (m *watchedModel) windowArrival(batch []pending, p pending) (engine.Obs, []float64, int, bool) {
	type row struct {
		vals []float64
		lab  []string
		t    int64
	}
	all := make([]row, 0, len(batch)+1)
	for _, b := range batch {
		if b.diag != nil && b.diag.Verdict == WordNewLevel {
			continue // not in the fit until the model has its level
		}
		all = append(all, row{b.vals, b.lab, b.t})
	}
	all = append(all, row{p.vals, p.lab, p.t})
	var stored []int
	switch {
	case m.cfg.Window.Rows > 0:
		need := m.cfg.Window.Rows - len(all)
		if need < 0 {
			all = all[-need:]
			need = 0
		}
		for i := max(0, len(m.rows.ids)-need); i < len(m.rows.ids); i++ {
			stored = append(stored, i)
		}
	default:
		cut := p.t - m.cfg.Window.Span.Nanoseconds()
		for i, t := range m.rows.times {
			if t >= cut {
				stored = append(stored, i)
			}
		}
		k := 0
		for _, r := range all {
			if r.t >= cut {
				all[k] = r
				k++
			}
		}
		all = all[:k]
	}
	// Readings set aside are not in the window's fit (as at refresh).
	stored = m.ref.keepIncluded(stored)
	n := len(stored) + len(all)
	if n <= m.spec.P()+1 {
		return engine.Obs{}, nil, n, false
	}
	cols := make(map[string][]float64, len(m.rows.vals))
	names := m.numeric()
	for j, c := range names {
		v := make([]float64, 0, n)
		for _, i := range stored {
			v = append(v, m.rows.vals[j][i])
		}
		for _, r := range all {
			v = append(v, r.vals[j])
		}
		cols[c] = v
	}
	text := m.copyLabels(stored)
	for g, c := range m.form.groups {
		for _, r := range all {
			text[c] = append(text[c], r.lab[g])
		}
	}
	f, err := m.fitData(m.fitSpec(), cols, text)
	if err != nil {
		return engine.Obs{}, nil, n, false
	}
	inf := engine.Diagnose(f)
	return inf.Rows[n-1], inf.DFBETASRow(n - 1), n, true
}
