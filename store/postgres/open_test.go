package postgres_test

import (
	"context"
	"errors"
	"net/url"
	"os"
	"strings"
	"sync"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/postgres"
)

// TestPostgresMigrateConcurrent: several daemons opening one new database
// at once migrate it once (the advisory lock), and all of them work.
func TestPostgresMigrateConcurrent(t *testing.T) {
	u := testURL(t)
	schema := newSchema(t)
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	const n = 6
	dbs := make([]*postgres.DB, n)
	errs := make([]error, n)
	var wg sync.WaitGroup
	for i := range n {
		wg.Go(func() { dbs[i], errs[i] = postgres.Open(ctx, u, postgres.WithSchema(schema), postgres.WithMaxConns(2)) })
	}
	wg.Wait()
	for i, err := range errs {
		if err != nil {
			t.Fatalf("open %d: %v", i, err)
		}
		defer dbs[i].Close()
	}
	// Migration numbers may have gaps (they are handed out to changes
	// made side by side): each embedded file is recorded once.
	embedded, err := os.ReadDir("migrations")
	if err != nil {
		t.Fatal(err)
	}
	var applied int
	if err := dbs[0].Pool().QueryRow(ctx, "SELECT COUNT(*) FROM schema_version").Scan(&applied); err != nil {
		t.Fatal(err)
	}
	if applied != len(embedded) {
		t.Errorf("%d migrations recorded, want %d (each once)", applied, len(embedded))
	}
	for i, db := range dbs {
		v, err := db.SchemaVersion(ctx)
		if err != nil || v != postgres.LatestSchemaVersion() {
			t.Errorf("db %d: schema version %d, %v; want %d", i, v, err, postgres.LatestSchemaVersion())
		}
		b := store.Batch{Source: store.Source{Model: "m", Path: "p.csv", Generation: 1, Offset: int64(10 * (i + 1))}}
		b.Observations = []store.Observation{{Line: i + 2, Raw: "1,2", Values: []float64{1, 2}}}
		if _, err := db.Ingest(ctx, b); err != nil {
			t.Errorf("db %d: ingest: %v", i, err)
		}
	}
	if n, err := dbs[n-1].CountObservations(ctx, "m"); err != nil || n != 6 {
		t.Errorf("CountObservations = %d, %v; want 6", n, err)
	}
	// Opening an up-to-date database applies nothing.
	again, err := postgres.Open(ctx, u, postgres.WithSchema(schema))
	if err != nil {
		t.Fatal(err)
	}
	defer again.Close()
	if err := again.Pool().QueryRow(ctx, "SELECT COUNT(*) FROM schema_version").Scan(&applied); err != nil || applied != len(embedded) {
		t.Errorf("after a reopen %d migrations recorded (%v)", applied, err)
	}
}

// TestPostgresSchemaTooNew: a database migrated by a newer plumb is
// refused, and left as it was.
func TestPostgresSchemaTooNew(t *testing.T) {
	db, schema := openTemp(t)
	ctx := context.Background()
	future := postgres.LatestSchemaVersion() + 1
	if _, err := db.Pool().Exec(ctx, "INSERT INTO schema_version (version, name, applied_at) VALUES ($1, 'future.sql', 0)", future); err != nil {
		t.Fatal(err)
	}
	_, err := postgres.Open(ctx, testURL(t), postgres.WithSchema(schema))
	if !errors.Is(err, postgres.ErrSchemaTooNew) {
		t.Fatalf("Open of a newer schema: %v, want ErrSchemaTooNew", err)
	}
	if v, err := db.SchemaVersion(ctx); err != nil || v != future {
		t.Errorf("schema version after the refusal = %d, %v; want %d", v, err, future)
	}
}

// TestPostgresRawBytes: a source line and a header are kept byte for byte,
// whatever their encoding (Latin-1, a NUL), as the SQLite backend keeps
// them.
func TestPostgresRawBytes(t *testing.T) {
	db, _ := openTemp(t)
	ctx := context.Background()
	raw := "caf\xe9,1\x00,2"
	header := "t\x1fd\xe9bit"
	b := store.Batch{Source: store.Source{Model: "m", Path: "latin1.csv", Generation: 1, Offset: 30, Header: header},
		Observations: []store.Observation{{Line: 2, Raw: raw, Values: []float64{1, 2}}},
		Quarantine:   []store.QuarantineRow{{Line: 3, Column: 1, Raw: "\xff\xfe", Reason: "not a number"}}}
	if _, err := db.Ingest(ctx, b); err != nil {
		t.Fatal(err)
	}
	o, err := db.ObservationAt(ctx, "m", "latin1.csv", 2)
	if err != nil || o.Raw != raw {
		t.Errorf("Raw = %q, %v; want %q", o.Raw, err, raw)
	}
	src, err := db.Sources(ctx, "m")
	if err != nil || len(src) != 1 || src[0].Header != header {
		t.Errorf("Sources = %+v, %v; want header %q", src, err, header)
	}
	q, err := db.Quarantined(ctx, "m", 0, 0)
	if err != nil || len(q) != 1 || q[0].Raw != "\xff\xfe" {
		t.Errorf("Quarantined = %+v, %v", q, err)
	}
}

