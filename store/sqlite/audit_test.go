package sqlite_test

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"sync"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/sqlite"
)

// fillTrail writes n audit records through the store.
func fillTrail(t *testing.T, db *sqlite.DB, n int) {
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

// TestAuditAppendOnly checks that the triggers refuse edits and deletions
// through SQL, of the trail and of the decisions.
func TestAuditAppendOnly(t *testing.T) {
	db, _ := openTemp(t)
	ctx := context.Background()
	ids, err := db.Ingest(ctx, store.Batch{Source: store.Source{Model: "cal", Path: "a.csv", Offset: 10, Line: 2},
		Observations: []store.Observation{{Line: 2, Raw: "1,2", Values: []float64{1, 2}}}})
	if err != nil {
		t.Fatal(err)
	}
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
		"UPDATE decisions SET reason = 'x'",
		"DELETE FROM decisions",
		"UPDATE rebaselines SET reason = 'x'",
		"DELETE FROM rebaselines",
		"DELETE FROM quiet_periods",
		"DELETE FROM observations",
	} {
		_, err := db.DB().ExecContext(ctx, q)
		if strings.HasSuffix(q, "observations") {
			// The exclusion refers to the reading (foreign key).
			if err == nil {
				t.Errorf("%s: accepted while a decision refers to it", q)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), "append-only") && !strings.Contains(err.Error(), "kept") {
			t.Errorf("%s: %v, want a refusal", q, err)
		}
	}
	rep, err := store.VerifyAudit(ctx, db)
	if err != nil || rep.Break != nil || rep.Records != 3 {
		t.Errorf("VerifyAudit after refused edits = %+v, %v", rep, err)
	}
}

// TestAuditTamper edits the trail directly in the database, as someone
// with the file and an SQLite shell could after dropping the triggers,
// and checks that VerifyAudit reports the first break.
func TestAuditTamper(t *testing.T) {
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
			for _, q := range append([]string{"DROP TRIGGER audit_append_only_update", "DROP TRIGGER audit_append_only_delete"}, tt.sql...) {
				if _, err := db.DB().ExecContext(ctx, q); err != nil {
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

// TestAuditTwoProcesses appends from two handles on the same file, as the
// command line does beside a running daemon: the chain stays whole.
func TestAuditTwoProcesses(t *testing.T) {
	a, path := openTemp(t)
	b, err := sqlite.Open(context.Background(), path)
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	var wg sync.WaitGroup
	errs := make(chan error, 100)
	for _, db := range []*sqlite.DB{a, b} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for range 50 {
				if _, err := db.AppendAudit(context.Background(), store.AuditRecord{Actor: "x", Action: store.ActionAcknowledge}); err != nil {
					errs <- err
				}
			}
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	rep, err := store.VerifyAudit(context.Background(), a)
	if err != nil || rep.Break != nil || rep.Records != 100 {
		t.Errorf("VerifyAudit = %+v, %v; want 100 intact records", rep, err)
	}
	if errors.Is(err, store.ErrConflict) {
		t.Error("unexpected conflict")
	}
}
