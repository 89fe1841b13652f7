package sqlite_test

import (
	"context"
	"database/sql"
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"plumb/engine"
	"plumb/store"
	"plumb/store/sqlite"
)

func TestOpenMigratesFreshFile(t *testing.T) {
	db, _ := openTemp(t)
	ctx := context.Background()
	v, err := db.SchemaVersion(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if v != sqlite.LatestSchemaVersion() || v < 1 {
		t.Errorf("SchemaVersion = %d, want %d (>= 1)", v, sqlite.LatestSchemaVersion())
	}
	for _, table := range []string{"schema_version", "models", "sources", "observations", "quarantine", "fits",
		"verdict_changes", "model_states", "alerts", "deliveries"} {
		var n int
		if err := db.DB().QueryRowContext(ctx, "SELECT count(*) FROM sqlite_schema WHERE type = 'table' AND name = ?", table).Scan(&n); err != nil {
			t.Fatal(err)
		}
		if n != 1 {
			t.Errorf("table %s missing", table)
		}
	}
	// Every pooled connection gets the pragmas: hold several at once.
	var conns []interface{ Close() error }
	defer func() {
		for _, c := range conns {
			c.Close()
		}
	}()
	for i := range 3 {
		c, err := db.DB().Conn(ctx)
		if err != nil {
			t.Fatal(err)
		}
		conns = append(conns, c)
		for _, p := range []struct {
			pragma, want string
		}{{"journal_mode", "wal"}, {"synchronous", "1"}, {"foreign_keys", "1"}, {"busy_timeout", "5000"}} {
			var got string
			if err := c.QueryRowContext(ctx, "PRAGMA "+p.pragma).Scan(&got); err != nil {
				t.Fatal(err)
			}
			if got != p.want {
				t.Errorf("connection %d: PRAGMA %s = %s, want %s", i, p.pragma, got, p.want)
			}
		}
	}
}

func TestOpenBadPath(t *testing.T) {
	for _, p := range []string{"", ":memory:", "file:x.db", filepath.Join(t.TempDir(), "a?mode=ro")} {
		if db, err := sqlite.Open(context.Background(), p); err == nil {
			db.Close()
			t.Errorf("Open(%q) succeeded, want an error", p)
		}
	}
	if _, err := sqlite.Open(context.Background(), filepath.Join(t.TempDir(), "missing", "dir", "h.db")); err == nil ||
		!strings.Contains(err.Error(), "missing") {
		t.Errorf("Open in a missing directory: %v, want an error naming the path", err)
	}
}

func TestReopenKeepsData(t *testing.T) {
	ctx := context.Background()
	embedded, err := os.ReadDir("migrations")
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "history.db")
	db, err := sqlite.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	bt := newBatcher(50)
	b := bt.next()
	ids, err := db.Ingest(ctx, b)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := db.RecordFit(ctx, store.FitRecord{Model: "bench", N: 50, P: 3, Terms: []string{"intercept", "x1", "x2"},
		LastObsID: ids[49], Detail: "{}"}, []store.VerdictChange{{ObsID: ids[3], From: "ordinary", To: "notable", Flags: nil}}); err != nil {
		t.Fatal(err)
	}
	if err := db.PutAlert(ctx, store.AlertRecord{ID: "a1", Model: "bench", Kind: "suspect", Subject: "in/run.csv:5",
		State: "open", FirstSeen: time.Unix(5, 6), LastSeen: time.Unix(7, 8), Doc: "{}"},
		[]store.Delivery{{Route: "log", EventID: "e1", Payload: []byte("x")}}); err != nil {
		t.Fatal(err)
	}
	if err := db.Close(); err != nil {
		t.Fatal(err)
	}
	for round := range 2 {
		db, err = sqlite.Open(ctx, path)
		if err != nil {
			t.Fatalf("reopen %d: %v", round, err)
		}
		var migrations int
		if err := db.DB().QueryRowContext(ctx, "SELECT count(*) FROM schema_version").Scan(&migrations); err != nil {
			t.Fatal(err)
		}
		if migrations != len(embedded) {
			t.Errorf("reopen %d: %d migration records, want %d (applying must be idempotent)", round, migrations, len(embedded))
		}
		if n, err := db.CountObservations(ctx, "bench"); err != nil || n != 50 {
			t.Errorf("reopen %d: CountObservations = %d, %v; want 50", round, n, err)
		}
		if o, err := db.ObservationAt(ctx, "bench", "in/run.csv", b.Observations[10].Line); err != nil || o.ID != ids[10] ||
			o.Raw != b.Observations[10].Raw || !o.Time.Equal(b.Observations[10].Time) {
			t.Errorf("reopen %d: ObservationAt = %+v, %v", round, o, err)
		}
		if cur, err := db.CurrentVerdicts(ctx, "bench"); err != nil || cur[ids[3]] != "notable" {
			t.Errorf("reopen %d: CurrentVerdicts = %v, %v", round, cur, err)
		}
		if a, err := db.Alert(ctx, "a1"); err != nil || !a.FirstSeen.Equal(time.Unix(5, 6)) {
			t.Errorf("reopen %d: Alert = %+v, %v", round, a, err)
		}
		if _, err := db.Ingest(ctx, b); !errors.Is(err, store.ErrStale) {
			t.Errorf("reopen %d: the last batch again: %v, want ErrStale", round, err)
		}
		if err := db.Close(); err != nil {
			t.Fatal(err)
		}
	}
}

