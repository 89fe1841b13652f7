// Package transfer copies a plumb history from one store to another, for
// instance from a line's SQLite file into the PostgreSQL database a fleet
// of daemons shares:
//
//	from, _ := sqlite.Open(ctx, "plumb.db")
//	to, _ := postgres.Open(ctx, "postgres://plumb@db.example/plumb")
//	rep, err := transfer.Copy(ctx, from, to, transfer.Options{})
//
// Copy writes through the store.Store interface only, so every invariant
// of the target holds (rows and read positions in one transaction, each
// row once). It is idempotent: a second run copies nothing and verifies
// the counts again; a run that was interrupted continues where it
// stopped. The daemons of the copied models must be stopped while it
// runs (neither store may change underneath it).
//
// What is copied, per model: every observation with its provenance (file,
// generation, line, the line's text), values and arrival diagnostics;
// every quarantined row; each file's read state (so a daemon pointed at
// the target resumes where the source's stopped); every fit in order with
// the verdict changes it caused; the model's state. Then every alert with
// its outbox entries and their delivery state. Observation and fit ids
// are the target's own: a fit's LastObsID and a verdict change's
// observation are mapped to the copied observations' ids. Ids quoted
// inside a fit's Detail document are copied as they are.
//
// Last, the decisions people recorded (readings set aside and
// reinstated, re-baselines, quiet periods) and the audit trail, when the
// source keeps them: the trail is copied verbatim, every record with its
// sequence number, previous hash and hash, its text byte for byte, so
// that store.VerifyAudit gives the same answer on the target (same
// records, same head) as on the source. Decisions, re-baselines and
// quiet periods keep their ids; a decision's observation is mapped to the
// copied observation's id in the table only (the audit record's JSON still
// names the source's id, since the hash covers it). A target that already
// holds a different trail (records of its own, or another history's) is
// refused before anything is copied, and so is a target that cannot keep
// a trail: a history's decisions are never silently left behind. A
// target holding the start of the source's trail (an earlier copy) gets
// the rest.
package transfer

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"sort"
	"strings"

	"plumb/store"
)

// ModelLister is implemented by stores that can list every model they
// hold (both of plumb's backends do). Copy needs it of the source.
type ModelLister interface {
	Models(ctx context.Context) ([]string, error)
}

// ChangeLister is implemented by stores that can list all verdict changes
// of a model in one query. Without it Copy asks for each observation's
// changes in turn.
type ChangeLister interface {
	ModelVerdictChanges(ctx context.Context, model string) ([]store.VerdictChange, error)
}

// DecisionCopier is implemented by stores that keep decisions and an
// audit trail and can hand them over whole (both of plumb's backends do):
// Copy reads the source's with ExportDecisions and writes them into the
// target with ImportDecisions, which appends the records verbatim and
// refuses (store.ErrConflict) a target whose trail is not a start of the
// source's.
type DecisionCopier interface {
	store.AuditSource
	ExportDecisions(ctx context.Context) (store.DecisionHistory, error)
	ImportDecisions(ctx context.Context, h store.DecisionHistory) (store.ImportPlan, error)
}

// Options tunes Copy.
type Options struct {
	// BatchRows is the number of observations per Ingest (default 5000).
	BatchRows int
	// Progress, when set, is called after each model with its counts.
	Progress func(ModelCount)
}

// ModelCount is what Copy found of one model in the source, wrote, and
// then verified in the target.
type ModelCount struct {
	Model          string
	Observations   int64 // in the source, equal in the target
	Quarantined    int64
	Fits           int64
	VerdictChanges int64
	// Copied counts what this run wrote (0 on a repeated run).
	CopiedObservations, CopiedQuarantined, CopiedFits int64
}

