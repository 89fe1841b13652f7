package postgres_test

import (
	"context"
	"fmt"
	"testing"
	"time"

	"plumb/store"
)

func TestPostgresClaimRouteDeliveries(t *testing.T) {
	db, _ := openTemp(t)
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	now := time.Date(2026, 3, 14, 12, 0, 0, 0, time.UTC)
	for a := range 5 {
		ds := []store.Delivery{
			{Route: "bench-file", EventID: fmt.Sprintf("e%d", a), Payload: []byte("{}"), NextAttempt: now},
			{Route: "line-hook", EventID: fmt.Sprintf("e%d", a), Payload: []byte("{}"), NextAttempt: now},
		}
		rec := store.AlertRecord{ID: fmt.Sprintf("a%d", a), Model: "cal", Kind: "drift", Subject: "x", Severity: "warning",
			State: "open", FirstSeen: now, LastSeen: now, Doc: "{}"}
		if err := db.PutAlert(ctx, rec, ds); err != nil {
			t.Fatal(err)
		}
	}
	if ds, err := db.ClaimRouteDeliveries(ctx, now, 0, time.Hour, nil); err != nil || len(ds) != 0 {
		t.Fatalf("no routes: claimed %d, %v; want none", len(ds), err)
	}
	ds, err := db.ClaimRouteDeliveries(ctx, now, 0, time.Hour, []string{"bench-file", "not-there"})
	if err != nil {
		t.Fatal(err)
	}
	if len(ds) != 5 {
		t.Fatalf("claimed %d deliveries of bench-file, want 5", len(ds))
	}
	for _, d := range ds {
		if d.Route != "bench-file" {
			t.Errorf("claimed a delivery of route %q", d.Route)
		}
	}
	// Claimed ones are held; the other route's are still due.
	if again, err := db.ClaimRouteDeliveries(ctx, now, 0, time.Hour, []string{"bench-file"}); err != nil || len(again) != 0 {
		t.Errorf("second claim of bench-file: %d, %v; want none while held", len(again), err)
	}
	if other, err := db.ClaimDeliveries(ctx, now, 0, time.Hour); err != nil || len(other) != 5 {
		t.Errorf("claim of the rest: %d, %v; want line-hook's 5", len(other), err)
	}
}