func TestOpenRefusesNewerSchema(t *testing.T) {
	ctx := context.Background()
	db, path := openTemp(t)
	future := sqlite.LatestSchemaVersion() + 1
	if _, err := db.DB().ExecContext(ctx, "INSERT INTO schema_version (version, name, applied_at) VALUES (?, 'future.sql', 0)", future); err != nil {
		t.Fatal(err)
	}
	db2, err := sqlite.Open(ctx, path)
	if err == nil {
		db2.Close()
		t.Fatal("Open of a newer schema succeeded")
	}
	if !errors.Is(err, sqlite.ErrSchemaTooNew) {
		t.Errorf("error %v does not wrap ErrSchemaTooNew", err)
	}
	for _, want := range []string{path, "upgrade"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q does not mention %q", err, want)
		}
	}
}

func TestBackup(t *testing.T) {
	ctx := context.Background()
	db, _ := openTemp(t)
	bt := newBatcher(200)
	for range 5 {
		if _, err := db.Ingest(ctx, bt.next()); err != nil {
			t.Fatal(err)
		}
	}
	dst := filepath.Join(t.TempDir(), "backup.db")
	if err := db.Backup(ctx, dst); err != nil {
		t.Fatal(err)
	}
	// The live database keeps working after the backup.
	if _, err := db.Ingest(ctx, bt.next()); err != nil {
		t.Fatal(err)
	}
	if err := db.Backup(ctx, dst); err == nil || !strings.Contains(err.Error(), "backup") {
		t.Errorf("Backup onto an existing file: %v, want an error", err)
	}
	bk, err := sqlite.Open(ctx, dst)
	if err != nil {
		t.Fatal(err)
	}
	defer bk.Close()
	if n, err := bk.CountObservations(ctx, "bench"); err != nil || n != 1000 {
		t.Errorf("backup holds %d observations, %v; want 1000", n, err)
	}
	src, err := bk.Sources(ctx, "bench")
	if err != nil || len(src) != 1 || src[0].Line != 1001 {
		t.Errorf("backup sources = %+v, %v; want line 1001", src, err)
	}
}

func TestIngestTimeOutOfRange(t *testing.T) {
	ctx := context.Background()
	db, _ := openTemp(t)
	b := newBatcher(3).next()
	b.Observations[1].Time = time.Date(1500, 1, 1, 0, 0, 0, 0, time.UTC)
	_, err := db.Ingest(ctx, b)
	if err == nil || !strings.Contains(err.Error(), "store: ingest bench/in/run.csv") || !strings.Contains(err.Error(), "line 3") {
		t.Fatalf("Ingest with a year-1500 time: %v, want an error naming the batch and line 3", err)
	}
	if n, _ := db.CountObservations(ctx, "bench"); n != 0 {
		t.Errorf("%d observations stored from a failed batch", n)
	}
}

