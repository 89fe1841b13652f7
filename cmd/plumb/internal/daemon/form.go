package daemon

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"time"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/analysis"
	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/view"
	"plumb/engine"
	"plumb/store"
	"plumb/watcher"
	"plumb/watcher/decode"
)

// Weighted fits, group terms and the checks of the model form, in the
// daemon.
//
// Weights. The model's weighting (config "weights") names a column the
// decoder parses as a number with the others; each row's weight is taken
// at ingest. A weight that is zero, negative or not finite quarantines
// the row with file:line:column of the weight's field. The online fit
// takes each row with its weight (Online.AddWeighted); refreshes, drift
// and windowed arrivals fit through engine.Build, which weighs them.
//
// Groups. A column used only in group(...) terms is kept as text: its
// labels sit in formState.labels beside the numeric columns. A row whose
// label the model does not have yet, once the model is judging, is stored
// but not judged: its arrival verdict is WordNewLevel. The next refresh
// builds the design with the levels found in the data, adopts the larger
// model (engine.Model.WithLevels), rebuilds the online fit and says so in
// the log and in the fit's history record ("new_levels"). While the model
// is still waiting for rows, a new level extends it at once.
//
// Form. Every refresh computes the checks of the model form
// (engine.CheckForm) and reports them to the alert manager with each
// check's streak of significant refreshes (alerts.FormCondition); the
// form_lapse rule decides.

// formInRefresh switches the form checks of a refresh (a variable so that
// the benchmark can time a refresh without them).
var formInRefresh = true

// WordNewLevel is the arrival verdict of a row whose group label was not
// a level of the model when it arrived: new level, not judged. Its
// measures are undefined; the next refresh judges it.
const WordNewLevel engine.Word = "new_level"

// formState is the model's part for weights, groups and the form
// checks. The model's mutex guards it.
type formState struct {
	// groups are the columns used only in group(...) terms, decoded as
	// text after the filter and time columns; labels[g][row] is row's
	// label in groups[g].
	groups []string
	labels [][]string
	// textBase is the index of the first group column in Record.Text.
	textBase int
	// streak counts, per check, the consecutive refreshes on which it was
	// significant.
	streak map[string]int
	// newLevels are the levels first seen since the last refresh that
	// adopted levels, by column (for the log and the fit history).
	newLevels map[string][]string
}

// splitColumns returns the columns the decoder parses as numbers besides
// the response (the predictors used as numbers, then a weight column not
// among them) and the columns used only in group(...) terms.
func splitColumns(spec engine.Model) (num, groups []string) {
	for _, c := range spec.Columns() {
		if groupOnly(spec, c) {
			groups = append(groups, c)
		} else if c != spec.Response {
			num = append(num, c)
		}
	}
	if w := spec.Weight.Column; w != "" && w != spec.Response && !slices.Contains(num, w) {
		num = append(num, w)
	}
	return num, groups
}

// groupOnly reports whether column c enters m only through group(...).
func groupOnly(m engine.Model, c string) bool {
	used := false
	for _, t := range m.Terms {
		for _, f := range t.Factors {
			if f.Column == c {
				if !f.Group {
					return false
				}
				used = true
			}
		}
	}
	return used
}

// specFor is the model's spec as configured: terms and weighting.
func specFor(mc config.Model) (engine.Model, error) {
	spec, err := engine.NewModel(mc.Response, mc.Terms, *mc.Intercept)
	if err != nil {
		return engine.Model{}, err
	}
	if spec.Weight, err = mc.Weighting(); err != nil {
		return engine.Model{}, fmt.Errorf("weights: %w", err)
	}
	return spec, nil
}

// grouped reports whether the model has group terms.
func (m *watchedModel) grouped() bool { return len(m.form.groups) > 0 }

