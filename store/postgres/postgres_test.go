package postgres_test

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"os"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"plumb/store"
	"plumb/store/postgres"
	"plumb/store/storetest"
)

// testURL returns the URL of the test server from PLUMB_TEST_POSTGRES, or
// skips the test: without a server the PostgreSQL tests do not run.
func testURL(tb testing.TB) string {
	tb.Helper()
	u := os.Getenv("PLUMB_TEST_POSTGRES")
	if u == "" {
		tb.Skip("PLUMB_TEST_POSTGRES is not set: no PostgreSQL server to test against " +
			"(start a throwaway one with: eval \"$(testdata/pg/cluster.sh start)\")")
	}
	return u
}

// newSchema returns a fresh schema name and drops that schema when the
// test ends.
func newSchema(tb testing.TB) string {
	tb.Helper()
	b := make([]byte, 6)
	rand.Read(b)
	name := "plumbtest_" + hex.EncodeToString(b)
	url := testURL(tb)
	tb.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		defer cancel()
		conn, err := pgx.Connect(ctx, url)
		if err != nil {
			tb.Errorf("drop schema %s: %v", name, err)
			return
		}
		defer conn.Close(ctx)
		if _, err := conn.Exec(ctx, "DROP SCHEMA IF EXISTS "+pgx.Identifier{name}.Sanitize()+" CASCADE"); err != nil {
			tb.Errorf("drop schema %s: %v", name, err)
		}
	})
	return name
}

// openTemp opens a fresh, empty history in its own schema and closes it
// at cleanup.
func openTemp(tb testing.TB, opts ...postgres.Option) (*postgres.DB, string) {
	tb.Helper()
	url := testURL(tb)
	schema := newSchema(tb)
	db, err := postgres.Open(context.Background(), url, append([]postgres.Option{postgres.WithSchema(schema)}, opts...)...)
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() { db.Close() })
	return db, schema
}

func TestPostgresConformance(t *testing.T) {
	storetest.Run(t, func(t *testing.T) store.Store {
		db, _ := openTemp(t)
		return db
	})
}

func TestPostgresDecisionsConformance(t *testing.T) {
	storetest.RunDecisions(t, func(t *testing.T) storetest.DecisionStore {
		db, _ := openTemp(t)
		return db
	})
}
