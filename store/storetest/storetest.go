// Package storetest is the conformance suite every store.Store backend
// must pass. A backend's test calls Run with a function that opens a
// fresh, empty store:
//
//	func TestConformance(t *testing.T) {
//		storetest.Run(t, func(t *testing.T) store.Store {
//			db, err := sqlite.Open(context.Background(), filepath.Join(t.TempDir(), "h.db"))
//			if err != nil {
//				t.Fatal(err)
//			}
//			t.Cleanup(func() { db.Close() })
//			return db
//		})
//	}
//
// The suite checks the behaviour the rest of plumb relies on: exactly-once
// ingest (store.ErrStale on a batch that does not advance the read
// position, generations after a rotation, atomicity of a failed batch),
// exact round-trips of values, diagnostics (NaN included) and times,
// pagination (and the latest-n reads, which must agree with it),
// store.ErrNotFound, the alert upsert keeping FirstSeen, the
// outbox ordering, and use from several goroutines (run it under -race).
//
// A backend that also implements store.Decisions calls RunDecisions the
// same way (decisions.go): decisions and their audit records, the hash
// chain pinned to fixed values, refusals that store nothing.
package storetest

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"sync"
	"testing"
	"time"

	"plumb/engine"
	"plumb/store"
)

// Opener returns a fresh, empty store; it registers its own cleanup.
type Opener func(t *testing.T) store.Store

// Run runs every conformance test against stores made by open, each test
// on its own store.
func Run(t *testing.T, open Opener) {
	tests := []struct {
		name string
		fn   func(t *testing.T, s store.Store)
	}{
		{"IngestSources", testIngestSources},
		{"SourceDigest", testSourceDigest},
		{"IngestStale", testIngestStale},
		{"IngestGenerations", testIngestGenerations},
		{"IngestAtomic", testIngestAtomic},
		{"ObservationRoundTrip", testObservationRoundTrip},
		{"ObservationsPagination", testObservationsPagination},
		{"ObservationAt", testObservationAt},
		{"Quarantine", testQuarantine},
		{"LatestQuarantined", testLatestQuarantined},
		{"Fits", testFits},
		{"LatestFits", testLatestFits},
		{"VerdictChanges", testVerdictChanges},
		{"RecordFitAtomic", testRecordFitAtomic},
		{"ModelStates", testModelStates},
		{"AlertUpsert", testAlertUpsert},
		{"AlertRevisions", testAlertRevisions},
		{"AlertsQuery", testAlertsQuery},
		{"Outbox", testOutbox},
		{"Concurrent", testConcurrent},
		{"ConcurrentSameBatch", testConcurrentSameBatch},
		{"CancelledContext", testCancelledContext},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			tt.fn(t, open(t))
		})
	}
}

// t0 is a fixed reference time with a nanosecond part and a non-UTC zone,
// so a backend that drops either fails.
var t0 = time.Date(2026, 3, 14, 9, 26, 53, 589793238, time.FixedZone("UTC+2", 2*3600))

