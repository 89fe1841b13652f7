package daemon

import (
	"context"
	"errors"
	"path/filepath"
	"testing"
	"time"

	"plumb/alerts"
	"plumb/store/sqlite"
)

// TestLedgerConflict: the store's revisions pass through the adapter, and
// a conditional write at a stale revision reaches the alerts package as
// alerts.ErrChanged, which makes the Manager read the alert again
// (alerts.TestAckBetweenReadAndWriteIsKept).
func TestLedgerConflict(t *testing.T) {
	ctx := context.Background()
	db, err := sqlite.Open(ctx, filepath.Join(t.TempDir(), "history.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	l := ledger{s: db}
	now := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	rec := alerts.AlertRecord{ID: "a1", Model: "cal", Kind: "drift", Subject: "cal", Severity: "warning",
		State: "open", FirstSeen: now, LastSeen: now, Doc: "{}", Revision: 1}
	if err := l.PutAlert(ctx, rec, nil); err != nil {
		t.Fatal(err)
	}
	if err := l.PutAlert(ctx, rec, nil); !errors.Is(err, alerts.ErrChanged) {
		t.Errorf("a stale conditional write: %v, want alerts.ErrChanged", err)
	}
	got, err := l.Alert(ctx, "a1")
	if err != nil || got.Revision != 1 {
		t.Fatalf("Alert = %+v, %v; want revision 1", got, err)
	}

}
