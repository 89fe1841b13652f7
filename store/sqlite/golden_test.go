package sqlite_test

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumb/engine"
	"plumb/store"
	"plumb/store/sqlite"
)

var update = flag.Bool("update", false, "rewrite testdata/golden files")

// TestGoldenHistory stores a small scenario of our own (a calibration
// run of a flow meter, with one rotation, one unreadable row, one refit and
// one alert) and compares what the store reads back, rendered as text, with
// testdata/golden/history.txt. Run with -update to rewrite it and review
// the diff.
func TestGoldenHistory(t *testing.T) {
	ctx := context.Background()
	at := time.Date(2026, 5, 4, 8, 0, 0, 0, time.UTC)
	db, _ := openTemp(t, sqliteClock(at))
	src := store.Source{Model: "flow", Path: "bench/run1.csv", Generation: 1, Inode: 4242, Size: 64, Offset: 64, Line: 3,
		Fingerprint: "9c1e", FingerprintLen: 64, Header: "t\x1fq\x1fdp", UpdatedAt: at}
	mk := func(line int, raw string, q, dp float64, d *store.Diagnostics) store.Observation {
		return store.Observation{Line: line, Raw: raw, Values: []float64{q, dp}, Time: at.Add(time.Duration(line) * time.Minute),
			ArrivedAt: at.Add(time.Hour + time.Duration(line)*time.Second), Arrival: d}
	}
	ids, err := db.Ingest(ctx, store.Batch{Source: src, Observations: []store.Observation{
		mk(2, "08:02,1.20,0.31", 1.2, 0.31, nil),
		mk(3, "08:03,1.45,0.47", 1.45, 0.47, &store.Diagnostics{Leverage: 1, Residual: 0, StudentizedInternal: math.NaN(),
			StudentizedExternal: math.NaN(), CooksDistance: math.NaN(), DFFITS: math.NaN(), DFBETAS: []float64{math.NaN(), math.NaN()},
			COVRATIO: math.NaN(), OutlierPBonferroni: math.NaN(), Verdict: "influential",
			Flags: []engine.Flag{{Measure: engine.MeasureLeverage, Family: engine.FamilyAbsolute, Value: 1, Cutoff: 0.667}}}),
	}})
	if err != nil {
		t.Fatal(err)
	}
	rot := src
	rot.Generation, rot.Offset, rot.Size, rot.Line, rot.Fingerprint, rot.UpdatedAt = 2, 40, 40, 3, "77ab", at.Add(2*time.Hour)
	if _, err := db.Ingest(ctx, store.Batch{Source: rot,
		Observations: []store.Observation{mk(2, "09:02,1.31,0.36", 1.31, 0.36, &store.Diagnostics{Leverage: 0.2, Residual: -0.01,
			StudentizedInternal: -0.5, StudentizedExternal: -0.48, CooksDistance: 0.03, DFFITS: -0.25, DFBETAS: []float64{0.1, -0.2},
			COVRATIO: 1.4, OutlierPBonferroni: 1, Verdict: "ordinary", Flags: nil})},
		Quarantine: []store.QuarantineRow{{Line: 3, Column: 2, Raw: "09:03,n/a,0.40", Reason: `bench/run1.csv:3:2: "n/a" is not a number`, At: at.Add(2 * time.Hour)}},
	}); err != nil {
		t.Fatal(err)
	}
	fit, err := db.RecordFit(ctx, store.FitRecord{Model: "flow", At: at.Add(3 * time.Hour), N: 3, P: 2, Terms: []string{"intercept", "dp"},
		Estimates: []float64{0.71, 1.58}, StdErrors: []float64{0.02, 0.05}, Sigma: 0.012, RSquared: 0.998, Fragility: -2, FragilityK: 0,
		Detail: `{"max_cooks":0.41}`, LastObsID: ids[1]},
		[]store.VerdictChange{{ObsID: ids[1], From: "influential", To: "ordinary", Flags: nil}})
	if err != nil {
		t.Fatal(err)
	}
	if err := db.SetModelState(ctx, store.ModelState{Model: "flow", State: "judging", At: at.Add(3 * time.Hour)}); err != nil {
		t.Fatal(err)
	}
	if err := db.PutAlert(ctx, store.AlertRecord{ID: "flow-lev-3", Model: "flow", Kind: "suspect", Subject: "bench/run1.csv:3",
		Severity: "warning", State: "open", FirstSeen: at.Add(time.Hour), LastSeen: at.Add(3 * time.Hour), Doc: `{"caution":"flagged for review"}`},
		[]store.Delivery{{Route: "log", EventID: "flow-lev-3-1", Payload: []byte(`{"id":"flow-lev-3-1"}`)}}); err != nil {
		t.Fatal(err)
	}

	var w strings.Builder
	ts := func(t time.Time) string {
		if t.IsZero() {
			return "-"
		}
		return t.Format(time.RFC3339Nano)
	}
	srcs, err := db.Sources(ctx, "flow")
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range srcs {
		fmt.Fprintf(&w, "source %s gen=%d inode=%d size=%d offset=%d line=%d fp=%s/%d header=%q rows=%d quarantined=%d updated=%s\n",
			s.Path, s.Generation, s.Inode, s.Size, s.Offset, s.Line, s.Fingerprint, s.FingerprintLen, s.Header, s.Rows, s.Quarantined, ts(s.UpdatedAt))
	}
	obs, err := db.Observations(ctx, "flow", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	for _, o := range obs {
		fmt.Fprintf(&w, "obs %d %s gen=%d line=%d raw=%q values=%v time=%s arrived=%s\n",
			o.ID, o.Path, o.Generation, o.Line, o.Raw, o.Values, ts(o.Time), ts(o.ArrivedAt))
		if d := o.Arrival; d != nil {
			fmt.Fprintf(&w, "    arrival h=%v e=%v r=%v t=%v D=%v dffits=%v dfbetas=%v covratio=%v p=%v verdict=%s flags=%s\n",
				d.Leverage, d.Residual, d.StudentizedInternal, d.StudentizedExternal, d.CooksDistance, d.DFFITS, d.DFBETAS,
				d.COVRATIO, d.OutlierPBonferroni, d.Verdict, flagsText(d.Flags))
		}
	}
	qs, err := db.Quarantined(ctx, "", 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range qs {
		fmt.Fprintf(&w, "quarantine %d %s/%s gen=%d %d:%d raw=%q reason=%q at=%s\n", q.ID, q.Model, q.Path, q.Generation, q.Line, q.Column, q.Raw, q.Reason, ts(q.At))
	}
	fits, err := db.Fits(ctx, "flow", 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range fits {
		fmt.Fprintf(&w, "fit %d at=%s n=%d p=%d terms=%v est=%v se=%v sigma=%v r2=%v fragility=%d/%d last=%d detail=%s\n",
			f.ID, ts(f.At), f.N, f.P, f.Terms, f.Estimates, f.StdErrors, f.Sigma, f.RSquared, f.Fragility, f.FragilityK, f.LastObsID, f.Detail)
	}
	changes, err := db.VerdictChanges(ctx, ids[1])
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range changes {
		fmt.Fprintf(&w, "change obs=%d fit=%d at=%s %s -> %s flags=%s\n", c.ObsID, c.FitID, ts(c.At), c.From, c.To, flagsText(c.Flags))
	}
	cur, err := db.CurrentVerdicts(ctx, "flow")
	if err != nil {
		t.Fatal(err)
	}
	fmt.Fprintf(&w, "current %v (fit %d)\n", cur, fit)
	states, err := db.ModelStates(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range states {
		fmt.Fprintf(&w, "state %s %s %q at=%s\n", s.Model, s.State, s.Reason, ts(s.At))
	}
	as, err := db.Alerts(ctx, store.AlertQuery{})
	if err != nil {
		t.Fatal(err)
	}
	for _, a := range as {
		fmt.Fprintf(&w, "alert %s %s/%s/%s %s %s first=%s last=%s doc=%s\n", a.ID, a.Model, a.Kind, a.Subject, a.Severity, a.State, ts(a.FirstSeen), ts(a.LastSeen), a.Doc)
	}
	ds, err := db.Deliveries(ctx, "", 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, d := range ds {
		fmt.Fprintf(&w, "delivery %d %s %s %s %s attempts=%d next=%s created=%s updated=%s error=%q payload=%s\n", d.ID, d.AlertID, d.Route, d.EventID,
			d.State, d.Attempts, ts(d.NextAttempt), ts(d.CreatedAt), ts(d.UpdatedAt), d.LastError, d.Payload)
	}

	golden := filepath.Join("testdata", "golden", "history.txt")
	if *update {
		if err := os.MkdirAll(filepath.Dir(golden), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(golden, []byte(w.String()), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (run with -update to create it)", err)
	}
	if got := w.String(); got != string(want) {
		t.Errorf("store output differs from %s (run with -update and review the diff):\ngot:\n%s\nwant:\n%s", golden, got, want)
	}
}

// sqliteClock fixes the store's clock at t, for outputs that hold defaults.
func sqliteClock(t time.Time) sqlite.Option {
	return sqlite.WithClock(func() time.Time { return t })
}

// flagsText prints flags in the JSON form the golden file has always shown
// (the form of the flags column).
func flagsText(fs []engine.Flag) string {
	type flag struct {
		Measure string  `json:"measure"`
		Family  string  `json:"family"`
		Term    string  `json:"term,omitempty"`
		Value   float64 `json:"value"`
		Cutoff  float64 `json:"cutoff"`
	}
	out := make([]flag, len(fs))
	for i, f := range fs {
		out[i] = flag{f.Measure, f.Family, f.Term, f.Value, f.Cutoff}
	}
	b, err := json.Marshal(out)
	if err != nil {
		return err.Error()
	}
	return string(b)
}