// Report is the outcome of Copy: the counts of every model, verified.
type Report struct {
	Models     []ModelCount
	Alerts     int64 // in the source, all present in the target
	Deliveries int64
	// CopiedAlerts and CopiedDeliveries count what this run wrote.
	CopiedAlerts, CopiedDeliveries int64

	// The decisions and the audit trail, all present in the target.
	Decisions, Rebaselines, QuietPeriods, AuditRecords int64
	// What this run wrote of them (quiet periods: added or ended).
	CopiedDecisions, CopiedRebaselines, CopiedQuietPeriods, CopiedAuditRecords int64
	// Audit is store.VerifyAudit's report on the target's trail after the
	// copy, the same as on the source's (a trail already broken in the
	// source is copied as it is, and reported broken at the same record).
	Audit store.AuditReport
}

// ErrMismatch is returned (wrapped) when the target holds a different
// history for a model than the source (for instance rows that the source
// lacks), so that copying would mix two histories, or when the counts do
// not agree after the copy.
var ErrMismatch = errors.New("transfer: target and source histories differ")

// Copy copies every model's history, then the alert ledger, from src to
// dst, and verifies the counts (see the package documentation). src must
// implement ModelLister.
func Copy(ctx context.Context, src, dst store.Store, opt Options) (Report, error) {
	var rep Report
	if opt.BatchRows <= 0 {
		opt.BatchRows = 5000
	}
	ml, ok := src.(ModelLister)
	if !ok {
		return rep, fmt.Errorf("transfer: the source store (%T) cannot list its models", src)
	}
	models, err := ml.Models(ctx)
	if err != nil {
		return rep, err
	}
	states, err := src.ModelStates(ctx)
	if err != nil {
		return rep, err
	}
	// The decisions are checked before anything is copied: a target that
	// cannot take them, or holds another trail, is refused at once.
	hist, dc, err := decisionsToCopy(ctx, src, dst)
	if err != nil {
		return rep, err
	}
	// need maps the observations decisions refer to (source ids) to
	// their copies' ids, filled in as the models are copied.
	need := map[int64]int64{}
	for _, d := range hist.Decisions {
		need[d.ObsID] = 0
	}
	for _, m := range models {
		mc, err := copyModel(ctx, src, dst, m, opt, need)
		if err != nil {
			return rep, fmt.Errorf("transfer: model %s: %w", m, err)
		}
		for _, st := range states {
			if st.Model == m {
				if err := dst.SetModelState(ctx, st); err != nil {
					return rep, fmt.Errorf("transfer: model %s: %w", m, err)
				}
			}
		}
		rep.Models = append(rep.Models, mc)
		if opt.Progress != nil {
			opt.Progress(mc)
		}
	}
	if err := copyAlerts(ctx, src, dst, &rep); err != nil {
		return rep, fmt.Errorf("transfer: alerts: %w", err)
	}
	if dc != nil {
		if err := copyDecisions(ctx, src.(DecisionCopier), dc, hist, need, &rep); err != nil {
			return rep, fmt.Errorf("transfer: decisions and audit trail: %w", err)
		}
	}
	return rep, nil
}

// decisionsToCopy reads the source's decisions and audit trail and checks
// that the target can take them: it keeps decisions, and its trail is
// empty or a start of the source's. dc is nil when there is nothing to
// copy (the source keeps no decisions, or none were recorded).
func decisionsToCopy(ctx context.Context, src, dst store.Store) (store.DecisionHistory, DecisionCopier, error) {
	var hist store.DecisionHistory
	sc, ok := src.(DecisionCopier)
	if !ok {
		// A store that records decisions but cannot hand them over
		// whole is refused if it holds any: they would be lost.
		if d, ok := src.(store.Decisions); ok {
			recs, err := d.Audit(ctx, store.AuditQuery{Limit: 1})
			if err != nil {
				return hist, nil, err
			}
			if len(recs) > 0 {
				return hist, nil, fmt.Errorf("transfer: the source (%T) keeps an audit trail that this copy cannot read; nothing was copied", src)
			}
		}
		return hist, nil, nil
	}
	hist, err := sc.ExportDecisions(ctx)
	if err != nil {
		return hist, nil, fmt.Errorf("transfer: %w", err)
	}
	if hist.Empty() {
		return hist, nil, nil
	}
	dc, ok := dst.(DecisionCopier)
	if !ok {
		return hist, nil, fmt.Errorf("%w: the source holds an audit trail of %d records and %d decisions on readings, which the target (%T) cannot keep; nothing was copied",
			ErrMismatch, len(hist.Audit), len(hist.Decisions), dst)
	}
	have, err := dc.ExportDecisions(ctx)
	if err != nil {
		return hist, nil, fmt.Errorf("transfer: %w", err)
	}
	if err := store.CheckTrailPrefix(have.Audit, hist.Audit); err != nil {
		return hist, nil, fmt.Errorf("%w: %w; nothing was copied", ErrMismatch, err)
	}
	return hist, dc, nil
}

