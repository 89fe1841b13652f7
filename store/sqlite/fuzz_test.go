package sqlite_test

import (
	"context"
	"math"
	"testing"
	"time"

	"plumb/engine"
	"plumb/store"
)

// FuzzObservationRoundTrip ingests one observation with arbitrary raw
// bytes, value bit patterns and diagnostics and checks that it reads back
// bit for bit (scalar diagnostics up to NaN payloads and the sign of zero,
// which a REAL column does not keep).
func FuzzObservationRoundTrip(f *testing.F) {
	f.Add("1.5,2,3", uint64(0x3ff8000000000000), uint64(0x7ff8000000000001), 0.5, "ordinary", int64(1_700_000_000_123_456_789))
	f.Add("a\x00b,\xff\xfe,\"q\"", uint64(0x8000000000000000), uint64(0xfff0000000000000), math.NaN(), "", int64(-1))
	f.Add("", uint64(0), uint64(1), math.Inf(-1), "suspect", int64(0))
	db, _ := openTemp(f)
	ctx := context.Background()
	line := 1
	f.Fuzz(func(t *testing.T, raw string, v0, v1 uint64, diag float64, verdict string, ns int64) {
		line++
		o := store.Observation{
			Line: line, Raw: raw,
			Values: []float64{math.Float64frombits(v0), math.Float64frombits(v1)},
			Arrival: &store.Diagnostics{
				Leverage: diag, Residual: -diag, StudentizedInternal: diag, StudentizedExternal: diag,
				CooksDistance: diag, DFFITS: diag, COVRATIO: diag, OutlierPBonferroni: diag,
				DFBETAS: []float64{math.Float64frombits(v1), diag}, Verdict: engine.Word(verdict),
				Flags: []engine.Flag{{Measure: raw, Family: verdict, Term: raw, Value: diag, Cutoff: math.Float64frombits(v0)}},
			},
		}
		if ns != 0 {
			o.Time = timeFromNanos(ns)
		}
		b := store.Batch{Source: store.Source{Model: "fuzz", Path: "f.csv", Generation: 1, Offset: int64(line), Line: line},
			Observations: []store.Observation{o}}
		ids, err := db.Ingest(ctx, b)
		if err != nil {
			t.Fatal(err)
		}
		got, err := db.Observations(ctx, "fuzz", store.ObsQuery{AfterID: ids[0] - 1, Limit: 1})
		if err != nil || len(got) != 1 {
			t.Fatalf("Observations = %v, %v", got, err)
		}
		g := got[0]
		if g.Raw != raw || g.Arrival == nil || string(g.Arrival.Verdict) != verdict {
			t.Fatalf("text round trip: raw %q verdict %q, want %q %q", g.Raw, g.Arrival.Verdict, raw, verdict)
		}
		// Flag text is kept as UTF-8 (store.CopyFlags); numbers bit for bit
		// up to NaN payloads.
		wantFlag := store.CopyFlags(o.Arrival.Flags)[0]
		if fl := g.Arrival.Flags; len(fl) != 1 || fl[0].Measure != wantFlag.Measure || fl[0].Family != wantFlag.Family ||
			fl[0].Term != wantFlag.Term || !sameBits(fl[0].Value, diag) || !sameBits(fl[0].Cutoff, math.Float64frombits(v0)) {
			t.Fatalf("flags = %+v, want %+v", g.Arrival.Flags, wantFlag)
		}
		if len(g.Values) != 2 || math.Float64bits(g.Values[0]) != v0 || math.Float64bits(g.Values[1]) != v1 {
			t.Fatalf("values = %v, want bits %x %x", g.Values, v0, v1)
		}
		if len(g.Arrival.DFBETAS) != 2 || math.Float64bits(g.Arrival.DFBETAS[0]) != v1 {
			t.Fatalf("DFBETAS = %v", g.Arrival.DFBETAS)
		}
		for _, x := range []float64{g.Arrival.Leverage, g.Arrival.CooksDistance, g.Arrival.COVRATIO, -g.Arrival.Residual} {
			if !(x == diag || (math.IsNaN(x) && math.IsNaN(diag))) {
				t.Fatalf("diagnostic = %v, want %v", x, diag)
			}
		}
		if !g.Time.Equal(o.Time) {
			t.Fatalf("time = %v, want %v", g.Time, o.Time)
		}
	})
}

// sameBits: equal bit patterns, or both NaN.
func sameBits(a, b float64) bool {
	return math.Float64bits(a) == math.Float64bits(b) || (math.IsNaN(a) && math.IsNaN(b))
}

func timeFromNanos(ns int64) time.Time { return time.Unix(0, ns) }
