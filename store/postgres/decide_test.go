package postgres_test

import (
	"context"
	"fmt"
	"sync"
	"testing"

	"github.com/jackc/pgx/v5"

	"plumb/store"
	"plumb/store/postgres"
)

// Two handles on one schema (as two daemons, or a daemon and the command
// line, would hold) append to the trail at once: the advisory lock
// serialises them, so the records form one chain that verifies.
func TestPostgresAuditWritersSerialised(t *testing.T) {
	ctx := context.Background()
	a, schema := openTemp(t)
	b, err := postgres.Open(ctx, testURL(t), postgres.WithSchema(schema))
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	const each = 40
	var wg sync.WaitGroup
	errs := make(chan error, 2*each)
	for k, db := range []*postgres.DB{a, b} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range each {
				_, err := db.AppendAudit(ctx, store.AuditRecord{Actor: fmt.Sprintf("writer-%d", k), Action: store.ActionAcknowledge,
					Model: "cal", Subject: fmt.Sprintf("sp-%d", i), Reason: "seen"})
				if err != nil {
					errs <- err
				}
			}
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Fatal(err)
	}
	rep, err := store.VerifyAudit(ctx, a)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Break != nil || rep.Records != 2*each {
		t.Fatalf("trail of %d records, break %v; want %d and none", rep.Records, rep.Break, 2*each)
	}
}

// The trail refuses UPDATE and DELETE through SQL; with the trigger
// dropped, an edit is caught by the chain.
func TestPostgresAuditAppendOnly(t *testing.T) {
	ctx := context.Background()
	db, schema := openTemp(t)
	for _, r := range []string{"first", "second", "third"} {
		if _, err := db.AppendAudit(ctx, store.AuditRecord{Actor: "r.okafor", Action: store.ActionAcknowledge, Model: "cal", Subject: "sp-1", Reason: r}); err != nil {
			t.Fatal(err)
		}
	}
	conn, err := pgx.Connect(ctx, testURL(t))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(ctx)
	if _, err := conn.Exec(ctx, "SET search_path TO "+pgx.Identifier{schema}.Sanitize()); err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{"UPDATE audit SET reason = 'edited' WHERE seq = 2", "DELETE FROM audit WHERE seq = 3"} {
		if _, err := conn.Exec(ctx, q); err == nil {
			t.Errorf("%s: accepted, want the trigger's refusal", q)
		}
	}
	if _, err := conn.Exec(ctx, "ALTER TABLE audit DISABLE TRIGGER audit_append_only"); err != nil {
		t.Fatal(err)
	}
	if _, err := conn.Exec(ctx, "UPDATE audit SET reason = 'edited' WHERE seq = 2"); err != nil {
		t.Fatal(err)
	}
	rep, err := store.VerifyAudit(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Break == nil || rep.Break.Seq != 2 || rep.Break.Kind != store.BreakEdited {
		t.Fatalf("break %+v, want record 2 edited", rep.Break)
	}
}