// copyDecisions maps the decisions' observations to the copies' ids,
// writes what the target lacks in one transaction (ImportDecisions), and
// verifies: the target's decisions are now the source's, row for row,
// and its trail verifies as the source's does.
func copyDecisions(ctx context.Context, src, dst DecisionCopier, hist store.DecisionHistory, need map[int64]int64, rep *Report) error {
	want := hist
	want.Decisions = slices.Clone(hist.Decisions)
	for i, d := range want.Decisions {
		n := need[d.ObsID]
		if n == 0 {
			return fmt.Errorf("decision %d (%s of %s) refers to observation %d, which was not copied", d.ID, d.Action, d.Model, d.ObsID)
		}
		want.Decisions[i].ObsID = n
	}
	plan, err := dst.ImportDecisions(ctx, want)
	if err != nil {
		if errors.Is(err, store.ErrConflict) {
			return fmt.Errorf("%w: %w", ErrMismatch, err)
		}
		return err
	}
	rep.CopiedAuditRecords, rep.CopiedDecisions = int64(len(plan.Audit)), int64(len(plan.Decisions))
	rep.CopiedRebaselines, rep.CopiedQuietPeriods = int64(len(plan.Rebaselines)), int64(len(plan.Quiet)+len(plan.QuietEnded))

	// Verify: nothing is left to write, and the chain checks the same.
	got, err := dst.ExportDecisions(ctx)
	if err != nil {
		return err
	}
	if rest, err := store.PlanImport(got, want); err != nil || !rest.Empty() {
		return fmt.Errorf("%w: after the copy the target's decisions or trail differ from the source's (%v)", ErrMismatch, err)
	}
	rep.AuditRecords, rep.Decisions = int64(len(got.Audit)), int64(len(got.Decisions))
	rep.Rebaselines, rep.QuietPeriods = int64(len(got.Rebaselines)), int64(len(got.Quiet))
	a, err := store.VerifyAudit(ctx, src)
	if err != nil {
		return err
	}
	b, err := store.VerifyAudit(ctx, dst)
	if err != nil {
		return err
	}
	if a.Records != b.Records || a.Head.Seq != b.Head.Seq || a.Head.Hash != b.Head.Hash || (a.Break == nil) != (b.Break == nil) ||
		(a.Break != nil && *a.Break != *b.Break) {
		return fmt.Errorf("%w: the target's audit trail verifies differently from the source's (%s; source: %s)",
			ErrMismatch, describeAudit(b), describeAudit(a))
	}
	rep.Audit = b
	return nil
}

// describeAudit says what store.VerifyAudit found.
func describeAudit(r store.AuditReport) string {
	if r.Break != nil {
		return fmt.Sprintf("%d records intact, then %v", r.Records, r.Break)
	}
	if r.Records == 0 {
		return "no records"
	}
	return fmt.Sprintf("%d records, chain intact, head %d %s", r.Records, r.Head.Seq, r.Head.Hash)
}

// key identifies a row of a file: its generation and line.
type key struct{ gen, line int }

