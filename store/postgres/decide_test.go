package postgres_test

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/postgres"
)

// fillTrail writes n audit records through the store.
func fillTrail(t *testing.T, db *postgres.DB, n int) {
	t.Helper()
	at := time.Date(2026, 7, 1, 9, 0, 0, 0, time.UTC)
	for i := range n {
		if _, err := db.AppendAudit(context.Background(), store.AuditRecord{At: at.Add(time.Duration(i) * time.Minute),
			Actor: "r.okafor", Action: store.ActionAcknowledge, Model: "cal", Subject: fmt.Sprintf("alert-%d", i),
			Reason: "looking", Before: `{"state":"open"}`, After: `{"state":"acknowledged"}`}); err != nil {
			t.Fatal(err)
		}
	}
}

// ingestRows stores n rows of model from file, lines 2.., and returns
// their ids.
func ingestRows(t *testing.T, db *postgres.DB, model, file string, n int) []int64 {
	t.Helper()
	b := store.Batch{Source: store.Source{Model: model, Path: file, Offset: int64(10 * (n + 1)), Line: n + 1}}
	for i := range n {
		b.Observations = append(b.Observations, store.Observation{Line: i + 2, Raw: fmt.Sprintf("%d,%d", i, 2*i),
			Values: []float64{float64(i), float64(2 * i)}})
	}
	ids, err := db.Ingest(context.Background(), b)
	if err != nil {
		t.Fatal(err)
	}
	return ids
}

// TestPostgresAuditAppendOnly checks that the triggers refuse edits and
// deletions through SQL, of the trail, the decisions and the
// re-baselines, and deletions of quiet periods, even by the tables'
// owner; a decided reading cannot be deleted either (foreign key).
func TestPostgresAuditAppendOnly(t *testing.T) {
	db, _ := openTemp(t)
	ctx := context.Background()
	ids := ingestRows(t, db, "cal", "a.csv", 1)
	if _, err := db.Decide(ctx, store.Decision{Model: "cal", ObsID: ids[0], Action: store.ActionExclude, Actor: "a", Reason: "r"}); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Rebaseline(ctx, store.Rebaseline{Model: "cal", From: time.Unix(1, 0), Actor: "a", Reason: "r"}); err != nil {
		t.Fatal(err)
	}
	if _, err := db.SetQuiet(ctx, store.QuietPeriod{Start: time.Unix(1, 0), End: time.Unix(2, 0), Owner: "a", Reason: "r"}); err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{
		"UPDATE audit SET reason = 'x' WHERE seq = 2",
		"DELETE FROM audit WHERE seq = 3",
		"TRUNCATE audit CASCADE",
		"UPDATE decisions SET reason = 'x'",
		"DELETE FROM decisions",
		"TRUNCATE decisions",
		"UPDATE rebaselines SET reason = 'x'",
		"DELETE FROM rebaselines",
		"TRUNCATE rebaselines",
		"DELETE FROM quiet_periods",
		"TRUNCATE quiet_periods",
		"DELETE FROM observations",
	} {
		_, err := db.Pool().Exec(ctx, q)
		if strings.HasSuffix(q, "observations") {
			if err == nil || !strings.Contains(err.Error(), "foreign key") {
				t.Errorf("%s: %v, want a foreign key refusal (a decision refers to the reading)", q, err)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), "append-only") && !strings.Contains(err.Error(), "kept") {
			t.Errorf("%s: %v, want a refusal", q, err)
		}
	}
	// Ending a quiet period early is the one update allowed.
	if _, err := db.EndQuiet(ctx, 1, time.Unix(1, 500), "a", "done"); err != nil {
		t.Fatal(err)
	}
	rep, err := store.VerifyAudit(ctx, db)
	if err != nil || rep.Break != nil || rep.Records != 4 {
		t.Errorf("VerifyAudit after refused edits = %+v, %v; want 4 intact records", rep, err)
	}
}