// value returns the named numeric column of the design values v
// (response first, then m.cols).
func (m *watchedModel) value(v []float64) func(string) float64 {
	return func(col string) float64 {
		if col == m.spec.Response {
			return v[0]
		}
		for j, c := range m.cols {
			if c == col {
				return v[1+j]
			}
		}
		return math.NaN()
	}
}

// label returns the named group column's label among lab (in
// m.form.groups order).
func (m *watchedModel) label(lab []string) func(string) string {
	return func(col string) string {
		for g, c := range m.form.groups {
			if c == col {
				return lab[g]
			}
		}
		return ""
	}
}

// rowWeight is the weight of the row with design values v (1 when the
// model is unweighted).
func (m *watchedModel) rowWeight(v []float64) (float64, error) {
	if !m.spec.Weight.Weighted() {
		return 1, nil // no closure to allocate on the unweighted path
	}
	return m.spec.Weight.RowWeight(m.value(v))
}

// labelsOf returns the record's group labels (nil for a model without
// groups).
func (m *watchedModel) labelsOf(rec decode.Record) []string {
	if !m.grouped() {
		return nil
	}
	return slices.Clone(rec.Text[m.form.textBase : m.form.textBase+len(m.form.groups)])
}

// missingLabel reports whether a group label of the record is one of the
// configured missing-value tokens (spaces and tabs around it ignored): the
// row is left out and counted, as one with such a number cell is, rather
// than given a level.
func (m *watchedModel) missingLabel(rec decode.Record) bool {
	if !m.grouped() || len(m.cfg.Missing) == 0 {
		return false
	}
	for _, v := range rec.Text[m.form.textBase : m.form.textBase+len(m.form.groups)] {
		if slices.Contains(m.cfg.Missing, strings.Trim(v, " \t")) {
			return true
		}
	}
	return false
}

// fieldColumn returns the 1-based byte column of the named field in the
// record's raw text (0 when the header does not have it).
func fieldColumn(raw string, header []string, name string, delim byte) int {
	k := slices.Index(header, name)
	if k < 0 {
		return 0
	}
	field, inQuote := 0, false
	if k == 0 {
		return 1
	}
	for i := 0; i < len(raw); i++ {
		switch c := raw[i]; {
		case c == '"':
			inQuote = !inQuote
		case c == delim && !inQuote:
			field++
			if field == k {
				return i + 2
			}
		}
	}
	return 0
}

// weightQuarantine is the quarantined row for a bad weight.
func (m *watchedModel) weightQuarantine(b watcher.Batch, rec decode.Record, v []float64, now time.Time) store.QuarantineRow {
	w := m.spec.Weight
	col := fieldColumn(rec.Raw, b.Header, w.Column, m.cfg.Delimiter[0])
	x := m.value(v)(w.Column)
	what := fmt.Sprintf("weight %v", x)
	if w.Power > 0 {
		what = fmt.Sprintf("weight %s at %s = %v", w, w.Column, x)
	}
	q := quarantineRow(m.cfg.Name, b, rec, now, fmt.Sprintf("%s:%d:%d: column %q: %s: a weight must be a positive finite number",
		b.Path, rec.Line, col, w.Column, what))
	q.Column, q.ColumnName = col, w.Column
	if k := slices.Index(b.Header, w.Column); k >= 0 {
		q.Field = k + 1
	}
	return q
}

// newLevelDiagnostics is the arrival record of a row with a new group
// level: not judged, every measure undefined.
func newLevelDiagnostics() *store.Diagnostics {
	nan := math.NaN()
	return &store.Diagnostics{Leverage: nan, Residual: nan, StudentizedInternal: nan, StudentizedExternal: nan,
		CooksDistance: nan, DFFITS: nan, COVRATIO: nan, OutlierPBonferroni: nan, Verdict: WordNewLevel}
}

