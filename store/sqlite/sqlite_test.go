package sqlite_test

import (
	"context"
	"path/filepath"
	"testing"

	"plumb/store"
	"plumb/store/sqlite"
	"plumb/store/storetest"
)

// openTemp opens a fresh database in t.TempDir and closes it at cleanup.
func openTemp(tb testing.TB, opts ...sqlite.Option) (*sqlite.DB, string) {
	tb.Helper()
	path := filepath.Join(tb.TempDir(), "history.db")
	db, err := sqlite.Open(context.Background(), path, opts...)
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() {
		if err := db.Close(); err != nil {
			tb.Error(err)
		}
	})
	return db, path
}

func TestConformance(t *testing.T) {
	storetest.Run(t, func(t *testing.T) store.Store {
		db, _ := openTemp(t)
		return db
	})
}

func TestDecisionsConformance(t *testing.T) {
	storetest.RunDecisions(t, func(t *testing.T) storetest.DecisionStore {
		db, _ := openTemp(t)
		return db
	})
}