// TestPostgresAuditTamper edits the trail directly in the database, as
// the tables' owner with psql could after disabling the trigger, and
// checks that VerifyAudit reports the first break.
func TestPostgresAuditTamper(t *testing.T) {
	tests := []struct {
		name string
		sql  []string
		seq  int64
		kind string
	}{
		{"edited reason", []string{"UPDATE audit SET reason = 'routine check' WHERE seq = 5"}, 5, store.BreakEdited},
		{"edited actor", []string{"UPDATE audit SET actor = 'm.silva' WHERE seq = 1"}, 1, store.BreakEdited},
		{"edited time", []string{"UPDATE audit SET at = at - 3600000000000 WHERE seq = 7"}, 7, store.BreakEdited},
		{"edited after-state", []string{`UPDATE audit SET after = '{"state":"resolved"}' WHERE seq = 3`}, 3, store.BreakEdited},
		// The record's hash recomputed by someone who knows the encoding
		// (rehashed below): the link of the next record breaks.
		{"edited and rehashed", []string{"UPDATE audit SET reason = 'routine check' WHERE seq = 5", "rehash 5"}, 6, store.BreakLink},
		{"deleted", []string{"DELETE FROM audit WHERE seq = 4"}, 5, store.BreakMissing},
		{"deleted two", []string{"DELETE FROM audit WHERE seq IN (4, 5)"}, 6, store.BreakMissing},
		{"deleted and renumbered", []string{
			"DELETE FROM audit WHERE seq = 4",
			"UPDATE audit SET seq = -seq WHERE seq > 4",
			"UPDATE audit SET seq = -seq - 1 WHERE seq < 0",
		}, 4, store.BreakMoved},
		{"reordered", []string{
			"UPDATE audit SET seq = -1 WHERE seq = 6",
			"UPDATE audit SET seq = 6 WHERE seq = 7",
			"UPDATE audit SET seq = 7 WHERE seq = -1",
		}, 6, store.BreakMoved},
		{"times swapped too", []string{
			"UPDATE audit SET seq = -1 WHERE seq = 2",
			"UPDATE audit SET seq = 2 WHERE seq = 3",
			"UPDATE audit SET seq = 3 WHERE seq = -1",
			"UPDATE audit SET at = (SELECT at FROM audit WHERE seq = 3) WHERE seq = 2",
		}, 2, store.BreakEdited},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			db, _ := openTemp(t)
			fillTrail(t, db, 10)
			ctx := context.Background()
			for _, q := range append([]string{"ALTER TABLE audit DISABLE TRIGGER audit_append_only"}, tt.sql...) {
				if seq, ok := strings.CutPrefix(q, "rehash "); ok {
					recs, err := db.Audit(ctx, store.AuditQuery{AfterSeq: mustInt(t, seq) - 1, Limit: 1})
					if err != nil || len(recs) != 1 {
						t.Fatalf("read record %s: %v", seq, err)
					}
					q = fmt.Sprintf("UPDATE audit SET hash = '%s' WHERE seq = %s", store.AuditHash(recs[0], recs[0].Prev), seq)
				}
				if _, err := db.Pool().Exec(ctx, q); err != nil {
					t.Fatalf("%s: %v", q, err)
				}
			}
			rep, err := store.VerifyAudit(ctx, db)
			if err != nil {
				t.Fatal(err)
			}
			if rep.Break == nil || rep.Break.Seq != tt.seq || rep.Break.Kind != tt.kind {
				t.Fatalf("break = %v, want %s at %d", rep.Break, tt.kind, tt.seq)
			}
			if rep.Records != tt.seq-1 && tt.kind != store.BreakMissing {
				t.Errorf("%d records verified before the break, want %d", rep.Records, tt.seq-1)
			}
			t.Log(rep.Break)
		})
	}
}

