package transfer_test

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/postgres"
	"plumb/store/sqlite"
	"plumb/store/transfer"
)

// Both backends hand over their decisions and audit trail.
var (
	_ transfer.DecisionCopier = (*sqlite.DB)(nil)
	_ transfer.DecisionCopier = (*postgres.DB)(nil)
)

// deciding is a backend with decisions.
type deciding interface {
	store.Store
	store.Decisions
	transfer.DecisionCopier
}

// obsAt returns the id of the observation of model at path:line in
// generation gen.
func obsAt(t *testing.T, s store.Store, model, path string, gen, line int) int64 {
	t.Helper()
	os, err := s.Observations(context.Background(), model, store.ObsQuery{Path: path})
	if err != nil {
		t.Fatal(err)
	}
	for _, o := range os {
		if o.Generation == gen && o.Line == line {
			return o.ID
		}
	}
	t.Fatalf("no observation %s %s:%d@%d", model, path, line, gen)
	return 0
}

// fillDecisions records, on a history made by fill, what people decide
// after alerts: readings of both models and both generations set aside,
// one reinstated, re-baselines (one of a model with no rows yet), quiet
// periods (one of all models, one ended early), acknowledgements and an
// audited alert write.
func fillDecisions(t *testing.T, s deciding) {
	t.Helper()
	ctx := context.Background()
	decide := func(model, path string, gen, line int, action, actor, reason, alert string, at time.Time) {
		t.Helper()
		if _, err := s.Decide(ctx, store.Decision{Model: model, ObsID: obsAt(t, s, model, path, gen, line), Action: action,
			Actor: actor, Reason: reason, Subject: alert, At: at}); err != nil {
			t.Fatal(err)
		}
	}
	decide("cal", "a.csv", 1, 4, store.ActionExclude, "r.okafor", "valve left half open", "cal/suspect/a.csv:4", t0.Add(time.Hour))
	decide("cal", "a.csv", 2, 7, store.ActionExclude, "r.okafor", "bubble in the cell, noted in the bench log", "", t0.Add(2*time.Hour))
	decide("press", "p.csv", 1, 9, store.ActionExclude, "t.berg", "été: wrong die fitted, \"B\" not \"A\"", "", t0.Add(3*time.Hour))
	decide("cal", "a.csv", 1, 4, store.ActionReinstate, "l.hart", "valve checked: it was open fully", "", t0.Add(4*time.Hour))
	for _, r := range []store.Rebaseline{
		{Model: "cal", From: t0, Actor: "t.berg", Reason: "reference cell replaced", Recorded: t0.Add(5 * time.Hour)},
		{Model: "bench-7", From: t0.Add(time.Hour), Actor: "t.berg", Reason: "new bench, first rows tomorrow"},
	} {
		if _, err := s.Rebaseline(ctx, r); err != nil {
			t.Fatal(err)
		}
	}
	q1, err := s.SetQuiet(ctx, store.QuietPeriod{Model: "press", Start: t0, End: t0.Add(8 * time.Hour), Owner: "on-call: j.ndiaye",
		Reason: "die change", Created: t0})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.SetQuiet(ctx, store.QuietPeriod{Start: t0.Add(48 * time.Hour), End: t0.Add(50 * time.Hour), Owner: "site lead",
		Reason: "power test"}); err != nil {
		t.Fatal(err)
	}
	if _, err := s.EndQuiet(ctx, q1.ID, t0.Add(2*time.Hour), "j.ndiaye", "die change done"); err != nil {
		t.Fatal(err)
	}
	if _, err := s.AppendAudit(ctx, store.AuditRecord{At: t0.Add(6 * time.Hour), Actor: "l.hart", Action: store.ActionAcknowledge,
		Model: "press", Subject: "press/drift/x1", Reason: "looking into it", Before: `{"state":"open"}`, After: `{"state":"acknowledged"}`}); err != nil {
		t.Fatal(err)
	}
	a, err := s.Alert(ctx, "press/drift/x1")
	if err != nil {
		t.Fatal(err)
	}
	a.State, a.Revision = "acknowledged", a.Revision+1
	if err := s.PutAlertAudited(ctx, a, nil, func(before *store.AlertRecord, after store.AlertRecord) (store.AuditRecord, bool) {
		return store.AuditRecord{Actor: "l.hart", Action: store.ActionAcknowledge, Model: after.Model, Subject: after.ID,
			Before: fmt.Sprintf(`{"state":%q}`, before.State), After: fmt.Sprintf(`{"state":%q}`, after.State)}, true
	}); err != nil {
		t.Fatal(err)
	}
}

