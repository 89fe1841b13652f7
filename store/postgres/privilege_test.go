package postgres_test

import (
	"context"
	"net/url"
	"strings"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"plumb/store"
	"plumb/store/postgres"
	"plumb/store/storetest"
)

// daemonRole is the role testdata/pg/cluster.sh creates without any
// privilege, for the least-privilege test.
const daemonRole = "plumb_test_rw"

// grantSQL is what a daemon's role needs on a schema that an owner role
// has migrated (README: "Scaling beyond one machine").
var grantSQL = []string{
	"GRANT USAGE ON SCHEMA %s TO %s",
	"GRANT SELECT, INSERT, UPDATE ON ALL TABLES IN SCHEMA %s TO %s",
	"GRANT USAGE ON ALL SEQUENCES IN SCHEMA %s TO %s",
}

// daemonURL returns the test server's URL with the daemon role (same
// password as the test role), or skips when that role cannot log in.
func daemonURL(t *testing.T) string {
	t.Helper()
	u, err := url.Parse(testURL(t))
	if err != nil {
		t.Fatal(err)
	}
	pw, _ := u.User.Password()
	u.User = url.UserPassword(daemonRole, pw)
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	conn, err := pgx.Connect(ctx, u.String())
	if err != nil {
		t.Skipf("role %s cannot log in (%v): start the server with testdata/pg/cluster.sh", daemonRole, err)
	}
	conn.Close(ctx)
	return u.String()
}

func grant(t *testing.T, owner *postgres.DB, schema string) {
	t.Helper()
	for _, q := range grantSQL {
		q = strings.Replace(strings.Replace(q, "%s", pgx.Identifier{schema}.Sanitize(), 1), "%s", daemonRole, 1)
		if _, err := owner.Pool().Exec(context.Background(), q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
}

// TestPostgresLeastPrivilege: with a schema migrated by its owner, a role
// holding only USAGE on the schema, SELECT, INSERT, UPDATE on its tables
// and USAGE on its sequences runs everything a daemon does: the whole
// conformance suite, decisions and the audit trail, ownership, outbox
// claims and the fleet view. It
// cannot migrate a new schema, and says so.
func TestPostgresLeastPrivilege(t *testing.T) {
	rw := daemonURL(t)
	openRW := func(t *testing.T) *postgres.DB {
		owner, schema := openTemp(t)
		grant(t, owner, schema)
		db, err := postgres.Open(context.Background(), rw, postgres.WithSchema(schema))
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { db.Close() })
		return db
	}
	storetest.Run(t, func(t *testing.T) store.Store { return openRW(t) })
	// Decisions and the audit trail need no DELETE: the trail and the
	// decisions are only inserted, a quiet period ended early is updated.
	t.Run("decisions", func(t *testing.T) {
		storetest.RunDecisions(t, func(t *testing.T) storetest.DecisionStore { return openRW(t) })
	})

	t.Run("ownership, claims, fleet", func(t *testing.T) {
		db := openRW(t)
		ctx := context.Background()
		l, err := db.Acquire(ctx, "cal", postgres.ThisProcess("rw"), postgres.AcquireOptions{})
		if err != nil {
			t.Fatal(err)
		}
		defer l.Release(ctx)
		if err := db.PutAlert(ctx, store.AlertRecord{ID: "a", Model: "cal", State: "open", Doc: "{}"},
			[]store.Delivery{{Route: "log", EventID: "e"}}); err != nil {
			t.Fatal(err)
		}
		if ds, err := db.ClaimDeliveries(ctx, time.Now().Add(time.Minute), 0, time.Minute); err != nil || len(ds) != 1 {
			t.Errorf("ClaimDeliveries = %v, %v", ds, err)
		}
		fl, err := db.Fleet(ctx)
		if err != nil || len(fl) != 1 || fl[0].Owner == nil || !fl[0].Owner.Alive {
			t.Errorf("Fleet = %+v, %v", fl, err)
		}
	})

	// plumb state copy as the daemon's role: the trail is imported with
	// INSERT (and an ended quiet period with UPDATE), ids kept without
	// touching a sequence.
	t.Run("import decisions", func(t *testing.T) {
		ctx := context.Background()
		src, _ := openTemp(t)
		dst := openRW(t)
		var ids []int64
		for _, db := range []*postgres.DB{src, dst} {
			ids = ingestRows(t, db, "cal", "a.csv", 4)
		}
		if _, err := src.Decide(ctx, store.Decision{Model: "cal", ObsID: ids[2], Action: store.ActionExclude, Actor: "a", Reason: "r"}); err != nil {
			t.Fatal(err)
		}
		q, err := src.SetQuiet(ctx, store.QuietPeriod{Start: t0(), End: t0().Add(time.Hour), Owner: "o", Reason: "r"})
		if err != nil {
			t.Fatal(err)
		}
		for i := range 2 {
			h, err := src.ExportDecisions(ctx)
			if err != nil {
				t.Fatal(err)
			}
			if _, err := dst.ImportDecisions(ctx, h); err != nil {
				t.Fatalf("import %d as the daemon's role: %v", i+1, err)
			}
			if i == 0 { // the source goes on: the second import ends the period
				if _, err := src.EndQuiet(ctx, q.ID, t0().Add(time.Minute), "o", "done"); err != nil {
					t.Fatal(err)
				}
			}
		}
		rep, err := store.VerifyAudit(ctx, dst)
		if err != nil || rep.Break != nil || rep.Records != 3 {
			t.Errorf("VerifyAudit after the import = %+v, %v; want 3 intact records", rep, err)
		}
		if qs, err := dst.QuietPeriods(ctx, "", time.Time{}); err != nil || len(qs) != 1 || qs[0].EndedBy != "o" {
			t.Errorf("quiet periods after the import: %+v, %v", qs, err)
		}
		if d, err := dst.Decide(ctx, store.Decision{Model: "cal", ObsID: ids[1], Action: store.ActionExclude, Actor: "a", Reason: "r"}); err != nil || d.ID != 2 || d.AuditSeq != 4 {
			t.Errorf("next decision as the daemon's role: %+v, %v", d, err)
		}
	})

	t.Run("cannot migrate", func(t *testing.T) {
		schema := newSchema(t)
		_, err := postgres.Open(context.Background(), rw, postgres.WithSchema(schema))
		if err == nil || !strings.Contains(err.Error(), "permission denied") {
			t.Errorf("Open of a new schema by the daemon role: %v, want permission denied", err)
		}
	})
}