func ctxT(t *testing.T) context.Context {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// source returns a source state for model/path at generation gen and offset off.
func source(model, path string, gen int, off int64, line int) store.Source {
	return store.Source{
		Model: model, Path: path, Generation: gen,
		Inode: 1<<63 + 12345, Size: off + 100, Offset: off, Line: line,
		Fingerprint: "f00d", FingerprintLen: 64, Header: "y\x1fx1\x1fx2",
		Digest:    []byte(fmt.Sprintf("digest\x00%d", off)),
		UpdatedAt: t0.Add(time.Duration(off) * time.Millisecond),
	}
}

// obs returns an observation of line with p = 3 values and arrival
// diagnostics (nil when withArrival is false).
func obs(line int, withArrival bool) store.Observation {
	o := store.Observation{
		Line:      line,
		Raw:       fmt.Sprintf("%d.5,%d,%d", line, line*2, line%7),
		Values:    []float64{float64(line) + 0.5, float64(line * 2), float64(line % 7)},
		Time:      t0.Add(time.Duration(line) * time.Second),
		ArrivedAt: t0.Add(time.Duration(line)*time.Second + 7),
	}
	if line%2 == 0 {
		o.Label = fmt.Sprintf("SN-%04d", line) // the row's id column
	}
	if withArrival {
		o.Arrival = &store.Diagnostics{
			Leverage: 0.1 + float64(line)/1000, Residual: -0.25, StudentizedInternal: 1.5,
			StudentizedExternal: 1.6, CooksDistance: 0.01, DFFITS: 0.3,
			DFBETAS: []float64{0.1, -0.2, 0.3}, COVRATIO: 1.02, OutlierPBonferroni: 1,
			Verdict: engine.WordOrdinary, Flags: nil,
		}
	}
	return o
}

// batch builds a batch of lines first..last (inclusive) for model/path at
// generation gen; the offset is 10 bytes per line.
func batch(model, path string, gen, first, last int) store.Batch {
	b := store.Batch{Source: source(model, path, gen, int64(last)*10, last)}
	for l := first; l <= last; l++ {
		b.Observations = append(b.Observations, obs(l, l%2 == 0))
	}
	return b
}

// testSourceDigest: the digest is stored with the read position, byte for
// byte (any bytes, NUL included); no digest reads back empty; a later
// batch replaces it, and the caller's slice is not kept.
func testSourceDigest(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	b := batch("cal", "d.csv", 0, 2, 3)
	b.Source.Digest = nil
	mustIngest(t, s, b)
	src, err := s.Sources(ctx, "cal")
	if err != nil || len(src) != 1 {
		t.Fatalf("Sources = %v, %v", src, err)
	}
	if len(src[0].Digest) != 0 {
		t.Errorf("no digest stored, read back %q", src[0].Digest)
	}
	b = batch("cal", "d.csv", 0, 4, 5)
	want := []byte{0, 1, 2, 0xff, 's', 'h', 'a', 0}
	b.Source.Digest = want
	mustIngest(t, s, b)
	want = slices.Clone(want)
	b.Source.Digest[0] = 'x' // a backend must not keep the caller's slice
	src, err = s.Sources(ctx, "cal")
	if err != nil || len(src) != 1 {
		t.Fatalf("Sources = %v, %v", src, err)
	}
	if !bytes.Equal(src[0].Digest, want) || src[0].Offset != 50 {
		t.Errorf("digest, offset = %q, %d; want %q, 50", src[0].Digest, src[0].Offset, want)
	}
	src[0].Digest[1] = 'y' // nor hand out its own
	if again, _ := s.Sources(ctx, "cal"); !bytes.Equal(again[0].Digest, want) {
		t.Errorf("digest changed through a returned slice: %q", again[0].Digest)
	}
}

func mustIngest(t *testing.T, s store.Store, b store.Batch) []int64 {
	t.Helper()
	ids, err := s.Ingest(ctxT(t), b)
	if err != nil {
		t.Fatalf("Ingest(%s/%s offset %d): %v", b.Source.Model, b.Source.Path, b.Source.Offset, err)
	}
	if len(ids) != len(b.Observations) {
		t.Fatalf("Ingest returned %d ids for %d observations", len(ids), len(b.Observations))
	}
	return ids
}

func count(t *testing.T, s store.Store, model string) int64 {
	t.Helper()
	n, err := s.CountObservations(ctxT(t), model)
	if err != nil {
		t.Fatalf("CountObservations(%s): %v", model, err)
	}
	return n
}

// sameFloat reports whether a and b are the same number, NaN equal to NaN.
func sameFloat(a, b float64) bool {
	return a == b || (math.IsNaN(a) && math.IsNaN(b))
}

func sameFloats(a, b []float64) bool {
	return slices.EqualFunc(a, b, sameFloat)
}

// sameFlags compares flags field by field, NaN equal to NaN; no flags
// and an empty list are the same.
func sameFlags(a, b []engine.Flag) bool {
	return slices.EqualFunc(a, b, func(x, y engine.Flag) bool {
		return x.Measure == y.Measure && x.Family == y.Family && x.Term == y.Term &&
			sameFloat(x.Value, y.Value) && sameFloat(x.Cutoff, y.Cutoff)
	})
}

func sameTime(t *testing.T, what string, got, want time.Time) {
	t.Helper()
	if !got.Equal(want) {
		t.Errorf("%s = %v, want %v", what, got, want)
	}
	if !got.IsZero() && got.Location() != time.UTC {
		t.Errorf("%s location = %v, want UTC", what, got.Location())
	}
}

// checkObs compares an observation read back with the one ingested; model,
// path and generation are those of the batch.
func checkObs(t *testing.T, got, want store.Observation) {
	t.Helper()
	if got.Model != want.Model || got.Path != want.Path || got.Generation != want.Generation ||
		got.Line != want.Line || got.Raw != want.Raw || got.Label != want.Label {
		t.Errorf("provenance = %s/%s gen %d line %d %q label %q, want %s/%s gen %d line %d %q label %q",
			got.Model, got.Path, got.Generation, got.Line, got.Raw, got.Label,
			want.Model, want.Path, want.Generation, want.Line, want.Raw, want.Label)
	}
	if !sameFloats(got.Values, want.Values) {
		t.Errorf("line %d: values = %v, want %v", want.Line, got.Values, want.Values)
	}
	for i := range min(len(got.Values), len(want.Values)) {
		if math.Signbit(got.Values[i]) != math.Signbit(want.Values[i]) {
			t.Errorf("line %d: value %d sign lost: %v, want %v", want.Line, i, got.Values[i], want.Values[i])
		}
	}
	sameTime(t, fmt.Sprintf("line %d Time", want.Line), got.Time, want.Time)
	sameTime(t, fmt.Sprintf("line %d ArrivedAt", want.Line), got.ArrivedAt, want.ArrivedAt)
	switch {
	case (got.Arrival == nil) != (want.Arrival == nil):
		t.Errorf("line %d: Arrival = %+v, want %+v", want.Line, got.Arrival, want.Arrival)
	case want.Arrival != nil:
		g, w := got.Arrival, want.Arrival
		pairs := []struct {
			name string
			g, w float64
		}{
			{"Leverage", g.Leverage, w.Leverage}, {"Residual", g.Residual, w.Residual},
			{"StudentizedInternal", g.StudentizedInternal, w.StudentizedInternal},
			{"StudentizedExternal", g.StudentizedExternal, w.StudentizedExternal},
			{"CooksDistance", g.CooksDistance, w.CooksDistance}, {"DFFITS", g.DFFITS, w.DFFITS},
			{"COVRATIO", g.COVRATIO, w.COVRATIO}, {"OutlierPBonferroni", g.OutlierPBonferroni, w.OutlierPBonferroni},
		}
		for _, p := range pairs {
			if !sameFloat(p.g, p.w) {
				t.Errorf("line %d: %s = %v, want %v", want.Line, p.name, p.g, p.w)
			}
		}
		if !sameFloats(g.DFBETAS, w.DFBETAS) {
			t.Errorf("line %d: DFBETAS = %v, want %v", want.Line, g.DFBETAS, w.DFBETAS)
		}
		if g.Verdict != w.Verdict || !sameFlags(g.Flags, w.Flags) {
			t.Errorf("line %d: verdict %q flags %v, want %q %v", want.Line, g.Verdict, g.Flags, w.Verdict, w.Flags)
		}
	}
}

func withProvenance(b store.Batch) []store.Observation {
	out := make([]store.Observation, len(b.Observations))
	for i, o := range b.Observations {
		o.Model, o.Path, o.Generation = b.Source.Model, b.Source.Path, b.Source.Generation
		out[i] = o
	}
	return out
}

func testIngestSources(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	if src, err := s.Sources(ctx, "cal"); err != nil || len(src) != 0 {
		t.Fatalf("Sources of an empty store = %v, %v; want none", src, err)
	}
	b1 := batch("cal", "b.csv", 1, 2, 6)
	b1.Quarantine = []store.QuarantineRow{{Line: 4, Column: 3, ColumnName: "dose", Field: 2, Raw: "4,x", Reason: "not a number", At: t0}}
	b1.Missing = 3
	ids1 := mustIngest(t, s, b1)
	ids2 := mustIngest(t, s, batch("cal", "a.csv", 1, 2, 3))
	b3 := batch("cal", "b.csv", 1, 7, 9)
	b3.Missing = 2
	ids3 := mustIngest(t, s, b3)
	stale := batch("cal", "b.csv", 1, 7, 9)
	stale.Missing = 40
	if _, err := s.Ingest(ctx, stale); !errors.Is(err, store.ErrStale) {
		t.Fatalf("a batch delivered twice: %v, want ErrStale", err)
	}
	mustIngest(t, s, batch("other", "a.csv", 1, 2, 2))

	all := slices.Concat(ids1, ids2, ids3)
	if !slices.IsSorted(all) || len(slices.Compact(slices.Clone(all))) != len(all) {
		t.Errorf("ids not strictly increasing in commit order: %v", all)
	}

	src, err := s.Sources(ctx, "cal")
	if err != nil {
		t.Fatal(err)
	}
	if len(src) != 2 {
		t.Fatalf("Sources(cal) = %d sources, want 2", len(src))
	}
	byPath := map[string]store.Source{}
	for _, x := range src {
		byPath[x.Path] = x
	}
	want := source("cal", "b.csv", 1, 90, 9)
	got := byPath["b.csv"]
	if got.Model != want.Model || got.Generation != want.Generation || got.Inode != want.Inode ||
		got.Size != want.Size || got.Offset != want.Offset || got.Line != want.Line ||
		got.Fingerprint != want.Fingerprint || got.FingerprintLen != want.FingerprintLen || got.Header != want.Header ||
		!bytes.Equal(got.Digest, want.Digest) {
		t.Errorf("source b.csv = %+v, want %+v", got, want)
	}
	sameTime(t, "UpdatedAt", got.UpdatedAt, want.UpdatedAt)
	if got.Rows != 8 || got.Quarantined != 1 || got.Missing != 5 {
		t.Errorf("b.csv Rows, Quarantined, Missing = %d, %d, %d; want 8, 1, 5 (counted by the store; the stale batch adds nothing)", got.Rows, got.Quarantined, got.Missing)
	}
	if a := byPath["a.csv"]; a.Rows != 2 || a.Quarantined != 0 || a.Missing != 0 {
		t.Errorf("a.csv Rows, Quarantined, Missing = %d, %d, %d; want 2, 0, 0", a.Rows, a.Quarantined, a.Missing)
	}
	for model, want := range map[string]int64{"cal": 10, "other": 1, "none": 0} {
		if n := count(t, s, model); n != want {
			t.Errorf("CountObservations(%s) = %d, want %d", model, n, want)
		}
	}
}

func testIngestStale(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	b := batch("cal", "a.csv", 2, 2, 11)
	b.Quarantine = []store.QuarantineRow{{Line: 5, Column: 1, Raw: "?", Reason: "bad"}}
	mustIngest(t, s, b)

	lower := batch("cal", "a.csv", 2, 12, 12)
	lower.Source.Offset = 50
	older := batch("cal", "a.csv", 1, 12, 13)
	older.Source.Offset = 1000
	tests := []struct {
		name string
		b    store.Batch
	}{
		{"same batch again", b},
		{"same offset, other rows", func() store.Batch {
			x := batch("cal", "a.csv", 2, 12, 12)
			x.Source.Offset = b.Source.Offset
			return x
		}()},
		{"offset behind", lower},
		{"older generation", older},
		{"empty batch at the same offset", store.Batch{Source: b.Source}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ids, err := s.Ingest(ctx, tt.b)
			if !errors.Is(err, store.ErrStale) {
				t.Fatalf("Ingest = %v, %v; want ErrStale", ids, err)
			}
			if n := count(t, s, "cal"); n != 10 {
				t.Errorf("CountObservations = %d after a stale batch, want 10", n)
			}
			if n, err := s.CountQuarantined(ctx, "cal"); err != nil || n != 1 {
				t.Errorf("CountQuarantined = %d, %v; want 1", n, err)
			}
			src, err := s.Sources(ctx, "cal")
			if err != nil || len(src) != 1 || src[0].Offset != b.Source.Offset || src[0].Generation != 2 || src[0].Rows != 10 {
				t.Errorf("source after a stale batch = %+v, %v; want offset %d generation 2 rows 10", src, err, b.Source.Offset)
			}
		})
	}
	// An advancing batch with no rows (for instance a blank line) moves the offset.
	adv := store.Batch{Source: source("cal", "a.csv", 2, b.Source.Offset+1, 12)}
	if ids, err := s.Ingest(ctx, adv); err != nil || len(ids) != 0 {
		t.Fatalf("Ingest(empty advancing batch) = %v, %v", ids, err)
	}
	if src, _ := s.Sources(ctx, "cal"); len(src) != 1 || src[0].Offset != adv.Source.Offset {
		t.Errorf("offset after an empty advancing batch = %+v, want %d", src, adv.Source.Offset)
	}
}