// copyModel copies one model's files, then its fits, and verifies.
func copyModel(ctx context.Context, src, dst store.Store, model string, opt Options, need map[int64]int64) (ModelCount, error) {
	mc := ModelCount{Model: model}
	sources, err := src.Sources(ctx, model)
	if err != nil {
		return mc, err
	}
	dsources, err := dst.Sources(ctx, model)
	if err != nil {
		return mc, err
	}
	dstate := map[string]store.Source{}
	for _, s := range dsources {
		dstate[s.Path] = s
	}
	quar, err := src.Quarantined(ctx, model, 0, 0)
	if err != nil {
		return mc, err
	}
	dquar, err := dst.Quarantined(ctx, model, 0, 0)
	if err != nil {
		return mc, err
	}
	// idmap maps the source's observation ids to the target's.
	idmap := map[int64]int64{}
	for _, s := range sources {
		d, has := dstate[s.Path]
		if err := copySource(ctx, src, dst, s, d, has, quar, dquar, idmap, opt, &mc); err != nil {
			return mc, fmt.Errorf("file %s: %w", s.Path, err)
		}
	}
	for p := range dstate {
		if !slices.ContainsFunc(sources, func(s store.Source) bool { return s.Path == p }) {
			return mc, fmt.Errorf("%w: the target has file %s, the source does not", ErrMismatch, p)
		}
	}
	if err := copyFits(ctx, src, dst, model, idmap, &mc); err != nil {
		return mc, err
	}
	for old := range need {
		if n, ok := idmap[old]; ok {
			need[old] = n
		}
	}
	return mc, verifyModel(ctx, src, dst, &mc)
}

// copySource copies one file's rows, generation by generation in batches,
// and ends at the source's read state. Rows the target holds already (a
// repeated or interrupted run) are mapped, not written again. The
// batches before the last carry made-up read offsets (1, 2, ... past the
// target's) below the final one: the source keeps no intermediate
// positions, and only the final one is ever read back.
func copySource(ctx context.Context, src, dst store.Store, s, d store.Source, has bool,
	quar, dquar []store.QuarantineRow, idmap map[int64]int64, opt Options, mc *ModelCount) error {
	// What the target holds of this file (nothing when it does not know it).
	present := map[key]int64{}
	for after := int64(0); has; {
		page, err := dst.Observations(ctx, s.Model, store.ObsQuery{Path: s.Path, AfterID: after, Limit: 10000})
		if err != nil {
			return err
		}
		if len(page) == 0 {
			break
		}
		for _, o := range page {
			present[key{o.Generation, o.Line}] = o.ID
		}
		after = page[len(page)-1].ID
	}
	qpresent := map[key]int{}
	for _, q := range dquar {
		if q.Path == s.Path {
			qpresent[key{q.Generation, q.Line}]++
		}
	}
	qbyGen := map[int][]store.QuarantineRow{}
	for _, q := range quar {
		if q.Path != s.Path {
			continue
		}
		k := key{q.Generation, q.Line}
		if qpresent[k] > 0 {
			qpresent[k]--
			continue
		}
		q.ID, q.Model, q.Path = 0, "", ""
		qbyGen[q.Generation] = append(qbyGen[q.Generation], q)
	}
	if has && (d.Generation > s.Generation || (d.Generation == s.Generation && d.Offset > s.Offset)) {
		return fmt.Errorf("%w: the target has read further (generation %d offset %d) than the source (generation %d offset %d)",
			ErrMismatch, d.Generation, d.Offset, s.Generation, s.Offset)
	}

	// cur is the target's read state as the copy advances it.
	cur := d
	started := has
	var pending *store.Batch
	flush := func(final bool) error {
		if pending == nil {
			return nil
		}
		b := pending
		pending = nil
		st := s
		g := b.Source.Generation
		if final && g == s.Generation {
			// st is the source's final state as it is; the last batch
			// carries the rows the file left out for a missing value that
			// the target does not count yet.
			b.Missing = s.Missing
			if has {
				b.Missing -= d.Missing
			}
		} else {
			st.Generation = g
			st.Offset = 1
			if started && cur.Generation == g {
				st.Offset = cur.Offset + 1
			}
			if g == s.Generation && st.Offset >= s.Offset {
				return fmt.Errorf("generation %d: no room for another batch below the final read offset %d", g, s.Offset)
			}
		}
		if started && (g < cur.Generation || (g == cur.Generation && st.Offset <= cur.Offset)) {
			if len(b.Observations) > 0 || len(b.Quarantine) > 0 {
				return fmt.Errorf("%w: rows of generation %d are missing in the target, which has read generation %d to offset %d",
					ErrMismatch, g, cur.Generation, cur.Offset)
			}
			return nil // nothing to write, position already there
		}
		b.Source = st
		ids, err := dst.Ingest(ctx, *b)
		if err != nil {
			return err
		}
		for i, o := range b.Observations {
			idmap[o.ID] = ids[i]
		}
		mc.CopiedObservations += int64(len(ids))
		mc.CopiedQuarantined += int64(len(b.Quarantine))
		cur, started = st, true
		return nil
	}
	// add puts rows into the pending batch of generation g, flushing a full
	// batch or one of another generation first.
	add := func(g int, o *store.Observation) error {
		if pending != nil && (pending.Source.Generation != g || len(pending.Observations) >= opt.BatchRows) {
			if err := flush(false); err != nil {
				return err
			}
		}
		if pending == nil {
			pending = &store.Batch{Source: store.Source{Generation: g}, Quarantine: qbyGen[g]}
			delete(qbyGen, g)
		}
		if o != nil {
			pending.Observations = append(pending.Observations, *o)
		}
		return nil
	}
	for after := int64(0); ; {
		page, err := src.Observations(ctx, s.Model, store.ObsQuery{Path: s.Path, AfterID: after, Limit: opt.BatchRows})
		if err != nil {
			return err
		}
		if len(page) == 0 {
			break
		}
		for i := range page {
			o := page[i]
			after = o.ID
			if id, ok := present[key{o.Generation, o.Line}]; ok {
				idmap[o.ID] = id
				continue
			}
			// The quarantined rows of the generations before o's go first.
			for _, g := range sortedGens(qbyGen) {
				if g < o.Generation {
					if err := add(g, nil); err != nil {
						return err
					}
				}
			}
			gen := o.Generation
			o.Model, o.Path, o.Generation = "", "", 0
			if err := add(gen, &o); err != nil {
				return err
			}
		}
	}
	for _, g := range sortedGens(qbyGen) {
		if err := add(g, nil); err != nil {
			return err
		}
	}
	if pending != nil && pending.Source.Generation != s.Generation {
		if err := flush(false); err != nil {
			return err
		}
	}
	if pending == nil && (!started || cur.Generation != s.Generation || cur.Offset != s.Offset) {
		pending = &store.Batch{Source: store.Source{Generation: s.Generation}}
	}
	return flush(true)
}

