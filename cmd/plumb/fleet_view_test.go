package main

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/daemon"
	"plumb/cmd/plumb/internal/web"
	"plumb/store"
	"plumb/store/postgres"
)

// fleetHistory writes models line-00.. into the shared history, each with
// rows rows, fits fits, two open alerts and a state; the first owned
// ones are leased to a made-up owner (released at cleanup).
func fleetHistory(tb testing.TB, db *postgres.DB, models, rows, fits, owned int) {
	tb.Helper()
	ctx := context.Background()
	at := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	for m := range models {
		name := fmt.Sprintf("line-%02d", m)
		var last int64
		for k := 0; k*500 < rows; k++ {
			b := store.Batch{Source: store.Source{Model: name, Path: "feed.csv", Generation: 1, Offset: int64((k + 1) * 5000)}}
			for l := k * 500; l < min((k+1)*500, rows); l++ {
				b.Observations = append(b.Observations, store.Observation{Line: l + 2, Raw: fmt.Sprintf("%d,%d", l, l),
					Values: []float64{float64(l), 2 + 0.5*float64(l)}, ArrivedAt: at})
			}
			ids, err := db.Ingest(ctx, b)
			if err != nil {
				tb.Fatal(err)
			}
			last = ids[len(ids)-1]
		}
		for i := range fits {
			f := store.FitRecord{Model: name, At: at.Add(time.Duration(i) * time.Minute), N: rows, P: 2,
				Terms: []string{"intercept", "x"}, Estimates: []float64{2, 0.5}, StdErrors: []float64{0.1, 0.01},
				Sigma: 0.1, RSquared: 0.99, Fragility: -1, FragilityK: 3, Detail: `{"max_cooks_distance":0.2,"response":"y"}`, LastObsID: last}
			if _, err := db.RecordFit(ctx, f, nil); err != nil {
				tb.Fatal(err)
			}
		}
		for i := range 2 {
			a := store.AlertRecord{ID: fmt.Sprintf("%s/%d", name, i), Model: name, Kind: "suspect_point", Subject: fmt.Sprint(i),
				Severity: "critical", State: "open", FirstSeen: at, LastSeen: at, Doc: "{}"}
			if err := db.PutAlert(ctx, a, nil); err != nil {
				tb.Fatal(err)
			}
		}
		if err := db.SetModelState(ctx, store.ModelState{Model: name, State: "judging", At: at}); err != nil {
			tb.Fatal(err)
		}
		if m < owned {
			l, err := db.Acquire(ctx, name, postgres.Owner{Host: "line-host-" + fmt.Sprint(m), PID: 1000 + m}, postgres.AcquireOptions{})
			if err != nil {
				tb.Fatal(err)
			}
			tb.Cleanup(func() { l.Release(context.Background()) })
		}
	}
}

// fleetViewer is a daemon with no models on the shared history, serving
// its dashboard through web.New.
func fleetViewer(tb testing.TB, url string) http.Handler {
	tb.Helper()
	dir := tb.TempDir()
	p := filepath.Join(dir, "viewer.toml")
	if err := os.WriteFile(p, []byte("state_env = \"PLUMB_FLEET_VIEW_STATE\"\nlisten = \"\"\n"), 0o644); err != nil {
		tb.Fatal(err)
	}
	tb.Setenv("PLUMB_FLEET_VIEW_STATE", url)
	cfg, err := config.Load(p)
	if err != nil {
		tb.Fatal(err)
	}
	d, err := daemon.New(context.Background(), cfg, daemon.Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() { d.Close() })
	return web.New(d.View(), web.Options{})
}

func getPage(tb testing.TB, h http.Handler, path string) string {
	tb.Helper()
	req := httptest.NewRequest("GET", path, nil)
	req.Host = "127.0.0.1:8765"
	w := httptest.NewRecorder()
	h.ServeHTTP(w, req)
	if w.Code != 200 {
		tb.Fatalf("GET %s: %d %s", path, w.Code, w.Body.String())
	}
	return w.Body.String()
}

// TestPostgresFleetOverview: a daemon with no models configured serves
// the overview of every model of the shared history, each with who runs
// it, and each model's page and API.
func TestPostgresFleetOverview(t *testing.T) {
	schema, url := fleetSchema(t)
	db, err := postgres.Open(context.Background(), os.Getenv("PLUMB_TEST_POSTGRES"), postgres.WithSchema(schema))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	fleetHistory(t, db, 5, 40, 3, 3)
	h := fleetViewer(t, url)
	page := getPage(t, h, "/")
	for m := range 5 {
		if !strings.Contains(page, fmt.Sprintf(`data-model="line-%02d"`, m)) {
			t.Errorf("overview lacks line-%02d", m)
		}
	}
	if n := strings.Count(page, "data-owner"); n != 3 {
		t.Errorf("overview shows %d owners, want the 3 leased models'", n)
	}
	if !strings.Contains(page, "line-host-1 pid 1001") {
		t.Errorf("overview does not name line-01's owner")
	}
	detail := getPage(t, h, "/models/line-02")
	if !strings.Contains(detail, "line-02") || !strings.Contains(detail, "data-remote") || !strings.Contains(detail, "line-host-2 pid 1002") {
		t.Errorf("model page of line-02 does not name it, say it is run elsewhere, or name its owner")
	}
	api := getPage(t, h, "/api/v1/models")
	for _, want := range []string{`"name":"line-04"`, `"remote":true`, `"host":"line-host-0"`, `"response":"y"`} {
		if !strings.Contains(api, want) {
			t.Errorf("/api/v1/models lacks %s", want)
		}
	}
}

// BenchmarkFleetOverviewPostgres serves the dashboard's overview page of
// a fleet of 50 models (2,000 rows and 300 fits each, 2 open alerts,
// half of them owned) from a daemon with no models of its own. Target:
// under 200 ms a page.
func BenchmarkFleetOverviewPostgres(b *testing.B) {
	schema, url := fleetSchema(b)
	db, err := postgres.Open(context.Background(), os.Getenv("PLUMB_TEST_POSTGRES"), postgres.WithSchema(schema))
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	fleetHistory(b, db, 50, 2000, 300, 25)
	h := fleetViewer(b, url)
	b.ResetTimer()
	for b.Loop() {
		if page := getPage(b, h, "/"); !strings.Contains(page, `data-model="line-49"`) {
			b.Fatal("the overview lacks line-49")
		}
	}
}