func testIngestGenerations(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	mustIngest(t, s, batch("cal", "a.csv", 1, 2, 20))
	// Rotation: the file was replaced; reading restarts at offset 0 with the
	// next generation, so the same line numbers and a smaller offset are new rows.
	g2 := batch("cal", "a.csv", 2, 2, 3)
	if g2.Source.Offset >= 200 {
		t.Fatal("test setup: generation 2 offset should be below generation 1's")
	}
	ids := mustIngest(t, s, g2)
	if n := count(t, s, "cal"); n != 21 {
		t.Errorf("CountObservations = %d, want 21 (rows of earlier generations stay)", n)
	}
	src, err := s.Sources(ctx, "cal")
	if err != nil || len(src) != 1 {
		t.Fatalf("Sources = %v, %v", src, err)
	}
	if src[0].Generation != 2 || src[0].Offset != 30 || src[0].Rows != 21 {
		t.Errorf("source = generation %d offset %d rows %d, want 2, 30, 21", src[0].Generation, src[0].Offset, src[0].Rows)
	}
	if _, err := s.Ingest(ctx, g2); !errors.Is(err, store.ErrStale) {
		t.Errorf("generation 2 batch again: %v, want ErrStale", err)
	}
	if _, err := s.Ingest(ctx, batch("cal", "a.csv", 1, 21, 40)); !errors.Is(err, store.ErrStale) {
		t.Errorf("generation 1 batch after generation 2: %v, want ErrStale", err)
	}
	// ObservationAt finds the newest generation's row.
	o, err := s.ObservationAt(ctx, "cal", "a.csv", 3)
	if err != nil {
		t.Fatal(err)
	}
	if o.Generation != 2 || o.ID != ids[1] {
		t.Errorf("ObservationAt(a.csv:3) = id %d generation %d, want id %d generation 2", o.ID, o.Generation, ids[1])
	}
	// Line 10 only exists in generation 1.
	if o, err := s.ObservationAt(ctx, "cal", "a.csv", 10); err != nil || o.Generation != 1 {
		t.Errorf("ObservationAt(a.csv:10) = generation %d, %v; want generation 1", o.Generation, err)
	}
}

func testIngestAtomic(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	mustIngest(t, s, batch("cal", "a.csv", 1, 2, 5))
	tests := []struct {
		name string
		b    store.Batch
	}{
		{"duplicate line in batch", func() store.Batch {
			b := batch("cal", "a.csv", 1, 6, 9)
			b.Observations = append(b.Observations, obs(7, false))
			b.Quarantine = []store.QuarantineRow{{Line: 8, Raw: "x", Reason: "bad"}}
			return b
		}()},
		{"line already stored", func() store.Batch {
			b := batch("cal", "a.csv", 1, 5, 9)
			return b
		}()},
		{"observation of another model", func() store.Batch {
			b := batch("cal", "a.csv", 1, 6, 9)
			b.Observations[2].Model = "other"
			return b
		}()},
		{"observation of another file", func() store.Batch {
			b := batch("cal", "a.csv", 1, 6, 9)
			b.Observations[1].Path = "b.csv"
			return b
		}()},
		{"quarantine row of another generation", func() store.Batch {
			b := batch("cal", "a.csv", 1, 6, 9)
			b.Quarantine = []store.QuarantineRow{{Generation: 3, Line: 10, Raw: "x", Reason: "bad"}}
			return b
		}()},
		{"no model", store.Batch{Source: source("", "a.csv", 1, 500, 50)}},
		{"no path", store.Batch{Source: source("cal", "", 1, 500, 50)}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ids, err := s.Ingest(ctx, tt.b)
			if err == nil {
				t.Fatalf("Ingest = %v, nil; want an error", ids)
			}
			if errors.Is(err, store.ErrStale) {
				t.Errorf("Ingest error %v is ErrStale; want another error", err)
			}
			if n := count(t, s, "cal"); n != 4 {
				t.Errorf("CountObservations = %d after a failed batch, want 4", n)
			}
			if n, _ := s.CountQuarantined(ctx, ""); n != 0 {
				t.Errorf("CountQuarantined = %d after a failed batch, want 0", n)
			}
			if src, _ := s.Sources(ctx, "cal"); len(src) != 1 || src[0].Offset != 50 || src[0].Rows != 4 {
				t.Errorf("source after a failed batch = %+v, want offset 50 rows 4", src)
			}
		})
	}
	// The store is still usable and the next good batch goes in.
	mustIngest(t, s, batch("cal", "a.csv", 1, 6, 9))
	if n := count(t, s, "cal"); n != 8 {
		t.Errorf("CountObservations = %d, want 8", n)
	}
}

func testObservationRoundTrip(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	nan := math.NaN()
	inf := math.Inf(1)
	odd := obs(2, true)
	odd.Raw = "\"µg/l, 3\",−0,\t \"\"q\"\""
	odd.Label = "Merc 450SLC \"µ\", 3" // any text a cell holds
	odd.Values = []float64{math.Copysign(0, -1), nan, inf, math.Inf(-1), math.SmallestNonzeroFloat64, math.MaxFloat64}
	odd.Arrival.Leverage = 1
	odd.Arrival.StudentizedInternal = nan
	odd.Arrival.StudentizedExternal = nan
	odd.Arrival.CooksDistance = nan
	odd.Arrival.DFFITS = inf
	odd.Arrival.COVRATIO = nan
	odd.Arrival.OutlierPBonferroni = nan
	odd.Arrival.DFBETAS = []float64{nan, -inf, 0}
	odd.Arrival.Verdict = engine.WordSuspect
	odd.Arrival.Flags = []engine.Flag{
		{Measure: engine.MeasureLeverage, Family: engine.FamilyAbsolute, Value: 1, Cutoff: 0.5},
		{Measure: engine.MeasureDFBETAS, Family: engine.FamilySizeAdjusted, Term: "log(\"flow rate\")^2", Value: -inf, Cutoff: 0.25},
		{Measure: engine.MeasureBonferroni, Family: engine.FamilyTest, Value: nan, Cutoff: inf},
	}

	noTime := obs(3, false)
	noTime.Time = time.Time{}
	noTime.Values = nil

	late := obs(4, true)
	late.Time = time.Date(2261, 12, 31, 23, 59, 59, 999999999, time.UTC)
	late.ArrivedAt = time.Date(1700, 1, 1, 0, 0, 0, 1, time.UTC)
	late.Arrival.DFBETAS = nil
	late.Arrival.Flags = []engine.Flag{} // none, read back as nil
	late.Arrival.Verdict = ""

	b := store.Batch{Source: source("cal", "dir/a b.csv", 0, 40, 4), Observations: []store.Observation{odd, noTime, late}}
	ids := mustIngest(t, s, b)
	got, err := s.Observations(ctx, "cal", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	want := withProvenance(b)
	if len(got) != len(want) {
		t.Fatalf("Observations = %d rows, want %d", len(got), len(want))
	}
	for i := range want {
		want[i].ID = ids[i]
		if got[i].ID != ids[i] {
			t.Errorf("row %d id = %d, want %d", i, got[i].ID, ids[i])
		}
		checkObs(t, got[i], want[i])
	}
	one, err := s.ObservationAt(ctx, "cal", "dir/a b.csv", 2)
	if err != nil {
		t.Fatal(err)
	}
	checkObs(t, one, want[0])
}

func testObservationsPagination(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	var all []int64
	var byPath = map[string][]int64{}
	for i := range 5 {
		for _, p := range []string{"a.csv", "b.csv"} {
			ids := mustIngest(t, s, batch("cal", p, 1, 2+3*i, 4+3*i))
			all = append(all, ids...)
			byPath[p] = append(byPath[p], ids...)
		}
		mustIngest(t, s, batch("other", "a.csv", 1, 2+3*i, 4+3*i))
	}
	idsOf := func(os []store.Observation) []int64 {
		var ids []int64
		for _, o := range os {
			ids = append(ids, o.ID)
		}
		return ids
	}
	tests := []struct {
		name string
		q    store.ObsQuery
		want []int64
	}{
		{"all", store.ObsQuery{}, all},
		{"negative limit is all", store.ObsQuery{Limit: -1}, all},
		{"first page", store.ObsQuery{Limit: 7}, all[:7]},
		{"second page", store.ObsQuery{AfterID: all[6], Limit: 7}, all[7:14]},
		{"last page", store.ObsQuery{AfterID: all[27], Limit: 7}, all[28:]},
		{"past the end", store.ObsQuery{AfterID: all[29], Limit: 7}, nil},
		{"one file", store.ObsQuery{Path: "b.csv"}, byPath["b.csv"]},
		{"one file, paged", store.ObsQuery{Path: "a.csv", AfterID: byPath["a.csv"][3], Limit: 4}, byPath["a.csv"][4:8]},
		{"unknown file", store.ObsQuery{Path: "c.csv"}, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := s.Observations(ctx, "cal", tt.q)
			if err != nil {
				t.Fatal(err)
			}
			if g := idsOf(got); !slices.Equal(g, tt.want) {
				t.Errorf("ids = %v, want %v", g, tt.want)
			}
			for _, o := range got {
				if o.Model != "cal" || (tt.q.Path != "" && o.Path != tt.q.Path) {
					t.Errorf("observation %d is %s/%s", o.ID, o.Model, o.Path)
				}
			}
		})
	}
	// Walking pages of 4 visits every row once.
	var walked []int64
	for after := int64(0); ; {
		page, err := s.Observations(ctx, "cal", store.ObsQuery{AfterID: after, Limit: 4})
		if err != nil {
			t.Fatal(err)
		}
		if len(page) == 0 {
			break
		}
		walked = append(walked, idsOf(page)...)
		after = page[len(page)-1].ID
	}
	if !slices.Equal(walked, all) {
		t.Errorf("paged walk = %v, want %v", walked, all)
	}
	if got, err := s.Observations(ctx, "none", store.ObsQuery{}); err != nil || len(got) != 0 {
		t.Errorf("Observations(unknown model) = %v, %v; want none", got, err)
	}
}