func sortedGens(m map[int][]store.QuarantineRow) []int {
	gs := make([]int, 0, len(m))
	for g := range m {
		gs = append(gs, g)
	}
	sort.Ints(gs)
	return gs
}

// copyFits copies the model's fits the target lacks, oldest first, each
// with its verdict changes, mapping observation ids.
func copyFits(ctx context.Context, src, dst store.Store, model string, idmap map[int64]int64, mc *ModelCount) error {
	fits, err := src.Fits(ctx, model, 0, 0)
	if err != nil {
		return err
	}
	have, err := dst.Fits(ctx, model, 0, 0)
	if err != nil {
		return err
	}
	if len(have) > len(fits) {
		return fmt.Errorf("%w: the target has %d fits, the source %d", ErrMismatch, len(have), len(fits))
	}
	for i, f := range have {
		if !f.At.Equal(fits[i].At) || f.N != fits[i].N {
			return fmt.Errorf("%w: fit %d differs (at %v n %d in the target, at %v n %d in the source)",
				ErrMismatch, i+1, f.At, f.N, fits[i].At, fits[i].N)
		}
	}
	var changes []store.VerdictChange
	if cl, ok := src.(ChangeLister); ok {
		if changes, err = cl.ModelVerdictChanges(ctx, model); err != nil {
			return err
		}
	} else {
		for old := range idmap {
			c, err := src.VerdictChanges(ctx, old)
			if err != nil {
				return err
			}
			changes = append(changes, c...)
		}
	}
	mc.VerdictChanges = int64(len(changes))
	byFit := map[int64][]store.VerdictChange{}
	for _, c := range changes {
		byFit[c.FitID] = append(byFit[c.FitID], c)
	}
	// olds are the source's observation ids in order, to map a fit's
	// LastObsID (the newest observation the fit included).
	olds := make([]int64, 0, len(idmap))
	for old := range idmap {
		olds = append(olds, old)
	}
	slices.Sort(olds)
	for _, f := range fits[len(have):] {
		cs := byFit[f.ID]
		for i := range cs {
			n, ok := idmap[cs[i].ObsID]
			if !ok {
				return fmt.Errorf("fit %d: verdict change of observation %d, which was not copied", f.ID, cs[i].ObsID)
			}
			cs[i].ObsID, cs[i].FitID = n, 0
		}
		if f.LastObsID != 0 {
			i, _ := slices.BinarySearch(olds, f.LastObsID+1)
			if i == 0 {
				f.LastObsID = 0
			} else {
				f.LastObsID = idmap[olds[i-1]]
			}
		}
		f.ID = 0
		if _, err := dst.RecordFit(ctx, f, cs); err != nil {
			return err
		}
		mc.CopiedFits++
	}
	return nil
}

