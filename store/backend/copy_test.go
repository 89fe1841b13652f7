package backend_test

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"plumb/store"
	"plumb/store/backend"
	"plumb/store/transfer"
)

// writeHistory makes a small SQLite history at path.
func writeHistory(t *testing.T, path string) {
	t.Helper()
	ctx := context.Background()
	db, err := backend.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	b := store.Batch{Source: store.Source{Model: "cal", Path: "a.csv", Generation: 1, Offset: 40, Line: 4},
		Observations: []store.Observation{{Line: 2, Raw: "1,2"}, {Line: 3, Raw: "2,3"}},
		Quarantine:   []store.QuarantineRow{{Line: 4, Column: 1, Raw: "x,3", Reason: "not a number"}}}
	if _, err := db.Ingest(ctx, b); err != nil {
		t.Fatal(err)
	}
	if err := db.PutAlert(ctx, store.AlertRecord{ID: "a1", Model: "cal", State: "open", Doc: "{}", LastSeen: time.Now()},
		[]store.Delivery{{Route: "log", EventID: "e1"}}); err != nil {
		t.Fatal(err)
	}
}

func checkStateCopy(t *testing.T, from, to string) {
	t.Helper()
	ctx := context.Background()
	rep, err := backend.Copy(ctx, from, to, transfer.Options{})
	if err != nil {
		t.Fatal(err)
	}
	want := "model cal: 2 observations, 1 quarantined rows, 0 fits, 0 verdict changes verified (copied now: 2, 1, 0)\n" +
		"alerts: 1 verified (copied now: 1); outbox entries: 1 verified (copied now: 1)\n"
	if rep.String() != want {
		t.Errorf("first copy reports:\n%s\nwant:\n%s", rep, want)
	}
	again, err := backend.Copy(ctx, from, to, transfer.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if s := again.String(); !strings.Contains(s, "(copied now: 0, 0, 0)") || !strings.Contains(s, "alerts: 1 verified (copied now: 0); outbox entries: 1 verified (copied now: 0)") {
		t.Errorf("second copy reports:\n%s", s)
	}
}

func TestCopyStates(t *testing.T) {
	dir := t.TempDir()
	from := filepath.Join(dir, "plumb.db")
	writeHistory(t, from)
	checkStateCopy(t, from, filepath.Join(dir, "copy.db"))

	missing := filepath.Join(dir, "missing.db")
	if _, err := backend.Copy(context.Background(), missing, filepath.Join(dir, "x.db"), transfer.Options{}); err == nil {
		t.Error("copy from a missing file: nil error")
	}
	if _, err := os.Stat(missing); err == nil {
		t.Error("copy from a missing file created it")
	}
	if _, err := backend.Copy(context.Background(), from, from, transfer.Options{}); err == nil {
		t.Error("copy onto itself: nil error")
	}
}

func TestCopyStatesToPostgres(t *testing.T) {
	u := os.Getenv("PLUMB_TEST_POSTGRES")
	if u == "" {
		t.Skip("PLUMB_TEST_POSTGRES is not set: no PostgreSQL server to test against " +
			"(start a throwaway one with: eval \"$(testdata/pg/cluster.sh start)\")")
	}
	ctx := context.Background()
	b := make([]byte, 6)
	rand.Read(b)
	schema := "plumbtest_" + hex.EncodeToString(b)
	conn, err := pgx.Connect(ctx, u)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(ctx)
	if _, err := conn.Exec(ctx, "CREATE SCHEMA "+schema); err != nil {
		t.Fatal(err)
	}
	defer conn.Exec(ctx, "DROP SCHEMA "+schema+" CASCADE")
	from := filepath.Join(t.TempDir(), "plumb.db")
	writeHistory(t, from)
	sep := "?"
	if strings.Contains(u, "?") {
		sep = "&"
	}
	checkStateCopy(t, from, u+sep+"search_path="+schema)
}