func mustInt(t *testing.T, s string) int64 {
	t.Helper()
	v, err := strconv.ParseInt(s, 10, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestPostgresAuditSeveralWriters appends to one trail from several
// pools in this process and from child processes at once, as daemons
// and the command line sharing the database do: decisions, re-baselines,
// quiet periods, audited alert writes and plain records. Every write
// succeeds, the sequence numbers run 1..N without a gap or a repeat, and
// VerifyAudit finds the chain intact. Three writers exclude the same
// reading at once: exactly one succeeds, the others are told it is
// already set aside.
func TestPostgresAuditSeveralWriters(t *testing.T) {
	if os.Getenv("PLUMB_AUDIT_CHILD") != "" {
		auditChild()
		return
	}
	db, schema := openTemp(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	const pools, perPool, children, perChild = 4, 30, 3, 40
	ids := ingestRows(t, db, "cal", "a.csv", pools*perPool+1)
	handles := []*postgres.DB{db}
	for range pools - 1 {
		handles = append(handles, openSame(t, schema))
	}

	var procs []*exec.Cmd
	for c := range children {
		cmd := exec.Command(os.Args[0], "-test.run=^TestPostgresAuditSeveralWriters$")
		cmd.Env = append(os.Environ(), "PLUMB_AUDIT_CHILD="+schema, "PLUMB_AUDIT_CHILD_N="+strconv.Itoa(perChild),
			"PLUMB_AUDIT_CHILD_NAME=child"+strconv.Itoa(c))
		cmd.Stderr = os.Stderr
		procs = append(procs, cmd)
	}
	var wg sync.WaitGroup
	errs := make(chan error, 1000)
	start := make(chan struct{})
	for _, cmd := range procs {
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		wg.Add(1)
		go func() {
			defer wg.Done()
			if err := cmd.Wait(); err != nil {
				errs <- fmt.Errorf("child: %v", err)
			}
		}()
	}
	for p, h := range handles {
		wg.Add(1)
		go func() {
			defer wg.Done()
			<-start
			actor := fmt.Sprintf("pool%d", p)
			for i := range perPool {
				var err error
				switch i % 5 {
				case 0, 1:
					_, err = h.Decide(ctx, store.Decision{Model: "cal", ObsID: ids[p*perPool+i], Action: store.ActionExclude, Actor: actor, Reason: "r"})
				case 2:
					_, err = h.Rebaseline(ctx, store.Rebaseline{Model: "cal", From: t0().Add(time.Duration(i) * time.Hour), Actor: actor, Reason: "r"})
				case 3:
					_, err = h.SetQuiet(ctx, store.QuietPeriod{Model: "cal", Start: t0(), End: t0().Add(time.Hour), Owner: actor, Reason: "r"})
				case 4:
					a := store.AlertRecord{ID: fmt.Sprintf("%s-%d", actor, i), Model: "cal", Kind: "suspect_point", State: "open", Doc: "{}"}
					err = h.PutAlertAudited(ctx, a, nil, func(before *store.AlertRecord, after store.AlertRecord) (store.AuditRecord, bool) {
						return store.AuditRecord{Actor: "plumb", Action: store.ActionOpen, Model: after.Model, Subject: after.ID}, before == nil
					})
				}
				if err != nil {
					errs <- fmt.Errorf("%s write %d: %w", actor, i, err)
				}
			}
		}()
	}
	close(start)
	// Three writers set aside the same reading at once.
	same := ids[len(ids)-1]
	var once sync.WaitGroup
	results := make(chan error, 3)
	for _, h := range handles[:3] {
		once.Add(1)
		go func() {
			defer once.Done()
			_, err := h.Decide(ctx, store.Decision{Model: "cal", ObsID: same, Action: store.ActionExclude, Actor: "race", Reason: "r"})
			results <- err
		}()
	}
	once.Wait()
	close(results)
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	var ok, conflict int
	for err := range results {
		switch {
		case err == nil:
			ok++
		case errors.Is(err, store.ErrConflict):
			conflict++
		default:
			t.Errorf("racing exclusion: %v", err)
		}
	}
	if ok != 1 || conflict != 2 {
		t.Errorf("racing exclusions: %d succeeded, %d refused; want 1 and 2", ok, conflict)
	}

	want := int64(pools*perPool + children*perChild + 1)
	rep, err := store.VerifyAudit(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Break != nil || rep.Records != want || rep.Head.Seq != want {
		t.Fatalf("VerifyAudit = %d records, head %d, break %v; want %d intact", rep.Records, rep.Head.Seq, rep.Break, want)
	}
	ds, err := db.Decisions(ctx, "cal")
	if err != nil {
		t.Fatal(err)
	}
	if n := pools*perPool*2/5 + 1; len(ds) != n {
		t.Errorf("%d decisions, want %d", len(ds), n)
	}
	// Each decision's id and record number are its own, in one order.
	for i := 1; i < len(ds); i++ {
		if ds[i].ID != ds[i-1].ID+1 || ds[i].AuditSeq <= ds[i-1].AuditSeq {
			t.Errorf("decision %d (record %d) follows %d (record %d)", ds[i].ID, ds[i].AuditSeq, ds[i-1].ID, ds[i-1].AuditSeq)
		}
	}
	t.Logf("%d records from %d pools and %d processes, chain intact, head %d %.16s", rep.Records, pools, children, rep.Head.Seq, rep.Head.Hash)
}

// auditChild appends records to the trail of the schema
// PLUMB_AUDIT_CHILD, as another process would.
func auditChild() {
	ctx := context.Background()
	db, err := postgres.Open(ctx, os.Getenv("PLUMB_TEST_POSTGRES"), postgres.WithSchema(os.Getenv("PLUMB_AUDIT_CHILD")))
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	defer db.Close()
	n, _ := strconv.Atoi(os.Getenv("PLUMB_AUDIT_CHILD_N"))
	name := os.Getenv("PLUMB_AUDIT_CHILD_NAME")
	for i := range n {
		if _, err := db.AppendAudit(ctx, store.AuditRecord{Actor: name, Action: store.ActionAcknowledge, Model: "cal",
			Subject: fmt.Sprintf("alert-%d", i), Reason: "from another process"}); err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
	}
	os.Exit(0)
}

// TestPostgresAuditPlainText: text PostgreSQL cannot hold is refused as
// invalid, naming the field, and stores nothing.
func TestPostgresAuditPlainText(t *testing.T) {
	db, _ := openTemp(t)
	ctx := context.Background()
	_, err := db.AppendAudit(ctx, store.AuditRecord{Actor: "a", Action: store.ActionAcknowledge, Reason: "bad \xff byte"})
	if !errors.Is(err, store.ErrInvalid) || !strings.Contains(err.Error(), "reason") {
		t.Errorf("AppendAudit with invalid UTF-8: %v, want ErrInvalid naming the reason", err)
	}
	_, err = db.SetQuiet(ctx, store.QuietPeriod{Start: t0(), End: t0().Add(time.Hour), Owner: "a\x00b", Reason: "r"})
	if !errors.Is(err, store.ErrInvalid) || !strings.Contains(err.Error(), "owner") {
		t.Errorf("SetQuiet with a NUL: %v, want ErrInvalid naming the owner", err)
	}
	if recs, err := db.Audit(ctx, store.AuditQuery{}); err != nil || len(recs) != 0 {
		t.Errorf("trail after refusals: %d records, %v", len(recs), err)
	}
}

// TestPostgresDecisionsMigrateOnto: a database migrated before 0004
// existed (0001-0003 and 0006, with rows) gets the decision tables on the
// next start, and decisions work on its rows.
func TestPostgresDecisionsMigrateOnto(t *testing.T) {
	ctx := context.Background()
	db, schema := openTemp(t)
	ids := ingestRows(t, db, "cal", "a.csv", 3)
	for _, q := range []string{
		"DROP TABLE quiet_periods, rebaselines, decisions, audit",
		"DROP FUNCTION plumb_refuse_change()",
		"DELETE FROM schema_version WHERE version = 4",
	} {
		if _, err := db.Pool().Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	again := openSame(t, schema)
	if v, err := again.SchemaVersion(ctx); err != nil || v != postgres.LatestSchemaVersion() {
		t.Errorf("schema version %d (%v), want %d", v, err, postgres.LatestSchemaVersion())
	}
	d, err := again.Decide(ctx, store.Decision{Model: "cal", ObsID: ids[1], Action: store.ActionExclude, Actor: "a", Reason: "r"})
	if err != nil || d.AuditSeq != 1 {
		t.Fatalf("Decide after the upgrade: %+v, %v", d, err)
	}
	if _, err := again.Pool().Exec(ctx, "DELETE FROM audit"); err == nil || !strings.Contains(err.Error(), "append-only") {
		t.Errorf("DELETE FROM audit after the upgrade: %v, want a refusal", err)
	}
}