// TestColumnEncoding checks the on-disk layout the package doc promises:
// values as a 8p-byte little-endian float64 BLOB, NaN diagnostics as NULL,
// no diagnostics as NULL verdict, times as unix nanoseconds.
func TestColumnEncoding(t *testing.T) {
	ctx := context.Background()
	db, _ := openTemp(t)
	b := newBatcher(2).next()
	b.Observations[0].Arrival.CooksDistance = math.NaN()
	b.Observations[0].Values = []float64{1, -2, math.NaN()}
	b.Observations[1].Arrival = nil
	ids, err := db.Ingest(ctx, b)
	if err != nil {
		t.Fatal(err)
	}
	var vals []byte
	var cooksNull, verdictNull bool
	var tns int64
	row := db.DB().QueryRowContext(ctx, "SELECT vals, cooks IS NULL, verdict IS NULL, t FROM observations WHERE id = ?", ids[0])
	if err := row.Scan(&vals, &cooksNull, &verdictNull, &tns); err != nil {
		t.Fatal(err)
	}
	want := []byte{0, 0, 0, 0, 0, 0, 0xf0, 0x3f, 0, 0, 0, 0, 0, 0, 0, 0xc0} // 1.0, -2.0 little-endian (IEEE 754)
	if len(vals) != 24 || string(vals[:16]) != string(want) || !math.IsNaN(math.Float64frombits(leUint64(vals[16:]))) {
		t.Errorf("vals blob = % x, want 24 bytes starting % x then a NaN", vals, want)
	}
	if !cooksNull || verdictNull {
		t.Errorf("cooks IS NULL = %v, verdict IS NULL = %v; want true, false", cooksNull, verdictNull)
	}
	if tns != b.Observations[0].Time.UnixNano() {
		t.Errorf("t = %d, want %d", tns, b.Observations[0].Time.UnixNano())
	}
	if err := db.DB().QueryRowContext(ctx, "SELECT verdict IS NULL, leverage IS NULL FROM observations WHERE id = ?", ids[1]).
		Scan(&verdictNull, &cooksNull); err != nil {
		t.Fatal(err)
	}
	if !verdictNull || !cooksNull {
		t.Error("an observation without arrival diagnostics has non-NULL diagnostic columns")
	}
}

func leUint64(b []byte) uint64 {
	var x uint64
	for i := 7; i >= 0; i-- {
		x = x<<8 | uint64(b[i])
	}
	return x
}

func TestIngestDuplicateLineNamesIt(t *testing.T) {
	ctx := context.Background()
	db, _ := openTemp(t)
	bt := newBatcher(3)
	b := bt.next()
	if _, err := db.Ingest(ctx, b); err != nil {
		t.Fatal(err)
	}
	again := bt.next()
	again.Observations[2].Line = b.Observations[0].Line // already stored under the same generation
	_, err := db.Ingest(ctx, again)
	if err == nil || errors.Is(err, store.ErrStale) || !strings.Contains(err.Error(), "already stored") ||
		!strings.Contains(err.Error(), "store: ingest bench/in/run.csv") {
		t.Errorf("Ingest of a stored line: %v, want an error naming the batch and the duplicate", err)
	}
}