func testObservationAt(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	b := batch("cal", "a.csv", 1, 2, 4)
	ids := mustIngest(t, s, b)
	o, err := s.ObservationAt(ctx, "cal", "a.csv", 3)
	if err != nil {
		t.Fatal(err)
	}
	want := withProvenance(b)[1]
	want.ID = ids[1]
	if o.ID != ids[1] {
		t.Errorf("ObservationAt id = %d, want %d", o.ID, ids[1])
	}
	checkObs(t, o, want)
	for _, tt := range []struct {
		name, model, path string
		line              int
	}{
		{"unknown line", "cal", "a.csv", 5},
		{"unknown file", "cal", "b.csv", 3},
		{"unknown model", "none", "a.csv", 3},
	} {
		t.Run(tt.name, func(t *testing.T) {
			if _, err := s.ObservationAt(ctx, tt.model, tt.path, tt.line); !errors.Is(err, store.ErrNotFound) {
				t.Errorf("ObservationAt(%s, %s, %d) error = %v, want ErrNotFound", tt.model, tt.path, tt.line, err)
			}
		})
	}
}

func testQuarantine(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	var want []store.QuarantineRow
	for i, m := range []string{"cal", "other", "cal", "cal"} {
		b := store.Batch{Source: source(m, "q.csv", 1, int64(10*(i+1)), i+1)}
		q := store.QuarantineRow{Line: i + 2, Column: i + 1, ColumnName: fmt.Sprintf("c%d", i), Field: i + 1, Raw: fmt.Sprintf("row %d,,", i), Reason: "field count", At: t0.Add(time.Duration(i))}
		b.Quarantine = []store.QuarantineRow{q}
		mustIngest(t, s, b)
		q.Model, q.Path, q.Generation = m, "q.csv", 1
		want = append(want, q)
	}
	check := checkQuarantine
	all, err := s.Quarantined(ctx, "", 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	check(t, all, want)
	cal, err := s.Quarantined(ctx, "cal", 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	check(t, cal, []store.QuarantineRow{want[0], want[2], want[3]})
	page, err := s.Quarantined(ctx, "cal", cal[0].ID, 1)
	if err != nil {
		t.Fatal(err)
	}
	check(t, page, []store.QuarantineRow{want[2]})
	for model, n := range map[string]int64{"": 4, "cal": 3, "other": 1, "none": 0} {
		if got, err := s.CountQuarantined(ctx, model); err != nil || got != n {
			t.Errorf("CountQuarantined(%q) = %d, %v; want %d", model, got, err, n)
		}
	}
	if n := count(t, s, "cal"); n != 0 {
		t.Errorf("quarantined rows counted as observations: %d", n)
	}
}

// checkQuarantine compares quarantined rows field by field (IDs only for
// being set and increasing, unless want carries them).
func checkQuarantine(t *testing.T, got, want []store.QuarantineRow) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("got %d rows, want %d: %+v", len(got), len(want), got)
	}
	for i := range got {
		g, w := got[i], want[i]
		if g.Model != w.Model || g.Path != w.Path || g.Generation != w.Generation || g.Line != w.Line ||
			g.Column != w.Column || g.Raw != w.Raw || g.Reason != w.Reason || g.ID == 0 || (w.ID != 0 && g.ID != w.ID) {
			t.Errorf("row %d = %+v, want %+v", i, g, w)
		}
		sameTime(t, "At", g.At, w.At)
		if i > 0 && g.ID <= got[i-1].ID {
			t.Errorf("ids not increasing: %d after %d", g.ID, got[i-1].ID)
		}
	}
}

// tail returns the last n items of s (all when n <= 0 or n > len(s)).
func tail[T any](s []T, n int) []T {
	if n <= 0 || n > len(s) {
		return s
	}
	return s[len(s)-n:]
}

// latestCase is one read of the newest n records of a model.
type latestCase[T any] struct {
	name  string
	model string
	n     int
	want  []T
}

// latestCases are the cases every Latest* read shares, over the 7
// records of model "cal" (oldest first): one, some, exactly all, more
// (a count above 7), n = 0 and a negative n (both mean all), and a model
// that does not exist.
func latestCases[T any](cal []T, more, negative int) []latestCase[T] {
	return []latestCase[T]{
		{"one", "cal", 1, tail(cal, 1)},
		{"some", "cal", 3, tail(cal, 3)},
		{"exactly all", "cal", 7, cal},
		{"more than all", "cal", more, cal},
		{"zero means all", "cal", 0, cal},
		{"negative means all", "cal", negative, cal},
		{"unknown model", "none", 3, nil},
	}
}

// runLatest runs each case through read and compares with check.
func runLatest[T any](t *testing.T, cases []latestCase[T], read func(model string, n int) ([]T, error), check func(t *testing.T, got, want []T)) {
	t.Helper()
	for _, tt := range cases {
		t.Run(tt.name, func(t *testing.T) {
			got, err := read(tt.model, tt.n)
			if err != nil {
				t.Fatal(err)
			}
			check(t, got, tt.want)
		})
	}
}