// TestPostgresErrorsHidePassword: a failed connection names the server
// but never the password, for a wrong password and for a closed port.
func TestPostgresErrorsHidePassword(t *testing.T) {
	u, err := url.Parse(testURL(t))
	if err != nil {
		t.Fatal(err)
	}
	const secret = "s3cret-Never-Shown"
	wrong := *u
	wrong.User = url.UserPassword(u.User.Username(), secret)
	closed := wrong
	closed.Host = "127.0.0.1:1"
	for _, tt := range []struct{ name, url string }{
		{"wrong password", wrong.String()},
		{"closed port", closed.String()},
		{"password parameter", closed.String() + "&password=" + secret},
		{"unparsable", "postgres://u:" + secret + "@h:notaport/db"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
			defer cancel()
			db, err := postgres.Open(ctx, tt.url)
			if err == nil {
				db.Close()
				if tt.name == "wrong password" {
					t.Skip("the server accepts any password (trust authentication)")
				}
				t.Fatal("Open succeeded")
			}
			if strings.Contains(err.Error(), secret) {
				t.Errorf("error shows the password: %v", err)
			}
			t.Logf("error: %v", err)
		})
	}
}

// TestPostgresMigrateFillsGaps: a migration whose number is below one
// already applied (numbers are handed out to changes made side by side,
// and 0006 may be applied before 0004 exists) is applied when missing.
func TestPostgresMigrateFillsGaps(t *testing.T) {
	ctx := context.Background()
	db, schema := openTemp(t)
	// Undo 0003 (the sources' digest) by hand, as if a binary with 0006
	// and without 0003 had migrated this database.
	for _, q := range []string{"ALTER TABLE sources DROP COLUMN digest", "DELETE FROM schema_version WHERE version = 3"} {
		if _, err := db.Pool().Exec(ctx, q); err != nil {
			t.Fatal(err)
		}
	}
	again := openSame(t, schema)
	var n int
	if err := again.Pool().QueryRow(ctx, "SELECT COUNT(*) FROM schema_version WHERE version = 3").Scan(&n); err != nil || n != 1 {
		t.Errorf("0003 recorded %d times (%v), want once", n, err)
	}
	if _, err := again.Pool().Exec(ctx, "SELECT digest FROM sources"); err != nil {
		t.Errorf("0003 not applied again: %v", err)
	}
}

// TestPostgresMigrationBelowTheLatestIsApplied: a database that records
// later migrations but not 0003 (made by a build that lacked it: branches
// merge in any order) gets 0003 when opened.
func TestPostgresMigrationBelowTheLatestIsApplied(t *testing.T) {
	u := testURL(t)
	schema := newSchema(t)
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	db, err := postgres.Open(ctx, u, postgres.WithSchema(schema))
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{
		"DELETE FROM schema_version WHERE version = 3",
		"ALTER TABLE sources DROP COLUMN digest",
	} {
		if _, err := db.Pool().Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	db.Close()
	db, err = postgres.Open(ctx, u, postgres.WithSchema(schema))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	var n int
	if err := db.Pool().QueryRow(ctx, "SELECT count(*) FROM schema_version WHERE version = 3").Scan(&n); err != nil || n != 1 {
		t.Errorf("migration 0003 recorded %d times (%v), want once", n, err)
	}
	b := store.Batch{Source: store.Source{Model: "m", Path: "p.csv", Generation: 1, Offset: 10, Digest: []byte("state")}}
	b.Observations = []store.Observation{{Line: 2, Raw: "1,2", Values: []float64{1, 2}}}
	if _, err := db.Ingest(ctx, b); err != nil {
		t.Fatal(err)
	}
	src, err := db.Sources(ctx, "m")
	if err != nil || len(src) != 1 || string(src[0].Digest) != "state" {
		t.Errorf("sources after the late migration: %+v, %v", src, err)
	}
}