// dumpDecisions is the decisions of a history in a form that does not
// depend on observation ids (each names its reading by file and line).
func dumpDecisions(t *testing.T, s deciding) string {
	t.Helper()
	ctx := context.Background()
	h, err := s.ExportDecisions(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	for _, d := range h.Decisions {
		o, err := s.Observations(ctx, d.Model, store.ObsQuery{AfterID: d.ObsID - 1, Limit: 1})
		if err != nil || len(o) != 1 || o[0].ID != d.ObsID {
			t.Fatalf("decision %d: observation %d of %s: %v", d.ID, d.ObsID, d.Model, err)
		}
		d.ObsID = 0
		d.At = d.At.UTC()
		fmt.Fprintf(&b, "decision %+v on %s\n", d, store.RowRef(o[0].Path, o[0].Generation, o[0].Line))
	}
	for _, r := range h.Rebaselines {
		r.From, r.Recorded = r.From.UTC(), r.Recorded.UTC()
		fmt.Fprintf(&b, "rebaseline %+v\n", r)
	}
	for _, q := range h.Quiet {
		q.Start, q.End, q.Created = q.Start.UTC(), q.End.UTC(), q.Created.UTC()
		fmt.Fprintf(&b, "quiet %+v\n", q)
	}
	return b.String()
}

// sameTrail checks that dst's trail is src's, record for record and byte
// for byte, and that it verifies the same.
func sameTrail(t *testing.T, src, dst deciding) store.AuditReport {
	t.Helper()
	ctx := context.Background()
	a, err := src.Audit(ctx, store.AuditQuery{})
	if err != nil {
		t.Fatal(err)
	}
	b, err := dst.Audit(ctx, store.AuditQuery{})
	if err != nil {
		t.Fatal(err)
	}
	if len(a) != len(b) {
		t.Fatalf("the target's trail has %d records, the source's %d", len(b), len(a))
	}
	for i := range a {
		if !store.SameAuditRecord(a[i], b[i]) {
			t.Fatalf("record %d differs:\nsource %+v\ntarget %+v", a[i].Seq, a[i], b[i])
		}
	}
	ra, err := store.VerifyAudit(ctx, src)
	if err != nil {
		t.Fatal(err)
	}
	rb, err := store.VerifyAudit(ctx, dst)
	if err != nil {
		t.Fatal(err)
	}
	if ra.Records != rb.Records || ra.Head.Hash != rb.Head.Hash || fmt.Sprint(ra.Break) != fmt.Sprint(rb.Break) {
		t.Fatalf("VerifyAudit: source %+v, target %+v", ra, rb)
	}
	return rb
}

// checkDecisionCopy copies a history with decisions twice and checks the
// target: the same history, the same decisions on the same readings, the
// same trail verifying intact; then the target's own next decision
// continues the chain.
func checkDecisionCopy(t *testing.T, src, dst deciding) {
	t.Helper()
	ctx := context.Background()
	fill(t, src)
	fillDecisions(t, src)
	rep, err := transfer.Copy(ctx, src, dst, transfer.Options{BatchRows: 7})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("report:\n%s", rep)
	if got, want := dump(t, dst), dump(t, src); got != want {
		t.Fatalf("the copy differs from the source:\n--- source\n%s\n--- copy\n%s", want, got)
	}
	want := dumpDecisions(t, src)
	if got := dumpDecisions(t, dst); got != want {
		t.Fatalf("the copied decisions differ:\n--- source\n%s\n--- copy\n%s", want, got)
	}
	v := sameTrail(t, src, dst)
	if v.Break != nil || v.Records != 11 {
		t.Fatalf("target trail: %+v, want 11 intact records", v)
	}
	if rep.AuditRecords != 11 || rep.CopiedAuditRecords != 11 || rep.Decisions != 4 || rep.CopiedDecisions != 4 ||
		rep.Rebaselines != 2 || rep.CopiedRebaselines != 2 || rep.QuietPeriods != 2 || rep.CopiedQuietPeriods != 2 ||
		rep.Audit.Head.Hash != v.Head.Hash {
		t.Errorf("report %+v", rep)
	}
	if !strings.Contains(rep.String(), "audit trail: 11 records copied as they are (copied now: 11); verified in the target: 11 records, chain intact, head 11 "+v.Head.Hash) {
		t.Errorf("report text:\n%s", rep)
	}
	// The folded state is the same: the reading set aside is the same
	// file and line in both.
	for _, m := range []string{"cal", "press"} {
		sd, _ := src.Decisions(ctx, m)
		dd, _ := dst.Decisions(ctx, m)
		se, de := store.ExcludedAt(sd, time.Time{}), store.ExcludedAt(dd, time.Time{})
		if len(se) != len(de) || len(se) != 1 {
			t.Errorf("%s: %d readings set aside in the source, %d in the copy; want 1", m, len(se), len(de))
		}
	}

	// Again: nothing written, everything verified again.
	again, err := transfer.Copy(ctx, src, dst, transfer.Options{BatchRows: 7})
	if err != nil {
		t.Fatal(err)
	}
	if again.CopiedAuditRecords+again.CopiedDecisions+again.CopiedRebaselines+again.CopiedQuietPeriods != 0 ||
		again.AuditRecords != 11 || again.Decisions != 4 {
		t.Errorf("second copy: %+v", again)
	}
	if got := dumpDecisions(t, dst); got != want {
		t.Fatalf("after a second copy the decisions differ:\n--- source\n%s\n--- copy\n%s", want, got)
	}
	sameTrail(t, src, dst)

	// The target goes on: its next decision is record 12, linked to 11.
	d, err := dst.Decide(ctx, store.Decision{Model: "cal", ObsID: obsAt(t, dst, "cal", "a.csv", 1, 9), Action: store.ActionExclude,
		Actor: "r.okafor", Reason: "after the move"})
	if err != nil {
		t.Fatal(err)
	}
	if d.AuditSeq != 12 || d.ID != 5 {
		t.Errorf("first decision after the copy: id %d, record %d; want 5 and 12", d.ID, d.AuditSeq)
	}
	if rep, err := store.VerifyAudit(ctx, dst); err != nil || rep.Break != nil || rep.Records != 12 {
		t.Errorf("VerifyAudit after a new decision: %+v, %v", rep, err)
	}
}

func TestCopyDecisionsSQLiteToPostgres(t *testing.T) {
	checkDecisionCopy(t, openSQLite(t), openPostgres(t))
}

func TestCopyDecisionsPostgresToSQLite(t *testing.T) {
	checkDecisionCopy(t, openPostgres(t), openSQLite(t))
}

func TestCopyDecisionsSQLiteToSQLite(t *testing.T) {
	checkDecisionCopy(t, openSQLite(t), openSQLite(t))
}

// TestCopyDecisionsSourceGrew: a target copied earlier, whose source has
// since recorded more (a decision, a quiet period ended), takes the rest
// of the trail on the next copy.
func TestCopyDecisionsSourceGrew(t *testing.T) {
	ctx := context.Background()
	src, dst := openSQLite(t), openSQLite(t)
	fill(t, src)
	q, err := src.SetQuiet(ctx, store.QuietPeriod{Model: "cal", Start: t0, End: t0.Add(time.Hour), Owner: "o", Reason: "r"})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := transfer.Copy(ctx, src, dst, transfer.Options{}); err != nil {
		t.Fatal(err)
	}
	if _, err := src.EndQuiet(ctx, q.ID, t0.Add(time.Minute), "o", "done"); err != nil {
		t.Fatal(err)
	}
	if _, err := src.Decide(ctx, store.Decision{Model: "cal", ObsID: obsAt(t, src, "cal", "a.csv", 2, 3), Action: store.ActionExclude,
		Actor: "a", Reason: "r"}); err != nil {
		t.Fatal(err)
	}
	rep, err := transfer.Copy(ctx, src, dst, transfer.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if rep.CopiedAuditRecords != 2 || rep.CopiedDecisions != 1 || rep.CopiedQuietPeriods != 1 || rep.AuditRecords != 3 {
		t.Errorf("second copy: %+v", rep)
	}
	if got, want := dumpDecisions(t, dst), dumpDecisions(t, src); got != want {
		t.Fatalf("decisions differ:\n--- source\n%s\n--- copy\n%s", want, got)
	}
	sameTrail(t, src, dst)
}

// TestCopyDecisionsRefused: a target with a trail of its own, or one that
// cannot keep a trail, is refused before anything is copied.
func TestCopyDecisionsRefused(t *testing.T) {
	ctx := context.Background()
	src := openSQLite(t)
	fill(t, src)
	if _, err := src.AppendAudit(ctx, store.AuditRecord{Actor: "l.hart", Action: store.ActionAcknowledge, Subject: "a"}); err != nil {
		t.Fatal(err)
	}
	for _, tt := range []struct {
		name string
		dst  func(t *testing.T) store.Store
		want string
	}{
		{"another trail", func(t *testing.T) store.Store {
			dst := openSQLite(t)
			if _, err := dst.AppendAudit(ctx, store.AuditRecord{Actor: "m.silva", Action: store.ActionAcknowledge, Subject: "b"}); err != nil {
				t.Fatal(err)
			}
			return dst
		}, "the target already has a different audit trail"},
		{"a longer trail", func(t *testing.T) store.Store {
			dst := openPostgres(t)
			for _, r := range []store.AuditRecord{{Actor: "l.hart", Action: store.ActionAcknowledge, Subject: "a"}, {Actor: "x", Action: "y"}} {
				if _, err := dst.AppendAudit(ctx, r); err != nil {
					t.Fatal(err)
				}
			}
			return dst
		}, "different audit trail"},
		{"no trail kept", func(t *testing.T) store.Store { return &failing{Store: openSQLite(t), n: 100} }, "cannot keep"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			dst := tt.dst(t)
			_, err := transfer.Copy(ctx, src, dst, transfer.Options{})
			if !errors.Is(err, transfer.ErrMismatch) || !strings.Contains(err.Error(), tt.want) || !strings.Contains(err.Error(), "nothing was copied") {
				t.Fatalf("copy: %v, want ErrMismatch saying %q and that nothing was copied", err, tt.want)
			}
			t.Log(err)
			if n, err := dst.CountObservations(ctx, "cal"); err != nil || n != 0 {
				t.Errorf("the refused copy wrote %d observations (%v)", n, err)
			}
		})
	}
}

// TestCopyDecisionsBrokenTrail: a trail already broken in the source is
// copied as it stands, and the target reports the same break.
func TestCopyDecisionsBrokenTrail(t *testing.T) {
	ctx := context.Background()
	src, dst := openSQLite(t), openPostgres(t)
	fill(t, src)
	for i := range 4 {
		if _, err := src.AppendAudit(ctx, store.AuditRecord{Actor: "l.hart", Action: store.ActionAcknowledge, Subject: fmt.Sprint(i)}); err != nil {
			t.Fatal(err)
		}
	}
	for _, q := range []string{"DROP TRIGGER audit_append_only_update", "UPDATE audit SET reason = 'edited' WHERE seq = 3"} {
		if _, err := src.DB().ExecContext(ctx, q); err != nil {
			t.Fatal(err)
		}
	}
	rep, err := transfer.Copy(ctx, src, dst, transfer.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if rep.Audit.Break == nil || rep.Audit.Break.Seq != 3 || rep.Audit.Break.Kind != store.BreakEdited {
		t.Fatalf("report: %+v, want the break at record 3", rep.Audit)
	}
	if !strings.Contains(rep.String(), "already broken in the source") {
		t.Errorf("report text:\n%s", rep)
	}
	sameTrail(t, src, dst)
}