// verifyModel compares the model's counts in both stores.
func verifyModel(ctx context.Context, src, dst store.Store, mc *ModelCount) error {
	type counter func(ctx context.Context, model string) (int64, error)
	for _, c := range []struct {
		what string
		f    func(store.Store) counter
		dst  *int64
	}{
		{"observations", func(s store.Store) counter { return s.CountObservations }, &mc.Observations},
		{"quarantined rows", func(s store.Store) counter { return s.CountQuarantined }, &mc.Quarantined},
		{"fits", func(s store.Store) counter { return s.CountFits }, &mc.Fits},
	} {
		a, err := c.f(src)(ctx, mc.Model)
		if err != nil {
			return err
		}
		b, err := c.f(dst)(ctx, mc.Model)
		if err != nil {
			return err
		}
		if a != b {
			return fmt.Errorf("%w: %d %s in the source, %d in the target", ErrMismatch, a, c.what, b)
		}
		*c.dst = a
	}
	ss, err := src.Sources(ctx, mc.Model)
	if err != nil {
		return err
	}
	ds, err := dst.Sources(ctx, mc.Model)
	if err != nil {
		return err
	}
	if len(ss) != len(ds) {
		return fmt.Errorf("%w: %d files in the source, %d in the target", ErrMismatch, len(ss), len(ds))
	}
	for i := range ss {
		a, b := ss[i], ds[i]
		if a.Path != b.Path || a.Generation != b.Generation || a.Offset != b.Offset || a.Line != b.Line ||
			a.Inode != b.Inode || a.Size != b.Size || a.Fingerprint != b.Fingerprint ||
			a.FingerprintLen != b.FingerprintLen || a.Header != b.Header || a.Rows != b.Rows || a.Quarantined != b.Quarantined || a.Missing != b.Missing {
			return fmt.Errorf("%w: read state of %s: %+v in the source, %+v in the target", ErrMismatch, a.Path, a, b)
		}
	}
	return nil
}

