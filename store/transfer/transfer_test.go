package transfer_test

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"plumb/engine"
	"plumb/store"
	"plumb/store/postgres"
	"plumb/store/sqlite"
	"plumb/store/transfer"
)

var t0 = time.Date(2026, 3, 14, 9, 26, 53, 589793238, time.UTC)

func openSQLite(t *testing.T) *sqlite.DB {
	t.Helper()
	db, err := sqlite.Open(context.Background(), filepath.Join(t.TempDir(), "plumb.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db
}

// openPostgres opens an empty history in a fresh schema of the test
// server, or skips.
func openPostgres(t *testing.T) *postgres.DB {
	t.Helper()
	u := os.Getenv("PLUMB_TEST_POSTGRES")
	if u == "" {
		t.Skip("PLUMB_TEST_POSTGRES is not set: no PostgreSQL server to test against " +
			"(start a throwaway one with: eval \"$(testdata/pg/cluster.sh start)\")")
	}
	b := make([]byte, 6)
	rand.Read(b)
	schema := "plumbtest_" + hex.EncodeToString(b)
	t.Cleanup(func() {
		ctx := context.Background()
		conn, err := pgx.Connect(ctx, u)
		if err != nil {
			t.Errorf("drop schema: %v", err)
			return
		}
		defer conn.Close(ctx)
		if _, err := conn.Exec(ctx, "DROP SCHEMA IF EXISTS "+schema+" CASCADE"); err != nil {
			t.Errorf("drop schema: %v", err)
		}
	})
	db, err := postgres.Open(context.Background(), u, postgres.WithSchema(schema))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db
}

// flags returns n crossed cutoffs in the store's form of flags (the
// only place these tests depend on it).
func flags(n int) []engine.Flag {
	if n == 0 {
		return nil
	}
	return []engine.Flag{{Measure: engine.MeasureLeverage, Family: engine.FamilyAbsolute, Value: float64(n), Cutoff: 0.5}}
}

// fill writes a history with two models, a rotated file (two
// generations), quarantined rows, fits with verdict changes, states,
// alerts and an outbox in every state.
func fill(t *testing.T, s store.Store) {
	t.Helper()
	ctx := context.Background()
	obs := func(line int, arrival bool) store.Observation {
		o := store.Observation{Line: line, Raw: fmt.Sprintf("%d,%d.5,caf\xe9", line, line),
			Values: []float64{float64(line) + 0.5, float64(line % 7), math.NaN()},
			Time:   t0.Add(time.Duration(line) * time.Second), ArrivedAt: t0.Add(time.Duration(line)*time.Second + 3)}
		if line%4 == 0 {
			o.Label = fmt.Sprintf("SN-%d caf\xe9", line) // the id column's text, any bytes
		}
		if arrival {
			o.Arrival = &store.Diagnostics{Leverage: 0.1, Residual: -0.5, StudentizedInternal: 1.25,
				StudentizedExternal: math.NaN(), CooksDistance: 0.01, DFFITS: math.Inf(1),
				DFBETAS: []float64{0.1, -0.2, 0.3}, COVRATIO: 1.02, OutlierPBonferroni: 1,
				Verdict: "ordinary", Flags: flags(0)}
		}
		return o
	}
	src := func(model, path string, gen int, off int64, line int) store.Source {
		return store.Source{Model: model, Path: path, Generation: gen, Inode: 77, Size: off + 5, Offset: off, Line: line,
			Fingerprint: "abc", FingerprintLen: 64, Header: "y\x1fx1\x1fx2", UpdatedAt: t0.Add(time.Duration(off))}
	}
	ingest := func(b store.Batch) []int64 {
		t.Helper()
		ids, err := s.Ingest(ctx, b)
		if err != nil {
			t.Fatal(err)
		}
		return ids
	}
	var ids []int64
	// Line "cal": a.csv generation 1 lines 2..40 in 4 batches, rotated to
	// generation 2 lines 2..9; b.csv with only quarantined rows.
	for k := range 4 {
		b := store.Batch{Source: src("cal", "a.csv", 1, int64(100*(k+1)), 11+10*k)}
		for l := 2 + 10*k; l <= 11+10*k && l <= 40; l++ {
			b.Observations = append(b.Observations, obs(l, l%3 != 0))
		}
		if k == 1 {
			b.Quarantine = []store.QuarantineRow{{Line: 15, Column: 2, Raw: "15,x", Reason: "not a number", At: t0}}
			b.Missing = 4 // rows left out for a missing value
		}
		ids = append(ids, ingest(b)...)
	}
	b := store.Batch{Source: src("cal", "a.csv", 2, 90, 9), Missing: 1,
		Quarantine: []store.QuarantineRow{{Line: 5, Column: 1, Raw: "", Reason: "empty field", At: t0.Add(time.Hour)}}}
	for l := 2; l <= 9; l++ {
		b.Observations = append(b.Observations, obs(l, true))
	}
	ids = append(ids, ingest(b)...)
	ingest(store.Batch{Source: src("cal", "b.csv", 1, 20, 3),
		Quarantine: []store.QuarantineRow{{Line: 2, Column: 3, Raw: "\x00", Reason: "binary", At: t0}}})
	// Line "press": one file, and a model with a state only.
	var pids []int64
	for k := range 3 {
		b := store.Batch{Source: src("press", "p.csv", 1, int64(50*(k+1)), 6+5*k)}
		for l := 2 + 5*k; l <= 6+5*k; l++ {
			b.Observations = append(b.Observations, obs(l, true))
		}
		pids = append(pids, ingest(b)...)
	}
	for i, f := range []struct {
		model string
		last  int64
		ch    []store.VerdictChange
	}{
		{"cal", ids[20], []store.VerdictChange{{ObsID: ids[3], From: "ordinary", To: "outlier", Flags: flags(1)}}},
		{"press", pids[9], nil},
		{"cal", ids[len(ids)-1], []store.VerdictChange{
			{ObsID: ids[3], From: "outlier", To: "ordinary", Flags: flags(0), At: t0.Add(time.Minute)},
			{ObsID: ids[40], From: "ordinary", To: "suspect", Flags: flags(2)}}},
	} {
		fr := store.FitRecord{Model: f.model, At: t0.Add(time.Duration(i) * time.Hour), N: 30 + i, P: 3,
			Terms: []string{"intercept", "x1", "x2"}, Estimates: []float64{1, 2, 3}, StdErrors: []float64{0.1, 0.2, math.NaN()},
			Sigma: 0.5, RSquared: 0.9, Fragility: -1, FragilityK: 3, Detail: `{"k":1}`, LastObsID: f.last}
		if _, err := s.RecordFit(ctx, fr, f.ch); err != nil {
			t.Fatal(err)
		}
	}
	for _, st := range []store.ModelState{
		{Model: "cal", State: "judging", At: t0}, {Model: "press", State: "waiting", Reason: "2 of 4 rows", At: t0},
		{Model: "idle", State: "blocked", Reason: "folder missing", At: t0},
	} {
		if err := s.SetModelState(ctx, st); err != nil {
			t.Fatal(err)
		}
	}
	for i, a := range []store.AlertRecord{
		{ID: "cal/suspect/a.csv:4", Model: "cal", Kind: "suspect", Subject: "a.csv:4", Severity: "warning", State: "resolved",
			FirstSeen: t0, LastSeen: t0.Add(time.Hour), Doc: `{"n":1}`},
		{ID: "press/drift/x1", Model: "press", Kind: "drift", Subject: "x1", Severity: "critical", State: "open",
			FirstSeen: t0.Add(time.Minute), LastSeen: t0.Add(2 * time.Hour), Doc: `{"n":2}`},
	} {
		ds := []store.Delivery{
			{Route: "hook", EventID: fmt.Sprintf("e%d", i), Payload: []byte(`{"e":1}`), State: store.DeliveryDelivered, Attempts: 1, CreatedAt: t0},
			{Route: "log", EventID: fmt.Sprintf("e%d", i), Payload: []byte("x"), State: store.DeliveryPending, NextAttempt: t0.Add(time.Hour), CreatedAt: t0},
			{Route: "cmd", EventID: "", Payload: []byte{0, 1}, State: store.DeliveryDead, Attempts: 8, LastError: "exit 1", CreatedAt: t0.Add(time.Duration(i))},
		}
		if err := s.PutAlert(ctx, a, ds); err != nil {
			t.Fatal(err)
		}
	}
}

// dump is a history in a form that does not depend on ids.
func dump(t *testing.T, s store.Store) string {
	t.Helper()
	ctx := context.Background()
	models, err := s.(transfer.ModelLister).Models(ctx)
	if err != nil {
		t.Fatal(err)
	}
	out := fmt.Sprintf("models %v\n", models)
	for _, m := range models {
		srcs, err := s.Sources(ctx, m)
		if err != nil {
			t.Fatal(err)
		}
		for _, x := range srcs {
			x.UpdatedAt = x.UpdatedAt.UTC()
			out += fmt.Sprintf("source %+v\n", x)
		}
		os, err := s.Observations(ctx, m, store.ObsQuery{})
		if err != nil {
			t.Fatal(err)
		}
		line := map[int64]string{}
		for _, o := range os {
			line[o.ID] = fmt.Sprintf("%s:%d:%d", o.Path, o.Generation, o.Line)
			a := "none"
			if o.Arrival != nil {
				a = fmt.Sprintf("%+v", *o.Arrival)
			}
			out += fmt.Sprintf("obs %s %q %q %v %v %v %s\n", line[o.ID], o.Raw, o.Label, o.Values, o.Time, o.ArrivedAt, a)
			cs, err := s.VerdictChanges(ctx, o.ID)
			if err != nil {
				t.Fatal(err)
			}
			for _, c := range cs {
				out += fmt.Sprintf("  change %v %s->%s %v\n", c.At, c.From, c.To, c.Flags)
			}
		}
		q, err := s.Quarantined(ctx, m, 0, 0)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range q {
			out += fmt.Sprintf("quarantine %s:%d:%d:%d %q %s %v\n", r.Path, r.Generation, r.Line, r.Column, r.Raw, r.Reason, r.At)
		}
		fits, err := s.Fits(ctx, m, 0, 0)
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range fits {
			last := line[f.LastObsID]
			f.ID, f.LastObsID = 0, 0
			out += fmt.Sprintf("fit %+v last %s\n", f, last)
		}
	}
	st, err := s.ModelStates(ctx)
	if err != nil {
		t.Fatal(err)
	}
	out += fmt.Sprintf("states %+v\n", st)
	as, err := s.Alerts(ctx, store.AlertQuery{})
	if err != nil {
		t.Fatal(err)
	}
	for _, a := range as {
		a.Revision = 0
		out += fmt.Sprintf("alert %+v\n", a)
	}
	ds, err := s.Deliveries(ctx, "", 0)
	if err != nil {
		t.Fatal(err)
	}
	slices.Reverse(ds)
	for _, d := range ds {
		d.ID = 0
		out += fmt.Sprintf("delivery %+v\n", d)
	}
	return out
}

func checkCopy(t *testing.T, src, dst store.Store) {
	t.Helper()
	ctx := context.Background()
	rep, err := transfer.Copy(ctx, src, dst, transfer.Options{BatchRows: 7})
	if err != nil {
		t.Fatal(err)
	}
	want := dump(t, src)
	if got := dump(t, dst); got != want {
		t.Fatalf("the copy differs from the source:\n--- source\n%s\n--- copy\n%s", want, got)
	}
	counts := map[string][4]int64{}
	for _, m := range rep.Models {
		counts[m.Model] = [4]int64{m.Observations, m.Quarantined, m.Fits, m.VerdictChanges}
		if m.CopiedObservations != m.Observations || m.CopiedQuarantined != m.Quarantined || m.CopiedFits != m.Fits {
			t.Errorf("first copy of %s wrote %d/%d/%d of %d/%d/%d", m.Model, m.CopiedObservations, m.CopiedQuarantined,
				m.CopiedFits, m.Observations, m.Quarantined, m.Fits)
		}
	}
	wantCounts := map[string][4]int64{"cal": {47, 3, 2, 3}, "press": {15, 0, 1, 0}, "idle": {}}
	for m, c := range wantCounts {
		if counts[m] != c {
			t.Errorf("counts of %s = %v, want %v", m, counts[m], c)
		}
	}
	if rep.Alerts != 2 || rep.Deliveries != 6 || rep.CopiedAlerts != 2 || rep.CopiedDeliveries != 6 {
		t.Errorf("alerts %d/%d copied, deliveries %d/%d", rep.CopiedAlerts, rep.Alerts, rep.CopiedDeliveries, rep.Deliveries)
	}

	// Again: nothing is written, the counts are verified again.
	again, err := transfer.Copy(ctx, src, dst, transfer.Options{BatchRows: 7})
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range again.Models {
		if m.CopiedObservations+m.CopiedQuarantined+m.CopiedFits != 0 {
			t.Errorf("second copy of %s wrote %+v", m.Model, m)
		}
	}
	if again.CopiedAlerts+again.CopiedDeliveries != 0 {
		t.Errorf("second copy wrote %d alerts and %d deliveries", again.CopiedAlerts, again.CopiedDeliveries)
	}
	if got := dump(t, dst); got != want {
		t.Fatalf("after a second copy the target differs from the source:\n--- source\n%s\n--- copy\n%s", want, got)
	}

	// A daemon pointed at the copy resumes at the stored read position:
	// the last batch again is stale, the next one goes in.
	srcs, _ := dst.Sources(ctx, "press")
	last := srcs[0]
	stale := store.Batch{Source: last, Observations: []store.Observation{{Line: 17, Raw: "17"}}}
	if _, err := dst.Ingest(ctx, stale); !errors.Is(err, store.ErrStale) {
		t.Errorf("a batch at the copied read position: %v, want ErrStale", err)
	}
	next := stale
	next.Source.Offset += 10
	if _, err := dst.Ingest(ctx, next); err != nil {
		t.Errorf("the next batch after the copy: %v", err)
	}
}

func TestCopySQLiteToPostgres(t *testing.T) {
	src := openSQLite(t)
	fill(t, src)
	checkCopy(t, src, openPostgres(t))
}

func TestCopySQLiteToSQLite(t *testing.T) {
	src := openSQLite(t)
	fill(t, src)
	checkCopy(t, src, openSQLite(t))
}

func TestCopyPostgresToSQLite(t *testing.T) {
	src := openPostgres(t)
	fill(t, src)
	checkCopy(t, src, openSQLite(t))
}

// failing fails every Ingest after the first n.
type failing struct {
	store.Store
	n int
}

var errInjected = errors.New("injected failure")

func (f *failing) Ingest(ctx context.Context, b store.Batch) ([]int64, error) {
	if f.n <= 0 {
		return nil, errInjected
	}
	f.n--
	return f.Store.Ingest(ctx, b)
}

// TestCopyResumes: a copy interrupted after any number of batches,
// run again, gives the same history as an uninterrupted one.
func TestCopyResumes(t *testing.T) {
	src := openSQLite(t)
	fill(t, src)
	want := dump(t, src)
	for n := range 12 {
		t.Run(fmt.Sprintf("after %d batches", n), func(t *testing.T) {
			dst := openSQLite(t)
			if _, err := transfer.Copy(context.Background(), src, &failing{Store: dst, n: n}, transfer.Options{BatchRows: 7}); !errors.Is(err, errInjected) {
				t.Fatalf("interrupted copy: %v, want the injected failure", err)
			}
			if _, err := transfer.Copy(context.Background(), src, dst, transfer.Options{BatchRows: 7}); err != nil {
				t.Fatal(err)
			}
			if got := dump(t, dst); got != want {
				t.Fatalf("resumed copy differs:\n--- source\n%s\n--- copy\n%s", want, got)
			}
		})
	}
}

// TestCopyRefusesAnotherHistory: a target that holds other rows of the
// same model and file is not mixed with the source's.
func TestCopyRefusesAnotherHistory(t *testing.T) {
	src := openSQLite(t)
	fill(t, src)
	dst := openSQLite(t)
	b := store.Batch{Source: store.Source{Model: "cal", Path: "a.csv", Generation: 3, Offset: 10},
		Observations: []store.Observation{{Line: 2, Raw: "other"}}}
	if _, err := dst.Ingest(context.Background(), b); err != nil {
		t.Fatal(err)
	}
	if _, err := transfer.Copy(context.Background(), src, dst, transfer.Options{}); !errors.Is(err, transfer.ErrMismatch) {
		t.Errorf("copy onto another history: %v, want ErrMismatch", err)
	}
}

// Both backends list their models and a model's verdict changes.
var (
	_ transfer.ModelLister  = (*sqlite.DB)(nil)
	_ transfer.ModelLister  = (*postgres.DB)(nil)
	_ transfer.ChangeLister = (*sqlite.DB)(nil)
	_ transfer.ChangeLister = (*postgres.DB)(nil)
)
