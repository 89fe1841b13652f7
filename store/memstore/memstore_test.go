package memstore_test

import (
	"context"
	"testing"

	"plumb/store"
	"plumb/store/memstore"
	"plumb/store/storetest"
)

func TestConformance(t *testing.T) {
	storetest.Run(t, func(t *testing.T) store.Store {
		s := memstore.New()
		t.Cleanup(func() { s.Close() })
		return s
	})
}

// TestCopies checks that the store neither keeps the caller's slices nor
// hands out its own.
func TestCopies(t *testing.T) {
	ctx := context.Background()
	s := memstore.New()
	vals := []float64{1, 2, 3}
	dfb := []float64{0.1, 0.2, 0.3}
	b := store.Batch{
		Source: store.Source{Model: "m", Path: "a.csv", Offset: 10, Line: 2},
		Observations: []store.Observation{{Line: 2, Raw: "1,2,3", Values: vals,
			Arrival: &store.Diagnostics{DFBETAS: dfb, Verdict: "ordinary"}}},
	}
	if _, err := s.Ingest(ctx, b); err != nil {
		t.Fatal(err)
	}
	vals[0], dfb[0] = 99, 99
	b.Observations[0].Arrival.Verdict = "changed"
	got, err := s.Observations(ctx, "m", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	if got[0].Values[0] != 1 || got[0].Arrival.DFBETAS[0] != 0.1 || got[0].Arrival.Verdict != "ordinary" {
		t.Errorf("store kept the caller's slices: %+v %+v", got[0], got[0].Arrival)
	}
	got[0].Values[1] = 99
	again, _ := s.Observations(ctx, "m", store.ObsQuery{})
	if again[0].Values[1] != 2 {
		t.Errorf("store handed out its own slice: %v", again[0].Values)
	}
}

func TestClosed(t *testing.T) {
	ctx := context.Background()
	s := memstore.New()
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Sources(ctx, "m"); err == nil {
		t.Error("Sources after Close: nil error")
	}
	if _, err := s.Ingest(ctx, store.Batch{Source: store.Source{Model: "m", Path: "a", Offset: 1}}); err == nil {
		t.Error("Ingest after Close: nil error")
	}
}

func TestDecisionsConformance(t *testing.T) {
	storetest.RunDecisions(t, func(t *testing.T) storetest.DecisionStore {
		s := memstore.New()
		t.Cleanup(func() { s.Close() })
		return s
	})
}