// copyAlerts copies every alert whose stored form the target lacks, with
// the outbox entries the target lacks (matched by route and event id, or
// by route and creation time for an entry without an event id).
func copyAlerts(ctx context.Context, src, dst store.Store, rep *Report) error {
	alerts, err := src.Alerts(ctx, store.AlertQuery{})
	if err != nil {
		return err
	}
	deliveries, err := src.Deliveries(ctx, "", 0)
	if err != nil {
		return err
	}
	have, err := dst.Deliveries(ctx, "", 0)
	if err != nil {
		return err
	}
	type dkey struct {
		alert, route, event string
		created             int64
	}
	dk := func(d store.Delivery) dkey {
		k := dkey{alert: d.AlertID, route: d.Route, event: d.EventID}
		if d.EventID == "" {
			k.created = d.CreatedAt.UnixNano()
		}
		return k
	}
	present := map[dkey]bool{}
	for _, d := range have {
		present[dk(d)] = true
	}
	byAlert := map[string][]store.Delivery{}
	for i := len(deliveries) - 1; i >= 0; i-- { // oldest first
		d := deliveries[i]
		if present[dk(d)] {
			continue
		}
		d.ID = 0
		byAlert[d.AlertID] = append(byAlert[d.AlertID], d)
	}
	rep.Alerts, rep.Deliveries = int64(len(alerts)), int64(len(deliveries))
	for i := len(alerts) - 1; i >= 0; i-- {
		a := alerts[i]
		ds := byAlert[a.ID]
		delete(byAlert, a.ID)
		got, err := dst.Alert(ctx, a.ID)
		same := err == nil && got.State == a.State && got.Doc == a.Doc && got.LastSeen.Equal(a.LastSeen) &&
			got.Severity == a.Severity && got.FirstSeen.Equal(a.FirstSeen)
		if err != nil && !errors.Is(err, store.ErrNotFound) {
			return err
		}
		if same && len(ds) == 0 {
			continue
		}
		a.Revision = 0
		if err := dst.PutAlert(ctx, a, ds); err != nil {
			return err
		}
		if !same {
			rep.CopiedAlerts++
		}
		rep.CopiedDeliveries += int64(len(ds))
	}
	if len(byAlert) > 0 {
		return fmt.Errorf("%d outbox entries belong to no alert of the source", len(byAlert))
	}
	// Verify: every alert and every outbox entry of the source is in the target.
	for _, a := range alerts {
		got, err := dst.Alert(ctx, a.ID)
		if err != nil {
			return err
		}
		if got.State != a.State || got.Doc != a.Doc {
			return fmt.Errorf("%w: alert %s is %s in the source, %s in the target", ErrMismatch, a.ID, a.State, got.State)
		}
	}
	have, err = dst.Deliveries(ctx, "", 0)
	if err != nil {
		return err
	}
	present = map[dkey]bool{}
	for _, d := range have {
		present[dk(d)] = true
	}
	for _, d := range deliveries {
		if !present[dk(d)] {
			return fmt.Errorf("%w: outbox entry %s/%s of alert %s missing in the target", ErrMismatch, d.Route, d.EventID, d.AlertID)
		}
	}
	return nil
}

// String describes the report, one line per model, then the alerts: the
// verified counts, and what this run copied.
func (r Report) String() string {
	var b strings.Builder
	for _, m := range r.Models {
		fmt.Fprintf(&b, "model %s: %d observations, %d quarantined rows, %d fits, %d verdict changes verified (copied now: %d, %d, %d)\n",
			m.Model, m.Observations, m.Quarantined, m.Fits, m.VerdictChanges, m.CopiedObservations, m.CopiedQuarantined, m.CopiedFits)
	}
	fmt.Fprintf(&b, "alerts: %d verified (copied now: %d); outbox entries: %d verified (copied now: %d)\n",
		r.Alerts, r.CopiedAlerts, r.Deliveries, r.CopiedDeliveries)
	if r.AuditRecords > 0 || r.Decisions+r.Rebaselines+r.QuietPeriods > 0 {
		fmt.Fprintf(&b, "decisions: %d on readings, %d re-baselines, %d quiet periods verified (copied now: %d, %d, %d)\n",
			r.Decisions, r.Rebaselines, r.QuietPeriods, r.CopiedDecisions, r.CopiedRebaselines, r.CopiedQuietPeriods)
		fmt.Fprintf(&b, "audit trail: %d records copied as they are (copied now: %d); verified in the target: %s\n",
			r.AuditRecords, r.CopiedAuditRecords, describeAudit(r.Audit))
		if r.Audit.Break != nil {
			fmt.Fprintln(&b, "the trail was already broken in the source: it is copied as it stands, as evidence; report it under your quality procedures")
		}
	}
	return b.String()
}