// noteLevels records the levels of lab the model lacks; it reports
// whether there were any. Caller holds mu.
func (m *watchedModel) noteLevels(lab []string) bool {
	found := false
	for g, col := range m.form.groups {
		if !slices.Contains(m.spec.Levels[col], lab[g]) {
			found = true
			if m.form.newLevels == nil {
				m.form.newLevels = map[string][]string{}
			}
			if !slices.Contains(m.form.newLevels[col], lab[g]) {
				m.form.newLevels[col] = append(m.form.newLevels[col], lab[g])
			}
		}
	}
	return found
}

// extendLevels gives the model the levels of lab it lacks and rebuilds
// the online fit from every row held. Caller holds mu.
func (m *watchedModel) extendLevels(lab []string) {
	spec := m.spec
	for g, col := range m.form.groups {
		if !slices.Contains(spec.Levels[col], lab[g]) {
			spec = spec.WithLevels(col, lab[g])
		}
	}
	m.adopt(spec)
}

// adopt makes spec (the model with more group levels) the model's and
// rebuilds the online fit from the rows held, less those set aside.
// Caller holds mu.
func (m *watchedModel) adopt(spec engine.Model) {
	m.spec = spec
	m.online = engine.NewOnline(spec.P())
	m.xrow = make([]float64, spec.P())
	m.arrive = engine.NewArrivalJudge(spec, m.cut) // judges rows of p coefficients
	v := make([]float64, len(m.rows.vals))
	lab := make([]string, len(m.form.groups))
	for r := range m.rows.ids {
		if m.ref.excludedRow(r) {
			continue // set aside by a recorded decision
		}
		for j := range v {
			v[j] = m.rows.vals[j][r]
		}
		for g := range lab {
			lab[g] = m.form.labels[g][r]
		}
		if m.designRow(v, lab) != nil {
			continue
		}
		w, err := m.rowWeight(v)
		if err != nil {
			continue
		}
		m.online.AddWeighted(m.xrow, v[0], w)
	}
}

// appendLabels stores a row's group labels. Caller holds mu.
func (m *watchedModel) appendLabels(lab []string) {
	for g := range m.form.groups {
		m.form.labels[g] = append(m.form.labels[g], lab[g])
	}
}

// copyLabels copies the given rows' group labels by column (nil for a
// model without groups). Caller holds mu.
func (m *watchedModel) copyLabels(rows []int) map[string][]string {
	if !m.grouped() {
		return nil
	}
	out := make(map[string][]string, len(m.form.groups))
	for g, c := range m.form.groups {
		v := make([]string, len(rows))
		for i, r := range rows {
			v[i] = m.form.labels[g][r]
		}
		out[c] = v
	}
	return out
}

// fitData fits the model (with its weights and groups) on the columns.
func (m *watchedModel) fitData(spec engine.Model, num map[string][]float64, text map[string][]string) (*engine.Fit, error) {
	ds, err := spec.Build(engine.Data{Num: num, Text: text})
	if err != nil {
		return nil, err
	}
	return ds.Fit()
}

// restoreLabels reads the group labels of stored rows from their raw text,
// with the header of the file each came from. Caller holds mu.
type labelReader struct {
	m    *watchedModel
	hdr  map[string][]string
	decs map[string]*decode.Decoder
}

func (m *watchedModel) labelReader(ctx context.Context, s store.Store) (*labelReader, error) {
	lr := &labelReader{m: m, hdr: map[string][]string{}, decs: map[string]*decode.Decoder{}}
	if !m.grouped() {
		return lr, nil
	}
	srcs, err := s.Sources(ctx, m.cfg.Name)
	if err != nil {
		return nil, err
	}
	for _, src := range srcs {
		if src.Header != "" {
			lr.hdr[src.Path] = strings.Split(src.Header, "\x1f")
		}
	}
	return lr, nil
}