// TestMigrateAlertRevision: a database made at schema version 1 (no alert
// revisions) opens at the latest version; its alerts read as revision 0,
// and the first conditional write (revision 1) goes through once.
func TestMigrateAlertRevision(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "v1.db")
	init, err := os.ReadFile(filepath.Join("migrations", "0001_init.sql"))
	if err != nil {
		t.Fatal(err)
	}
	raw, err := sql.Open("sqlite", path)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{
		`CREATE TABLE schema_version (version INTEGER PRIMARY KEY, name TEXT NOT NULL, applied_at INTEGER NOT NULL)`,
		string(init),
		`INSERT INTO schema_version VALUES (1, '0001_init.sql', 0)`,
		`INSERT INTO alerts (id, model, kind, subject, severity, state, first_seen, last_seen, doc)
			VALUES ('old', 'cal', 'drift', 'cal', 'warning', 'open', 1, 2, '{}')`,
	} {
		if _, err := raw.ExecContext(ctx, q); err != nil {
			t.Fatalf("build a version 1 database: %v", err)
		}
	}
	raw.Close()
	db, err := sqlite.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if v, err := db.SchemaVersion(ctx); err != nil || v != sqlite.LatestSchemaVersion() {
		t.Fatalf("SchemaVersion = %d, %v; want %d", v, err, sqlite.LatestSchemaVersion())
	}
	a, err := db.Alert(ctx, "old")
	if err != nil || a.Revision != 0 || a.State != "open" {
		t.Fatalf("migrated alert = %+v, %v; want it at revision 0", a, err)
	}
	a.State, a.Revision = "acknowledged", 1
	if err := db.PutAlert(ctx, a, nil); err != nil {
		t.Fatalf("first conditional write: %v", err)
	}
	if err := db.PutAlert(ctx, a, nil); !errors.Is(err, store.ErrChanged) {
		t.Errorf("the same write again: %v, want ErrChanged", err)
	}
}

// TestFlagsColumn checks the flags column: a JSON array of objects
// (measure, family, term, value, cutoff) with null for NaN and "+Inf" or
// "-Inf" for the infinities, and that text written by earlier versions
// (undefined values written as 0) still reads.
func TestFlagsColumn(t *testing.T) {
	ctx := context.Background()
	db, _ := openTemp(t)
	b := newBatcher(2).next()
	b.Observations[0].Arrival.Flags = []engine.Flag{
		{Measure: engine.MeasureDFBETAS, Family: engine.FamilySizeAdjusted, Term: "dp", Value: 0.75, Cutoff: 0.5},
		{Measure: engine.MeasureCOVRATIO, Family: engine.FamilyAbsolute, Value: math.Inf(1), Cutoff: math.NaN()},
	}
	ids, err := db.Ingest(ctx, b)
	if err != nil {
		t.Fatal(err)
	}
	var text string
	if err := db.DB().QueryRowContext(ctx, "SELECT flags FROM observations WHERE id = ?", ids[0]).Scan(&text); err != nil {
		t.Fatal(err)
	}
	want := `[{"measure":"dfbetas","family":"size_adjusted","term":"dp","value":0.75,"cutoff":0.5},{"measure":"covratio","family":"absolute","value":"+Inf","cutoff":null}]`
	if text != want {
		t.Errorf("flags column = %s\nwant %s", text, want)
	}
	// As an earlier version wrote it: no term key, 0 for an undefined value.
	old := `[{"measure":"leverage","family":"absolute","value":0,"cutoff":0.667},{"measure":"outlier_p_bonferroni","family":"test","value":0.001,"cutoff":0.05}]`
	if _, err := db.DB().ExecContext(ctx, "UPDATE observations SET flags = ? WHERE id = ?", old, ids[0]); err != nil {
		t.Fatal(err)
	}
	got, err := db.Observations(ctx, b.Source.Model, store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	wantFlags := []engine.Flag{
		{Measure: engine.MeasureLeverage, Family: engine.FamilyAbsolute, Value: 0, Cutoff: 0.667},
		{Measure: engine.MeasureBonferroni, Family: engine.FamilyTest, Value: 0.001, Cutoff: 0.05},
	}
	if len(got) < 1 || got[0].Arrival == nil || !slices.Equal(got[0].Arrival.Flags, wantFlags) {
		t.Errorf("flags read back = %+v, want %+v", got[0].Arrival, wantFlags)
	}
	if _, err := db.DB().ExecContext(ctx, "UPDATE observations SET flags = ? WHERE id = ?", `[{"measure":`, ids[0]); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Observations(ctx, b.Source.Model, store.ObsQuery{}); err == nil {
		t.Error("a malformed flags column read without an error")
	}
}

// TestMigrateSourceDigest: a source saved before schema version 3 (no
// digest) reads back with an empty digest and its position intact, and
// the next batch stores one.
func TestMigrateSourceDigest(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "v2.db")
	raw, err := sql.Open("sqlite", path)
	if err != nil {
		t.Fatal(err)
	}
	qs := []string{`CREATE TABLE schema_version (version INTEGER PRIMARY KEY, name TEXT NOT NULL, applied_at INTEGER NOT NULL)`}
	for _, name := range []string{"0001_init.sql", "0002_alert_revision.sql"} {
		b, err := os.ReadFile(filepath.Join("migrations", name))
		if err != nil {
			t.Fatal(err)
		}
		qs = append(qs, string(b))
	}
	qs = append(qs,
		`INSERT INTO schema_version VALUES (1, '0001_init.sql', 0), (2, '0002_alert_revision.sql', 0)`,
		`INSERT INTO models (id, name) VALUES (1, 'cal')`,
		`INSERT INTO sources (model_id, path, generation, inode, size, read_offset, line, fingerprint, fingerprint_len,
			header, rows_total, quarantined, updated_at) VALUES (1, 'a.csv', 0, 7, 40, 40, 4, 'ff', 40, 'x', 3, 0, 1)`)
	for _, q := range qs {
		if _, err := raw.ExecContext(ctx, q); err != nil {
			t.Fatalf("build a version 2 database: %v", err)
		}
	}
	raw.Close()
	db, err := sqlite.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	src, err := db.Sources(ctx, "cal")
	if err != nil || len(src) != 1 {
		t.Fatalf("Sources = %+v, %v", src, err)
	}
	if s := src[0]; s.Offset != 40 || s.Line != 4 || len(s.Digest) != 0 {
		t.Errorf("migrated source %+v; want offset 40, line 4, no digest", s)
	}
	s := src[0]
	s.Offset, s.Line, s.Digest = 50, 5, []byte("state")
	if _, err := db.Ingest(ctx, store.Batch{Source: s}); err != nil {
		t.Fatal(err)
	}
	if src, _ := db.Sources(ctx, "cal"); string(src[0].Digest) != "state" {
		t.Errorf("digest after a batch %q", src[0].Digest)
	}
}