// testLatestQuarantined: the latest n rows, oldest first, are the tail of
// the full listing, per model and for all models; n <= 0 gives all.
func testLatestQuarantined(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	for _, model := range []string{"", "cal", "none"} {
		if got, err := s.LatestQuarantined(ctx, model, 3); err != nil || len(got) != 0 {
			t.Errorf("LatestQuarantined(%q) of an empty store = %v, %v; want none", model, got, err)
		}
	}
	// Seven rows of cal, three of other, interleaved so that the ids of
	// one model are not contiguous; one batch of cal holds two rows.
	var all, cal []store.QuarantineRow
	line := map[string]int{}
	for i, bt := range []struct {
		model string
		rows  int
	}{{"cal", 1}, {"other", 1}, {"cal", 2}, {"cal", 1}, {"other", 1}, {"cal", 1}, {"cal", 1}, {"other", 1}, {"cal", 1}} {
		var b store.Batch
		for range bt.rows {
			line[bt.model]++
			n := line[bt.model]
			b.Quarantine = append(b.Quarantine, store.QuarantineRow{Line: n + 1, Column: i + 1,
				Raw: fmt.Sprintf("%s row %d,,<x>", bt.model, n), Reason: fmt.Sprintf("field count %d", n),
				At: t0.Add(time.Duration(i) * time.Second)})
		}
		b.Source = source(bt.model, "q.csv", 1, int64(10*line[bt.model]), line[bt.model]+1)
		mustIngest(t, s, b)
		for _, q := range b.Quarantine {
			q.Model, q.Path, q.Generation = bt.model, "q.csv", 1
			all = append(all, q)
			if bt.model == "cal" {
				cal = append(cal, q)
			}
		}
	}
	if len(cal) != 7 || len(all) != 10 {
		t.Fatalf("setup: %d rows of cal, %d in all", len(cal), len(all))
	}
	// The ids come from the full listing, which the conformance test of
	// Quarantined holds to the same order.
	full, err := s.Quarantined(ctx, "", 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	checkQuarantine(t, full, all)
	for i := range all {
		all[i].ID = full[i].ID
	}
	cal = cal[:0]
	for _, q := range all {
		if q.Model == "cal" {
			cal = append(cal, q)
		}
	}
	cases := append(latestCases(cal, 50, -1),
		latestCase[store.QuarantineRow]{"all models", "", 4, tail(all, 4)},
		latestCase[store.QuarantineRow]{"all models, all rows", "", 0, all})
	runLatest(t, cases, func(model string, n int) ([]store.QuarantineRow, error) {
		return s.LatestQuarantined(ctx, model, n)
	}, checkQuarantine)
	// A new row is at the end at once.
	b := store.Batch{Source: source("cal", "q.csv", 1, 1000, 99),
		Quarantine: []store.QuarantineRow{{Line: 99, Column: 3, Raw: "late", Reason: "empty field", At: t0.Add(time.Hour)}}}
	mustIngest(t, s, b)
	got, err := s.LatestQuarantined(ctx, "cal", 2)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 || got[0].ID != cal[len(cal)-1].ID || got[1].Raw != "late" {
		t.Errorf("after one more row: %+v, want cal's last old row then the new one", got)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := s.LatestQuarantined(cctx, "cal", 2); !errors.Is(err, context.Canceled) {
		t.Errorf("LatestQuarantined under a cancelled context: %v, want context.Canceled", err)
	}
}

func fitRecord(model string, i int, lastObs int64) store.FitRecord {
	return store.FitRecord{
		Model: model, At: t0.Add(time.Duration(i) * time.Minute), N: 10 + i, P: 3,
		Terms:     []string{"intercept", "x1", "x1*x2"},
		Estimates: []float64{1.5, -2.25, float64(i)}, StdErrors: []float64{0.1, 0.2, math.NaN()},
		Sigma: 0.5, RSquared: 0.99, Fragility: i - 2, FragilityK: 3,
		Detail: fmt.Sprintf(`{"fit":%d}`, i), LastObsID: lastObs,
	}
}

func checkFit(t *testing.T, got, want store.FitRecord) {
	t.Helper()
	if got.ID != want.ID || got.Model != want.Model || got.N != want.N || got.P != want.P ||
		!slices.Equal(got.Terms, want.Terms) || !sameFloats(got.Estimates, want.Estimates) ||
		!sameFloats(got.StdErrors, want.StdErrors) || !sameFloat(got.Sigma, want.Sigma) ||
		!sameFloat(got.RSquared, want.RSquared) || got.Fragility != want.Fragility ||
		got.FragilityK != want.FragilityK || got.Detail != want.Detail || got.LastObsID != want.LastObsID {
		t.Errorf("fit = %+v\nwant %+v", got, want)
	}
	sameTime(t, "fit At", got.At, want.At)
}

// recordFits records n fits, fit i after observation ids[i], of model
// "other" where other(i) and of "cal" elsewhere; fit undefinedAt has
// undefined σ and R² and no coefficients. It returns cal's fits as
// recorded (with their ids), oldest first.
func recordFits(ctx context.Context, t *testing.T, s store.Store, ids []int64, n int, other func(i int) bool, undefinedAt int) []store.FitRecord {
	t.Helper()
	var cal []store.FitRecord
	for i := range n {
		model := "cal"
		if other(i) {
			model = "other"
		}
		f := fitRecord(model, i, ids[i])
		if i == undefinedAt {
			f.Sigma, f.RSquared = math.NaN(), math.NaN()
			f.Estimates, f.StdErrors, f.Terms = nil, nil, nil
		}
		id, err := s.RecordFit(ctx, f, nil)
		if err != nil {
			t.Fatal(err)
		}
		f.ID = id
		if model == "cal" {
			cal = append(cal, f)
		}
	}
	return cal
}

func testFits(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	if _, err := s.LastFit(ctx, "cal"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("LastFit of a model without fits: %v, want ErrNotFound", err)
	}
	ids := mustIngest(t, s, batch("cal", "a.csv", 1, 2, 12))
	want := recordFits(ctx, t, s, ids, 6, func(i int) bool { return i == 3 }, 4)
	got, err := s.Fits(ctx, "cal", 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != len(want) {
		t.Fatalf("Fits = %d, want %d", len(got), len(want))
	}
	for i := range want {
		checkFit(t, got[i], want[i])
	}
	page, err := s.Fits(ctx, "cal", want[1].ID, 2)
	if err != nil {
		t.Fatal(err)
	}
	if len(page) != 2 || page[0].ID != want[2].ID || page[1].ID != want[3].ID {
		t.Errorf("Fits(after %d, limit 2) = %v, want fits %d and %d", want[1].ID, page, want[2].ID, want[3].ID)
	}
	last, err := s.LastFit(ctx, "cal")
	if err != nil {
		t.Fatal(err)
	}
	checkFit(t, last, want[len(want)-1])
	if f, err := s.Fits(ctx, "none", 0, 0); err != nil || len(f) != 0 {
		t.Errorf("Fits(unknown model) = %v, %v; want none", f, err)
	}
}

// testLatestFits: the latest n fits, oldest first, are the tail of Fits;
// n <= 0 gives all; the last one is LastFit; other models' fits never
// appear.
func testLatestFits(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	if got, err := s.LatestFits(ctx, "cal", 3); err != nil || len(got) != 0 {
		t.Errorf("LatestFits of a model without fits = %v, %v; want none", got, err)
	}
	if n, err := s.CountFits(ctx, "cal"); err != nil || n != 0 {
		t.Errorf("CountFits of a model without fits = %d, %v; want 0", n, err)
	}
	ids := mustIngest(t, s, batch("cal", "a.csv", 1, 2, 12))
	// Interleaved with another model's, so that cal's ids are not contiguous.
	cal := recordFits(ctx, t, s, ids, 10, func(i int) bool { return i%3 == 1 }, 5)
	if len(cal) != 7 {
		t.Fatalf("setup: %d fits of cal", len(cal))
	}
	cases := append(latestCases(cal, 1000, -5),
		latestCase[store.FitRecord]{"all models is not a model", "", 3, nil})
	runLatest(t, cases, func(model string, n int) ([]store.FitRecord, error) {
		return s.LatestFits(ctx, model, n)
	}, func(t *testing.T, got, want []store.FitRecord) {
		if len(got) != len(want) {
			t.Fatalf("LatestFits = %d fits, want %d", len(got), len(want))
		}
		for i := range want {
			checkFit(t, got[i], want[i])
		}
	})
	for model, want := range map[string]int64{"cal": 7, "other": 3, "none": 0, "": 0} {
		if n, err := s.CountFits(ctx, model); err != nil || n != want {
			t.Errorf("CountFits(%q) = %d, %v; want %d", model, n, err, want)
		}
	}
	last, err := s.LastFit(ctx, "cal")
	if err != nil {
		t.Fatal(err)
	}
	one, err := s.LatestFits(ctx, "cal", 1)
	if err != nil || len(one) != 1 {
		t.Fatalf("LatestFits(1) = %v, %v", one, err)
	}
	checkFit(t, one[0], last)
	// A fit recorded now is the newest at once.
	f := fitRecord("cal", 20, ids[10])
	if f.ID, err = s.RecordFit(ctx, f, nil); err != nil {
		t.Fatal(err)
	}
	two, err := s.LatestFits(ctx, "cal", 2)
	if err != nil || len(two) != 2 {
		t.Fatalf("LatestFits(2) after one more fit = %v, %v", two, err)
	}
	checkFit(t, two[0], cal[len(cal)-1])
	checkFit(t, two[1], f)
	if n, err := s.CountFits(ctx, "cal"); err != nil || n != 8 {
		t.Errorf("CountFits after one more fit = %d, %v; want 8", n, err)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := s.LatestFits(cctx, "cal", 2); !errors.Is(err, context.Canceled) {
		t.Errorf("LatestFits under a cancelled context: %v, want context.Canceled", err)
	}
	if _, err := s.CountFits(cctx, "cal"); !errors.Is(err, context.Canceled) {
		t.Errorf("CountFits under a cancelled context: %v, want context.Canceled", err)
	}
}

func testVerdictChanges(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	b := batch("cal", "a.csv", 1, 2, 7) // even lines arrive with "ordinary", odd ones without diagnostics
	ids := mustIngest(t, s, b)
	other := mustIngest(t, s, batch("other", "a.csv", 1, 2, 3))

	f1, err := s.RecordFit(ctx, fitRecord("cal", 1, ids[5]), []store.VerdictChange{
		{ObsID: ids[0], From: "ordinary", To: "outlier", Flags: []engine.Flag{{Measure: "a"}}, FitID: 999},
		{ObsID: ids[1], From: "", To: "notable", Flags: []engine.Flag{{Measure: "b"}}},
		{ObsID: ids[2], From: "ordinary", To: "suspect", Flags: []engine.Flag{{Measure: "c"}}, At: t0.Add(time.Hour)},
	})
	if err != nil {
		t.Fatal(err)
	}
	f2, err := s.RecordFit(ctx, fitRecord("cal", 2, ids[5]), []store.VerdictChange{
		{ObsID: ids[0], From: "outlier", To: "ordinary", Flags: nil}, // back to its arrival verdict
		{ObsID: ids[2], From: "suspect", To: "influential", Flags: []engine.Flag{{Measure: "d"}}},
	})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.RecordFit(ctx, fitRecord("other", 2, other[1]), []store.VerdictChange{{ObsID: other[0], From: "ordinary", To: "suspect"}}); err != nil {
		t.Fatal(err)
	}
	got, err := s.VerdictChanges(ctx, ids[2])
	if err != nil {
		t.Fatal(err)
	}
	want := []store.VerdictChange{
		{ObsID: ids[2], FitID: f1, At: t0.Add(time.Hour), From: "ordinary", To: "suspect", Flags: []engine.Flag{{Measure: "c"}}},
		{ObsID: ids[2], FitID: f2, At: fitRecord("cal", 2, 0).At, From: "suspect", To: "influential", Flags: []engine.Flag{{Measure: "d"}}},
	}
	if len(got) != len(want) {
		t.Fatalf("VerdictChanges = %+v, want %+v", got, want)
	}
	for i := range want {
		g, w := got[i], want[i]
		if g.ObsID != w.ObsID || g.FitID != w.FitID || g.From != w.From || g.To != w.To || !sameFlags(g.Flags, w.Flags) {
			t.Errorf("change %d = %+v, want %+v", i, g, w)
		}
		sameTime(t, "change At", g.At, w.At)
	}
	if c, err := s.VerdictChanges(ctx, ids[0]); err != nil || len(c) != 2 || c[0].FitID != f1 {
		t.Errorf("VerdictChanges(obs %d) = %+v, %v; want 2 changes, the first by fit %d (FitID set by the store)", ids[0], c, err, f1)
	}
	if c, err := s.VerdictChanges(ctx, ids[4]); err != nil || len(c) != 0 {
		t.Errorf("VerdictChanges of an unchanged observation = %v, %v; want none", c, err)
	}
	cur, err := s.CurrentVerdicts(ctx, "cal")
	if err != nil {
		t.Fatal(err)
	}
	wantCur := map[int64]engine.Word{ids[1]: "notable", ids[2]: "influential"}
	if len(cur) != len(wantCur) {
		t.Errorf("CurrentVerdicts = %v, want %v", cur, wantCur)
	}
	for id, v := range wantCur {
		if cur[id] != v {
			t.Errorf("CurrentVerdicts[%d] = %q, want %q", id, cur[id], v)
		}
	}
	if cur, err := s.CurrentVerdicts(ctx, "none"); err != nil || len(cur) != 0 {
		t.Errorf("CurrentVerdicts(unknown model) = %v, %v; want none", cur, err)
	}
}

func testRecordFitAtomic(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	ids := mustIngest(t, s, batch("cal", "a.csv", 1, 2, 4))
	other := mustIngest(t, s, batch("other", "a.csv", 1, 2, 2))
	tests := []struct {
		name    string
		changes []store.VerdictChange
		notFnd  bool
	}{
		{"unknown observation", []store.VerdictChange{{ObsID: ids[0], To: "outlier"}, {ObsID: 1 << 40, To: "outlier"}}, true},
		{"observation of another model", []store.VerdictChange{{ObsID: ids[0], To: "outlier"}, {ObsID: other[0], To: "outlier"}}, true},
		{"two changes of one observation", []store.VerdictChange{{ObsID: ids[1], To: "outlier"}, {ObsID: ids[1], To: "notable"}}, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := s.RecordFit(ctx, fitRecord("cal", 1, ids[2]), tt.changes)
			if err == nil {
				t.Fatal("RecordFit = nil error, want one")
			}
			if tt.notFnd && !errors.Is(err, store.ErrNotFound) {
				t.Errorf("RecordFit error = %v, want ErrNotFound", err)
			}
			if f, err := s.Fits(ctx, "cal", 0, 0); err != nil || len(f) != 0 {
				t.Errorf("Fits after a failed RecordFit = %v, %v; want none", f, err)
			}
			if c, _ := s.VerdictChanges(ctx, ids[0]); len(c) != 0 {
				t.Errorf("changes kept after a failed RecordFit: %v", c)
			}
		})
	}
}

func testModelStates(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	if st, err := s.ModelStates(ctx); err != nil || len(st) != 0 {
		t.Fatalf("ModelStates of an empty store = %v, %v", st, err)
	}
	for _, st := range []store.ModelState{
		{Model: "zeta", State: "waiting", Reason: "2 of 4 rows", At: t0},
		{Model: "alpha", State: "judging", At: t0.Add(1)},
		{Model: "zeta", State: "blocked", Reason: "collinear: x1, x2", At: t0.Add(2)},
	} {
		if err := s.SetModelState(ctx, st); err != nil {
			t.Fatal(err)
		}
	}
	got, err := s.ModelStates(ctx)
	if err != nil {
		t.Fatal(err)
	}
	byModel := map[string]store.ModelState{}
	for _, st := range got {
		byModel[st.Model] = st
	}
	if len(got) != 2 {
		t.Fatalf("ModelStates = %+v, want 2 models", got)
	}
	if z := byModel["zeta"]; z.State != "blocked" || z.Reason != "collinear: x1, x2" {
		t.Errorf("zeta = %+v, want the latest state", z)
	}
	sameTime(t, "zeta At", byModel["zeta"].At, t0.Add(2))
	if a := byModel["alpha"]; a.State != "judging" || a.Reason != "" {
		t.Errorf("alpha = %+v", a)
	}
}

func alert(id, model, kind, subject string, seen time.Time) store.AlertRecord {
	return store.AlertRecord{
		ID: id, Model: model, Kind: kind, Subject: subject, Severity: "warning", State: "open",
		FirstSeen: seen, LastSeen: seen, Doc: fmt.Sprintf(`{"id":%q}`, id),
	}
}

// testAlertRevisions: every write counts a revision; a conditional write
// at the wrong revision (the alert changed since it was read, or a new
// alert that exists already) is ErrChanged and writes nothing, neither
// the alert nor its deliveries.
func testAlertRevisions(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	rev := func(id string) int64 {
		t.Helper()
		a, err := s.Alert(ctx, id)
		if err != nil {
			t.Fatal(err)
		}
		return a.Revision
	}
	a := alert("r1", "cal", "suspect", "a.csv:3", t0)
	a.Revision = 2
	if err := s.PutAlert(ctx, a, nil); !errors.Is(err, store.ErrChanged) {
		t.Errorf("revision 2 of a new alert: %v, want ErrChanged", err)
	}
	if _, err := s.Alert(ctx, "r1"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("a conflicting write stored the alert: %v", err)
	}
	a.Revision = 1
	if err := s.PutAlert(ctx, a, nil); err != nil {
		t.Fatalf("revision 1 of a new alert: %v", err)
	}
	if r := rev("r1"); r != 1 {
		t.Errorf("new alert at revision %d, want 1", r)
	}
	// Two writers read revision 1; the first write wins.
	first, second := a, a
	first.Revision, second.Revision = 2, 2
	first.State, first.Doc = "acknowledged", `{"id":"r1","ack":true}`
	second.Doc = `{"id":"r1","count":2}`
	if err := s.PutAlert(ctx, first, nil); err != nil {
		t.Fatalf("first writer: %v", err)
	}
	d := store.Delivery{Route: "log", EventID: "r1-9", Payload: []byte("{}")}
	if err := s.PutAlert(ctx, second, []store.Delivery{d}); !errors.Is(err, store.ErrChanged) {
		t.Errorf("second writer at a stale revision: %v, want ErrChanged", err)
	}
	got, err := s.Alert(ctx, "r1")
	if err != nil {
		t.Fatal(err)
	}
	if got.Revision != 2 || got.State != "acknowledged" || got.Doc != first.Doc {
		t.Errorf("after the conflict: %+v, want the first writer's at revision 2", got)
	}
	if ds, err := s.Deliveries(ctx, "", 0); err != nil || len(ds) != 0 {
		t.Errorf("a conflicting write enqueued %d deliveries (%v)", len(ds), err)
	}
	// A new alert written as new when it exists already conflicts too.
	again := a
	again.Revision = 1
	if err := s.PutAlert(ctx, again, nil); !errors.Is(err, store.ErrChanged) {
		t.Errorf("revision 1 of an existing alert: %v, want ErrChanged", err)
	}
	// Unconditional writes count too; the retried write at the re-read
	// revision goes through.
	second.Revision = 0
	if err := s.PutAlert(ctx, second, nil); err != nil {
		t.Fatal(err)
	}
	if r := rev("r1"); r != 3 {
		t.Errorf("after an unconditional write revision %d, want 3", r)
	}
	second.Revision = 4
	if err := s.PutAlert(ctx, second, []store.Delivery{d}); err != nil {
		t.Fatalf("write at the current revision: %v", err)
	}
	if r := rev("r1"); r != 4 {
		t.Errorf("revision %d, want 4", r)
	}
	if ds, err := s.Deliveries(ctx, "", 0); err != nil || len(ds) != 1 {
		t.Errorf("%d deliveries after the write (%v), want 1", len(ds), err)
	}
}

func checkAlert(t *testing.T, got, want store.AlertRecord) {
	t.Helper()
	if got.ID != want.ID || got.Model != want.Model || got.Kind != want.Kind || got.Subject != want.Subject ||
		got.Severity != want.Severity || got.State != want.State || got.Doc != want.Doc {
		t.Errorf("alert = %+v\nwant %+v", got, want)
	}
	sameTime(t, want.ID+" FirstSeen", got.FirstSeen, want.FirstSeen)
	sameTime(t, want.ID+" LastSeen", got.LastSeen, want.LastSeen)
}

func testAlertUpsert(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	if _, err := s.Alert(ctx, "nope"); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("Alert(unknown) = %v, want ErrNotFound", err)
	}
	a := alert("a1", "cal", "suspect", "a.csv:17", t0)
	if err := s.PutAlert(ctx, a, nil); err != nil {
		t.Fatal(err)
	}
	upd := a
	upd.FirstSeen = t0.Add(time.Hour) // must not replace the stored FirstSeen
	upd.LastSeen = t0.Add(2 * time.Hour)
	upd.State = "acknowledged"
	upd.Severity = "critical"
	upd.Doc = `{"id":"a1","n":2}`
	if err := s.PutAlert(ctx, upd, nil); err != nil {
		t.Fatal(err)
	}
	got, err := s.Alert(ctx, "a1")
	if err != nil {
		t.Fatal(err)
	}
	want := upd
	want.FirstSeen = t0
	checkAlert(t, got, want)
	if all, err := s.Alerts(ctx, store.AlertQuery{}); err != nil || len(all) != 1 {
		t.Errorf("Alerts after an upsert = %v, %v; want 1 alert", all, err)
	}
	if err := s.PutAlert(ctx, store.AlertRecord{}, nil); err == nil {
		t.Error("PutAlert without an id: nil error")
	}
}

func testAlertsQuery(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	as := []store.AlertRecord{
		alert("a", "cal", "suspect", "x.csv:2", t0.Add(1*time.Minute)),
		alert("b", "cal", "drift", "x1", t0.Add(5*time.Minute)),
		alert("c", "other", "suspect", "y.csv:9", t0.Add(3*time.Minute)),
		alert("d", "cal", "suspect", "x.csv:4", t0.Add(4*time.Minute)),
		alert("e", "cal", "fragile", "fit", t0.Add(2*time.Minute)),
	}
	as[3].State = "resolved"
	for _, a := range as {
		if err := s.PutAlert(ctx, a, nil); err != nil {
			t.Fatal(err)
		}
	}
	tests := []struct {
		name string
		q    store.AlertQuery
		want []string
	}{
		{"all, newest first", store.AlertQuery{}, []string{"b", "d", "c", "e", "a"}},
		{"by model", store.AlertQuery{Model: "cal"}, []string{"b", "d", "e", "a"}},
		{"by kind", store.AlertQuery{Kind: "suspect"}, []string{"d", "c", "a"}},
		{"by state", store.AlertQuery{State: "open", Kind: "suspect"}, []string{"c", "a"}},
		{"by subject", store.AlertQuery{Model: "cal", Kind: "suspect", Subject: "x.csv:4"}, []string{"d"}},
		{"limit", store.AlertQuery{Limit: 2}, []string{"b", "d"}},
		{"limit and offset", store.AlertQuery{Limit: 2, Offset: 2}, []string{"c", "e"}},
		{"offset past the end", store.AlertQuery{Offset: 9}, nil},
		{"no match", store.AlertQuery{Model: "none"}, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := s.Alerts(ctx, tt.q)
			if err != nil {
				t.Fatal(err)
			}
			var ids []string
			for _, a := range got {
				ids = append(ids, a.ID)
			}
			if !slices.Equal(ids, tt.want) {
				t.Errorf("Alerts(%+v) = %v, want %v", tt.q, ids, tt.want)
			}
		})
	}
	got, err := s.Alert(ctx, "d")
	if err != nil {
		t.Fatal(err)
	}
	checkAlert(t, got, as[3])
}

func testOutbox(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	now := t0.Add(time.Hour)
	a := alert("a1", "cal", "suspect", "x.csv:2", t0)
	ds := []store.Delivery{
		{Route: "hook", EventID: "e1", Payload: []byte(`{"n":1}`), NextAttempt: now.Add(-time.Minute), CreatedAt: t0, UpdatedAt: t0},
		{Route: "log", EventID: "e1", Payload: []byte("plain"), NextAttempt: now.Add(-2 * time.Minute), CreatedAt: t0, UpdatedAt: t0},
		{Route: "cmd", EventID: "e1", Payload: []byte{0, 1, 2}, NextAttempt: now.Add(time.Minute), CreatedAt: t0, UpdatedAt: t0},
	}
	if err := s.PutAlert(ctx, a, ds); err != nil {
		t.Fatal(err)
	}
	// A retried PutAlert with the same events enqueues nothing new.
	if err := s.PutAlert(ctx, a, ds[:1]); err != nil {
		t.Fatal(err)
	}
	if err := s.PutAlert(ctx, alert("a2", "cal", "drift", "x1", t0), []store.Delivery{
		{Route: "hook", EventID: "e2", Payload: []byte("2"), NextAttempt: now.Add(-2 * time.Minute), CreatedAt: t0.Add(1), UpdatedAt: t0.Add(1)},
	}); err != nil {
		t.Fatal(err)
	}

	due, err := s.DueDeliveries(ctx, now, 0)
	if err != nil {
		t.Fatal(err)
	}
	route := func(ds []store.Delivery) []string {
		var r []string
		for _, d := range ds {
			r = append(r, d.AlertID+"/"+d.Route)
		}
		return r
	}
	if got, want := route(due), []string{"a1/log", "a2/hook", "a1/hook"}; !slices.Equal(got, want) {
		t.Fatalf("DueDeliveries = %v, want %v (by NextAttempt, then id)", got, want)
	}
	d := due[2]
	if d.ID == 0 || d.EventID != "e1" || string(d.Payload) != `{"n":1}` || d.State != store.DeliveryPending || d.Attempts != 0 {
		t.Errorf("delivery = %+v", d)
	}
	sameTime(t, "NextAttempt", d.NextAttempt, now.Add(-time.Minute))
	sameTime(t, "CreatedAt", d.CreatedAt, t0)
	if lim, err := s.DueDeliveries(ctx, now, 1); err != nil || len(lim) != 1 || lim[0].ID != due[0].ID {
		t.Errorf("DueDeliveries(limit 1) = %v, %v", lim, err)
	}

	// a1/log delivered; a2/hook failed once and is retried later; a1/hook dead.
	upd := []store.Delivery{due[0], due[1], due[2]}
	upd[0].State, upd[0].Attempts, upd[0].UpdatedAt = store.DeliveryDelivered, 1, now
	upd[1].Attempts, upd[1].LastError, upd[1].NextAttempt, upd[1].UpdatedAt = 1, "503 from receiver", now.Add(10*time.Minute), now
	upd[2].State, upd[2].Attempts, upd[2].LastError, upd[2].UpdatedAt = store.DeliveryDead, 8, "gave up", now
	for _, u := range upd {
		if err := s.UpdateDelivery(ctx, u); err != nil {
			t.Fatal(err)
		}
	}
	if due, err := s.DueDeliveries(ctx, now, 0); err != nil || len(due) != 0 {
		t.Errorf("DueDeliveries after updates = %v, %v; want none", route(due), err)
	}
	due, err = s.DueDeliveries(ctx, now.Add(20*time.Minute), 0)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := route(due), []string{"a1/cmd", "a2/hook"}; !slices.Equal(got, want) {
		t.Errorf("DueDeliveries later = %v, want %v", got, want)
	}
	if len(due) == 2 {
		if due[1].Attempts != 1 || due[1].LastError != "503 from receiver" {
			t.Errorf("retried delivery = %+v", due[1])
		}
		sameTime(t, "UpdatedAt", due[1].UpdatedAt, now)
	}

	all, err := s.Deliveries(ctx, "", 0)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := route(all), []string{"a2/hook", "a1/cmd", "a1/log", "a1/hook"}; !slices.Equal(got, want) {
		t.Errorf("Deliveries(all) = %v, want %v (newest first)", got, want)
	}
	for _, tt := range []struct {
		state store.DeliveryState
		want  []string
	}{
		{store.DeliveryPending, []string{"a2/hook", "a1/cmd"}},
		{store.DeliveryDelivered, []string{"a1/log"}},
		{store.DeliveryDead, []string{"a1/hook"}},
	} {
		got, err := s.Deliveries(ctx, tt.state, 0)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(route(got), tt.want) {
			t.Errorf("Deliveries(%s) = %v, want %v", tt.state, route(got), tt.want)
		}
	}
	if got, err := s.Deliveries(ctx, "", 1); err != nil || len(got) != 1 {
		t.Errorf("Deliveries(limit 1) = %v, %v", got, err)
	}
	if dead, _ := s.Deliveries(ctx, store.DeliveryDead, 0); len(dead) == 1 && (dead[0].Attempts != 8 || dead[0].LastError != "gave up") {
		t.Errorf("dead delivery = %+v", dead[0])
	}
	if err := s.UpdateDelivery(ctx, store.Delivery{ID: 1 << 40, State: store.DeliveryDead}); !errors.Is(err, store.ErrNotFound) {
		t.Errorf("UpdateDelivery(unknown id) = %v, want ErrNotFound", err)
	}
	// Defaults: a delivery with zero times and state is pending and due at once.
	if err := s.PutAlert(ctx, alert("a3", "cal", "drift", "x2", t0), []store.Delivery{{Route: "hook", EventID: "e3"}}); err != nil {
		t.Fatal(err)
	}
	late, err := s.DueDeliveries(ctx, time.Now().Add(time.Minute), 0)
	if err != nil {
		t.Fatal(err)
	}
	if got := route(late); !slices.Contains(got, "a3/hook") {
		t.Errorf("a delivery without NextAttempt is not due: %v", got)
	}
}

// testConcurrent ingests into several files from several goroutines while
// others read; every row lands exactly once.
func testConcurrent(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	const writers, batches, rows = 4, 15, 20
	var wg sync.WaitGroup
	errc := make(chan error, 3*writers)
	for w := range writers {
		wg.Go(func() {
			path := fmt.Sprintf("w%d.csv", w)
			for i := range batches {
				first := 2 + i*rows
				if _, err := s.Ingest(ctx, batch("cal", path, 1, first, first+rows-1)); err != nil {
					errc <- err
					return
				}
			}
		})
		wg.Go(func() {
			for i := range batches {
				if _, err := s.Observations(ctx, "cal", store.ObsQuery{Limit: 50}); err != nil {
					errc <- err
					return
				}
				if _, err := s.CountObservations(ctx, "cal"); err != nil {
					errc <- err
					return
				}
				if err := s.SetModelState(ctx, store.ModelState{Model: fmt.Sprintf("m%d", w), State: "judging", At: t0.Add(time.Duration(i))}); err != nil {
					errc <- err
					return
				}
			}
		})
		wg.Go(func() {
			for i := range batches {
				a := alert(fmt.Sprintf("a%d", w), "cal", "drift", "x", t0.Add(time.Duration(i)))
				if err := s.PutAlert(ctx, a, []store.Delivery{{Route: "log", EventID: fmt.Sprintf("%d-%d", w, i)}}); err != nil {
					errc <- err
					return
				}
				if _, err := s.DueDeliveries(ctx, t0, 10); err != nil {
					errc <- err
					return
				}
			}
		})
	}
	wg.Wait()
	close(errc)
	for err := range errc {
		t.Error(err)
	}
	if n := count(t, s, "cal"); n != writers*batches*rows {
		t.Errorf("CountObservations = %d, want %d", n, writers*batches*rows)
	}
	got, err := s.Observations(ctx, "cal", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	for _, o := range got {
		k := fmt.Sprintf("%s:%d", o.Path, o.Line)
		if seen[k] {
			t.Errorf("%s stored twice", k)
		}
		seen[k] = true
	}
	if len(seen) != writers*batches*rows {
		t.Errorf("%d distinct rows, want %d", len(seen), writers*batches*rows)
	}
	if d, err := s.Deliveries(ctx, "", 0); err != nil || len(d) != writers*batches {
		t.Errorf("Deliveries = %d, %v; want %d", len(d), err, writers*batches)
	}
}

// testConcurrentSameBatch delivers the same batch from several goroutines at
// once: exactly one commits, the others get ErrStale.
func testConcurrentSameBatch(t *testing.T, s store.Store) {
	ctx := ctxT(t)
	const racers = 6
	for round := range 5 {
		b := batch("cal", "a.csv", 1, 2+10*round, 11+10*round)
		var wg sync.WaitGroup
		var mu sync.Mutex
		ok, stale := 0, 0
		for range racers {
			wg.Go(func() {
				_, err := s.Ingest(ctx, b)
				mu.Lock()
				defer mu.Unlock()
				switch {
				case err == nil:
					ok++
				case errors.Is(err, store.ErrStale):
					stale++
				default:
					t.Error(err)
				}
			})
		}
		wg.Wait()
		if ok != 1 || stale != racers-1 {
			t.Errorf("round %d: %d commits and %d stale, want 1 and %d", round, ok, stale, racers-1)
		}
	}
	if n := count(t, s, "cal"); n != 50 {
		t.Errorf("CountObservations = %d, want 50", n)
	}
}

// testCancelledContext: a call under a cancelled context fails with the
// context's error and stores nothing.
func testCancelledContext(t *testing.T, s store.Store) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := s.Ingest(ctx, batch("cal", "a.csv", 1, 2, 5)); !errors.Is(err, context.Canceled) {
		t.Errorf("Ingest under a cancelled context: %v, want context.Canceled", err)
	}
	if _, err := s.Observations(ctx, "cal", store.ObsQuery{}); !errors.Is(err, context.Canceled) {
		t.Errorf("Observations under a cancelled context: %v, want context.Canceled", err)
	}
	if err := s.PutAlert(ctx, alert("a", "cal", "drift", "x", t0), nil); !errors.Is(err, context.Canceled) {
		t.Errorf("PutAlert under a cancelled context: %v, want context.Canceled", err)
	}
	if n := count(t, s, "cal"); n != 0 {
		t.Errorf("CountObservations = %d after a cancelled Ingest, want 0", n)
	}
	mustIngest(t, s, batch("cal", "a.csv", 1, 2, 5))
}