// labels returns the group labels of a stored observation, or false when
// they cannot be read again.
func (lr *labelReader) labels(o store.Observation) ([]string, bool) {
	m := lr.m
	if !m.grouped() {
		return nil, true
	}
	dec, ok := lr.decs[o.Path]
	if !ok {
		h, ok := lr.hdr[o.Path]
		if !ok {
			return nil, false
		}
		dec = decode.NewDecoder(o.Path, decode.Dialect{Delimiter: m.cfg.Delimiter[0], DecimalComma: m.cfg.DecimalComma, Missing: m.cfg.Missing})
		if dec.SetHeader(h, 1) != nil || dec.Select(m.numeric(), m.text()) != nil {
			return nil, false
		}
		lr.decs[o.Path] = dec
	}
	var out []string
	_, err := dec.Feed([]byte(o.Raw+"\n"), true, func(r decode.Record) error {
		if r.Err == nil && len(r.Text) >= m.form.textBase+len(m.form.groups) {
			out = m.labelsOf(r)
		}
		return nil
	})
	return out, err == nil && out != nil
}

// afterRefresh adopts the group levels the refresh found, logs them, and
// returns the fit history's notes on the form: weights, new levels, the
// checks and the poolability.
func (r *refresher) afterRefresh(res *analysis.Result, detail map[string]any) {
	m := r.m
	if w := res.Model.Weight.String(); w != "" {
		detail["weights"] = w
	}
	if fc := view.FormOf(res.Form); fc != nil {
		detail["form"] = fc
	}
	if p := view.PoolOf(res.Pool); p != nil {
		detail["poolability"] = p
	}
	if !m.grouped() {
		return
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	added := map[string][]string{}
	for _, col := range m.form.groups {
		for _, l := range res.Model.Levels[col] {
			if !slices.Contains(m.spec.Levels[col], l) {
				added[col] = append(added[col], l)
			}
		}
	}
	for col, ls := range m.form.newLevels {
		for _, l := range ls {
			if slices.Contains(res.Model.Levels[col], l) && !slices.Contains(added[col], l) {
				added[col] = append(added[col], l)
			}
		}
	}
	m.form.newLevels = nil
	if len(added) == 0 {
		return
	}
	spec := m.spec
	for col := range added {
		spec = spec.WithLevels(col, res.Model.Levels[col]...)
	}
	m.adopt(spec)
	detail["new_levels"] = added
	m.log.Info("group gains levels; the model now has a coefficient for each", "levels", fmtLevels(added), "coefficients", spec.P())
}

func fmtLevels(a map[string][]string) string {
	var parts []string
	for col, ls := range a {
		for _, l := range ls {
			parts = append(parts, col+"="+l)
		}
	}
	slices.Sort(parts)
	return strings.Join(parts, ", ")
}

// reportForm reports the refresh's checks of the model form to the alert
// manager, with each check's streak of significant refreshes.
func (r *refresher) reportForm(ctx context.Context, res *analysis.Result) {
	m := r.m
	if res.Form == nil {
		return
	}
	level := m.cfg.Alerts.FormLapse.Level
	fc := view.FormOf(res.Form)
	m.mu.Lock()
	if m.form.streak == nil {
		m.form.streak = map[string]int{}
	}
	c := alerts.FormCondition{Model: m.cfg.Name, Weights: res.Model.Weight.String()}
	for _, f := range fc.Findings(level) {
		k := alerts.FormCheck{Check: f.Check, Statistic: f.Statistic, P: f.P, Significant: f.Significant, Next: f.Next}
		switch f.Check {
		case view.FormLackOfFit:
			k.DF = []int{fc.LackOfFit.LackOfFitDF, fc.LackOfFit.PureErrorDF}
		case view.FormBreuschPagan:
			k.DF = []int{fc.BreuschPagan.DF}
		}
		if f.Significant {
			m.form.streak[f.Check]++
		} else {
			m.form.streak[f.Check] = 0
		}
		k.Streak = m.form.streak[f.Check]
		c.Checks = append(c.Checks, k)
	}
	m.mu.Unlock()
	if err := m.d.formLapse(ctx, c); err != nil {
		m.log.Error("alert", "err", err)
	}
}

func (d *Daemon) formLapse(ctx context.Context, c alerts.FormCondition) error {
	return report(d, ctx, c, d.alerts.Form)
}

// formRule is the model's form_lapse rule for the alert manager.
func formRule(mc config.Model) alerts.FormRule {
	f := mc.Alerts.FormLapse
	return alerts.FormRule{Rule: alerts.Rule{Enabled: *f.Enabled, Severity: alerts.Severity(f.Severity), Renotify: mc.Alerts.Renotify.Duration},
		Level: f.Level, Refreshes: f.Refreshes}
}

// fitSpec is the model the fits of a window use: for a windowed model
// with groups, without levels, so that the design holds the levels of the
// rows in the window only (a level that has left the window would give
// an indicator column of zeros); otherwise the model itself.
func (m *watchedModel) fitSpec() engine.Model {
	if !m.grouped() || !m.windowed() {
		return m.spec
	}
	s := m.spec
	s.Levels = nil
	return s
}

// predictors lists the columns the model uses as numeric predictors (the
// charts' axes): not a weight column only weighing, nor a group column.
func (m *watchedModel) predictors() []string {
	var out []string
	for _, c := range m.spec.Columns() {
		if !groupOnly(m.spec, c) {
			out = append(out, c)
		}
	}
	return out
}

// canSuggest reports whether the engine can propose where to measure:
// not for group terms (a level is not a point of a region), nor for a
// column of weights (the weight of a reading not yet taken is unknown);
// a variance function inverse(x^k) gives it. Asking anyway would log the
// same refusal at every refresh.
func (m *watchedModel) canSuggest() bool {
	w := m.spec.Weight
	return !m.grouped() && (!w.Weighted() || w.Power > 0)
}

// groupHint is the suggestion added to a row refused because a column
// the model uses as a plain term holds text: write group(column) if its
// values are labels. "" for other errors.
func (m *watchedModel) groupHint(e *decode.RowError) string {
	if !errors.Is(e.Err, decode.ErrNotNumber) || !slices.Contains(m.cols, e.Name) || e.Name == m.spec.Weight.Column {
		return ""
	}
	return fmt.Sprintf("; if the column holds labels, write group(%s) in the model's terms", engine.Weighting{Column: e.Name})
}

// movedByReference returns the names of cur's coefficients whose meaning
// depends on the reference level (the first in byte order) of a group
// column whose reference differs in base: the intercept, the
// coefficients of every term with that group, and the terms whose slope
// such a term adjusts (months for months*group(batch)). A drift check
// compares those with the baseline no more: they no longer measure the
// same thing. Empty when no reference moved.
func movedByReference(base, cur engine.Model) map[string]bool {
	changed := map[string]bool{}
	for col, lv := range cur.Levels {
		if bl := base.Levels[col]; len(lv) > 0 && len(bl) > 0 && bl[0] != lv[0] {
			changed[col] = true
		}
	}
	if len(changed) == 0 {
		return nil
	}
	moved := map[string]bool{"intercept": true}
	key := func(t engine.Term) string {
		var fs []string
		for _, f := range t.Factors {
			if !f.Group {
				fs = append(fs, f.Text)
			}
		}
		slices.Sort(fs)
		return strings.Join(fs, "*")
	}
	adjusted := map[string]bool{}
	for _, t := range cur.Terms {
		for _, f := range t.Factors {
			if f.Group && changed[f.Column] {
				adjusted[key(t)] = true
			}
		}
	}
	names := cur.Names()
	for _, n := range names {
		for col := range changed {
			if strings.Contains(n, col+"=") {
				moved[n] = true
			}
		}
	}
	for _, t := range cur.Terms {
		if !t.HasGroup() && adjusted[key(t)] {
			moved[t.Text] = true
		}
	}
	return moved
}
