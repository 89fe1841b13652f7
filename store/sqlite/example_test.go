package sqlite_test

import (
	"context"
	"errors"
	"fmt"
	"log"
	"os"
	"path/filepath"

	"plumb/store"
	"plumb/store/sqlite"
)

// A batch and the read position it reaches commit together; delivering the
// same batch again stores nothing.
func ExampleOpen() {
	dir, err := os.MkdirTemp("", "plumb-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	ctx := context.Background()
	db, err := sqlite.Open(ctx, filepath.Join(dir, "history.db"))
	if err != nil {
		log.Fatal(err)
	}
	defer db.Close()

	b := store.Batch{
		Source: store.Source{Model: "flow", Path: "bench/run1.csv", Generation: 1, Offset: 48, Line: 3},
		Observations: []store.Observation{
			{Line: 2, Raw: "1.20,0.31", Values: []float64{1.20, 0.31}},
			{Line: 3, Raw: "1.45,0.47", Values: []float64{1.45, 0.47}},
		},
	}
	ids, err := db.Ingest(ctx, b)
	fmt.Println(ids, err)
	_, err = db.Ingest(ctx, b)
	fmt.Println(errors.Is(err, store.ErrStale))
	n, _ := db.CountObservations(ctx, "flow")
	o, _ := db.ObservationAt(ctx, "flow", "bench/run1.csv", 3)
	fmt.Println(n, o.ID, o.Raw, o.Values)
	// Output:
	// [1 2] <nil>
	// true
	// 2 2 1.45,0.47 [1.45 0.47]
}
