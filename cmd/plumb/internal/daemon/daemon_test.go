package daemon

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/config"
	"plumb/store"
)

// testConfig writes a config into dir and loads it.
func testConfig(t testing.TB, dir, body string) *config.Config {
	t.Helper()
	p := filepath.Join(dir, "plumb.toml")
	src := "state = \"plumb.db\"\nlisten = \"\"\n[watch]\ndebounce = \"5ms\"\nrefresh = \"20ms\"\nidle_flush = \"1h\"\n" + body
	if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := config.Load(p)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

const lineModel = `
[[model]]
name = "%s"
folder = "%s"
response = "y"
terms = ["x"]
[model.fragility]
enabled = %v
`

// feed writes a header and n rows of y = 2 + 0.5x + noise.
func feed(t testing.TB, path string, rng *rand.Rand, first, n int, header bool) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	f, err := os.OpenFile(path, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var b strings.Builder
	if header {
		b.WriteString("id,x,y\n")
	}
	for i := first; i < first+n; i++ {
		x := float64(i%50) / 5
		fmt.Fprintf(&b, "%d,%g,%g\n", i, x, 2+0.5*x+0.1*rng.NormFloat64())
	}
	if _, err := f.WriteString(b.String()); err != nil {
		t.Fatal(err)
	}
}

type running struct {
	d      *Daemon
	cancel context.CancelFunc
	done   chan error
	reload chan *config.Config
}

func start(t testing.TB, c *config.Config) *running {
	t.Helper()
	log := slog.New(slog.NewTextHandler(io.Discard, nil))
	if testing.Verbose() {
		log = slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelWarn}))
	}
	d, err := New(context.Background(), c, Options{Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	r := &running{d: d, cancel: cancel, done: make(chan error, 1), reload: make(chan *config.Config)}
	go func() { r.done <- d.Run(ctx, r.reload) }()
	t.Cleanup(func() { r.stop(t) })
	return r
}

func (r *running) stop(t testing.TB) {
	if r.cancel == nil {
		return
	}
	r.cancel()
	if err := <-r.done; err != nil {
		t.Errorf("Run: %v", err)
	}
	r.d.Close()
	r.cancel = nil
}

// waitFor polls cond until it holds or 10 s pass.
func waitFor(t testing.TB, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for time.Now().Before(deadline) {
		if cond() {
			return
		}
		time.Sleep(10 * time.Millisecond)
	}
	t.Fatalf("timed out waiting for %s", what)
}

func count(t testing.TB, s store.Store, model string) int64 {
	n, err := s.CountObservations(context.Background(), model)
	if err != nil {
		t.Fatal(err)
	}
	return n
}

// TestIngestJudgeRestart: rows are judged on arrival, stored once, and a
// restart resumes from the stored position without doubling a row.
func TestIngestJudgeRestart(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", true))
	rng := rand.New(rand.NewPCG(1, 1))
	file := filepath.Join(dir, "in", "a.csv")
	feed(t, file, rng, 0, 40, true)
	r := start(t, c)
	waitFor(t, "40 rows", func() bool { return count(t, r.d.store, "m") == 40 })
	waitFor(t, "a fit", func() bool {
		_, err := r.d.store.LastFit(context.Background(), "m")
		return err == nil
	})
	r.stop(t)

	feed(t, file, rng, 40, 25, false)
	r = start(t, c)
	waitFor(t, "65 rows", func() bool { return count(t, r.d.store, "m") == 65 })
	time.Sleep(100 * time.Millisecond)
	obs, err := r.d.store.Observations(context.Background(), "m", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	lines := map[int]bool{}
	judged := 0
	for _, o := range obs {
		if lines[o.Line] {
			t.Errorf("line %d stored twice", o.Line)
		}
		lines[o.Line] = true
		if o.Arrival != nil {
			judged++
			if o.Arrival.Leverage <= 0 || o.Arrival.Leverage >= 1 {
				t.Errorf("line %d: leverage %g at arrival", o.Line, o.Arrival.Leverage)
			}
		}
	}
	if len(obs) != 65 {
		t.Fatalf("%d observations, want 65", len(obs))
	}
	// min_rows defaults to p+5 = 7: rows from the 7th on are judged.
	if judged != 65-6 {
		t.Errorf("%d rows judged at arrival, want %d", judged, 65-6)
	}
	m := r.d.models["m"]
	m.mu.Lock()
	n := len(m.rows.ids)
	m.mu.Unlock()
	if n != 65 {
		t.Errorf("in-memory rows %d, want 65", n)
	}
	// The fit count and the last fit survive the restart: the count
	// carried over plus this run's fits is what the store holds.
	waitFor(t, "fit count as stored", func() bool {
		stored, err := r.d.store.CountFits(context.Background(), "m")
		last, lerr := r.d.store.LastFit(context.Background(), "m")
		m.mu.Lock()
		defer m.mu.Unlock()
		return err == nil && lerr == nil && stored >= 2 && m.ref.fits == stored && m.ref.fitID == last.ID
	})
}

// TestModelsIsolated: a model whose data cannot be fitted is blocked with a
// reason, and the other model reading the same folder goes on.
func TestModelsIsolated(t *testing.T) {
	dir := t.TempDir()
	body := fmt.Sprintf(lineModel, "good", "in", false) + `
[[model]]
name = "bad"
folder = "in"
response = "y"
terms = ["x", "c"]
`
	c := testConfig(t, dir, body)
	var b strings.Builder
	b.WriteString("x,c,y\n")
	for i := 0; i < 30; i++ {
		fmt.Fprintf(&b, "%d,3,%d\n", i, 2*i+1) // c is constant: "bad" cannot be fitted
	}
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "in", "f.csv"), []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	r := start(t, c)
	waitFor(t, "good fitted", func() bool {
		_, err := r.d.store.LastFit(context.Background(), "good")
		return err == nil
	})
	waitFor(t, "bad blocked", func() bool {
		st, _ := r.d.store.ModelStates(context.Background())
		for _, s := range st {
			if s.Model == "bad" && s.State == stateBlocked && strings.Contains(s.Reason, "constant") {
				return true
			}
		}
		return false
	})
	waitFor(t, "blocked alert", func() bool {
		as, _ := r.d.store.Alerts(context.Background(), store.AlertQuery{Model: "bad", Kind: "blocked", State: "open"})
		return len(as) == 1
	})
}

// TestHeaderChangeBlocks: a file whose header changes blocks the model with
// a reason rather than misreading its columns.
func TestHeaderChangeBlocks(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false))
	rng := rand.New(rand.NewPCG(2, 2))
	file := filepath.Join(dir, "in", "a.csv")
	feed(t, file, rng, 0, 20, true)
	r := start(t, c)
	waitFor(t, "20 rows", func() bool { return count(t, r.d.store, "m") == 20 })
	// Replace the file (by rename, so the watcher sees the new content
	// whole) with one whose header has another column instead of x.
	tmp := filepath.Join(dir, "in", ".a.csv.tmp")
	if err := os.WriteFile(tmp, []byte("id,temp,y\n1,2,3\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Rename(tmp, file); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "blocked", func() bool {
		st, _ := r.d.store.ModelStates(context.Background())
		for _, s := range st {
			if s.Model == "m" && s.State == stateBlocked && strings.Contains(s.Reason, "header") {
				return true
			}
		}
		return false
	})
	if n := count(t, r.d.store, "m"); n != 20 {
		t.Errorf("%d rows after the header change, want 20", n)
	}
}

// TestReload: a reload adds a model and drops another without losing the
// history of either.
func TestReload(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "a", "in", false))
	rng := rand.New(rand.NewPCG(3, 3))
	feed(t, filepath.Join(dir, "in", "f.csv"), rng, 0, 15, true)
	r := start(t, c)
	waitFor(t, "a has rows", func() bool { return count(t, r.d.store, "a") == 15 })
	c2 := testConfig(t, dir, fmt.Sprintf(lineModel, "b", "in", false))
	r.reload <- c2
	waitFor(t, "b has rows", func() bool { return count(t, r.d.store, "b") == 15 })
	if n := count(t, r.d.store, "a"); n != 15 {
		t.Errorf("model a kept %d rows, want 15", n)
	}
	feed(t, filepath.Join(dir, "in", "f.csv"), rng, 15, 5, false)
	waitFor(t, "b has new rows", func() bool { return count(t, r.d.store, "b") == 20 })
	if n := count(t, r.d.store, "a"); n != 15 {
		t.Errorf("removed model a read %d rows, want 15", n)
	}
}
