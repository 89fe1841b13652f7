package postgres_test

import (
	"context"
	"fmt"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/postgres"
)

// fleetModel writes one model's history: rows rows in batches of 100,
// fits fits, two open alerts and one resolved.
func fleetModel(tb testing.TB, db *postgres.DB, model string, rows, fits int) {
	tb.Helper()
	ctx := context.Background()
	var last int64
	for k := 0; k*100 < rows; k++ {
		b := store.Batch{Source: store.Source{Model: model, Path: "in/a.csv", Generation: 1, Offset: int64((k + 1) * 1000)}}
		for l := k * 100; l < min((k+1)*100, rows); l++ {
			b.Observations = append(b.Observations, benchObs(l+2, t0()))
		}
		ids, err := db.Ingest(ctx, b)
		if err != nil {
			tb.Fatal(err)
		}
		last = ids[len(ids)-1]
	}
	for i := range fits {
		f := store.FitRecord{Model: model, At: t0().Add(time.Duration(i) * time.Minute), N: rows, P: 3,
			Terms: []string{"intercept", "x1", "x2"}, Estimates: []float64{1, 2, float64(i)}, StdErrors: []float64{.1, .2, .3},
			Sigma: 0.5, RSquared: 0.9, Fragility: -1, FragilityK: 3, Detail: fmt.Sprintf(`{"fit":%d}`, i), LastObsID: last}
		if _, err := db.RecordFit(ctx, f, nil); err != nil {
			tb.Fatal(err)
		}
	}
	for i, st := range []string{"open", "open", "resolved"} {
		a := store.AlertRecord{ID: fmt.Sprintf("%s/%d", model, i), Model: model, Kind: "suspect", Subject: fmt.Sprint(i),
			Severity: "warning", State: st, FirstSeen: t0(), LastSeen: t0(), Doc: "{}"}
		if err := db.PutAlert(ctx, a, nil); err != nil {
			tb.Fatal(err)
		}
	}
	if err := db.SetModelState(ctx, store.ModelState{Model: model, State: "judging", At: t0()}); err != nil {
		tb.Fatal(err)
	}
}

func t0() time.Time { return time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC) }

// TestPostgresFleet: the fleet view lists every daemon's models with
// their counts, newest fit, alerts and owner.
func TestPostgresFleet(t *testing.T) {
	one, schema := openTemp(t)
	two := openSame(t, schema)
	ctx := context.Background()
	fleetModel(t, one, "cal", 250, 3)
	fleetModel(t, two, "press", 100, 0)
	if err := two.SetModelState(ctx, store.ModelState{Model: "idle", State: "blocked", Reason: "folder missing", At: t0()}); err != nil {
		t.Fatal(err)
	}
	l, err := one.Acquire(ctx, "cal", postgres.Owner{Host: "line-1", PID: 101, Label: "/etc/plumb/line1.toml"}, postgres.AcquireOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer l.Release(ctx)
	lp, err := two.Acquire(ctx, "press", postgres.Owner{Host: "line-2", PID: 202}, postgres.AcquireOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := lp.Release(ctx); err != nil {
		t.Fatal(err)
	}
	for _, db := range []*postgres.DB{one, two} {
		fl, err := db.Fleet(ctx)
		if err != nil {
			t.Fatal(err)
		}
		if len(fl) != 3 || fl[0].Model != "cal" || fl[1].Model != "idle" || fl[2].Model != "press" {
			t.Fatalf("Fleet = %+v, want cal, idle, press", fl)
		}
		cal, idle, press := fl[0], fl[1], fl[2]
		if cal.Rows != 250 || cal.Fits != 3 || cal.OpenAlerts != 2 || cal.State.State != "judging" ||
			cal.LastFit == nil || cal.LastFit.Detail != `{"fit":2}` || cal.LastFit.Estimates[2] != 2 {
			t.Errorf("cal = %+v (last fit %+v)", cal, cal.LastFit)
		}
		if cal.Owner == nil || cal.Owner.Host != "line-1" || cal.Owner.PID != 101 || !cal.Owner.Alive {
			t.Errorf("cal owner = %+v, want line-1/101 alive", cal.Owner)
		}
		if press.Rows != 100 || press.Fits != 0 || press.LastFit != nil || press.Owner == nil || press.Owner.Alive {
			t.Errorf("press = %+v, owner %+v; want 100 rows, no fit, owner not alive", press, press.Owner)
		}
		if idle.State.Reason != "folder missing" || idle.Rows != 0 || idle.Owner != nil {
			t.Errorf("idle = %+v", idle)
		}
	}
}

// BenchmarkFleet reads the fleet view of 50 models, each with 2,000
// rows and 300 fits.
func BenchmarkFleet(b *testing.B) {
	db, _ := openTemp(b)
	for i := range 50 {
		fleetModel(b, db, fmt.Sprintf("line-%02d", i), 2000, 300)
	}
	ctx := context.Background()
	b.ResetTimer()
	for b.Loop() {
		fl, err := db.Fleet(ctx)
		if err != nil || len(fl) != 50 {
			b.Fatal(len(fl), err)
		}
	}
}