// TestMigrateFillsGaps: a migration whose number is below one already
// applied (numbers are handed out to changes made side by side, and 0006
// may be applied before 0004 exists) is applied when it is missing.
func TestMigrateFillsGaps(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "history.db")
	db, err := sqlite.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	// Undo 0003 (the sources' digest) by hand, as if this database had
	// been migrated by a binary that had 0006 and not 0003.
	for _, q := range []string{"ALTER TABLE sources DROP COLUMN digest", "DELETE FROM schema_version WHERE version = 3"} {
		if _, err := db.DB().ExecContext(ctx, q); err != nil {
			t.Fatal(err)
		}
	}
	db.Close()
	db, err = sqlite.Open(ctx, path)
	if err != nil {
		t.Fatalf("reopen: %v", err)
	}
	defer db.Close()
	var n int
	if err := db.DB().QueryRowContext(ctx, "SELECT count(*) FROM schema_version WHERE version = 3").Scan(&n); err != nil || n != 1 {
		t.Errorf("0003 recorded %d times (%v), want once", n, err)
	}
	if _, err := db.DB().ExecContext(ctx, "SELECT digest FROM sources"); err != nil {
		t.Errorf("0003 not applied again: %v", err)
	}
}

// TestMigrationBelowTheLatestIsApplied: branches merge in any order, so a
// database may record a later migration before an earlier one exists;
// opening it applies the missing one. Here migration 0003 (the source's
// digest) is taken out of a database that records later ones, as if it
// had been made by a build that lacked 0003.
func TestMigrationBelowTheLatestIsApplied(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "gap.db")
	db, err := sqlite.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{
		"DELETE FROM schema_version WHERE version = 3",
		"ALTER TABLE sources DROP COLUMN digest",
	} {
		if _, err := db.DB().ExecContext(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	var latest int
	if err := db.DB().QueryRowContext(ctx, "SELECT MAX(version) FROM schema_version").Scan(&latest); err != nil || latest <= 3 {
		t.Fatalf("latest recorded version %d (%v): the test needs one above 3", latest, err)
	}
	db.Close()
	db, err = sqlite.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	var n int
	if err := db.DB().QueryRowContext(ctx, "SELECT count(*) FROM schema_version WHERE version = 3").Scan(&n); err != nil || n != 1 {
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
