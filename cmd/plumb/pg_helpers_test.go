package main

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"os"
	"strings"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
)

// fleetSchema makes a fresh schema on the test server for one fleet
// test and returns it with the state URL that selects it.
func fleetSchema(t testing.TB) (schema, url string) {
	t.Helper()
	u := os.Getenv("PLUMB_TEST_POSTGRES")
	if u == "" {
		t.Skip("PLUMB_TEST_POSTGRES is not set: no PostgreSQL server to test against " +
			"(start a throwaway one with: eval \"$(testdata/pg/cluster.sh start)\")")
	}
	b := make([]byte, 6)
	rand.Read(b)
	schema = "plumbfleet_" + hex.EncodeToString(b)
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	conn, err := pgx.Connect(ctx, u)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(ctx)
	if _, err := conn.Exec(ctx, "CREATE SCHEMA "+schema); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		defer cancel()
		if conn, err := pgx.Connect(ctx, u); err == nil {
			conn.Exec(ctx, "DROP SCHEMA IF EXISTS "+schema+" CASCADE")
			conn.Close(ctx)
		}
	})
	sep := "?"
	if strings.Contains(u, "?") {
		sep = "&"
	}
	return schema, u + sep + "search_path=" + schema
}
