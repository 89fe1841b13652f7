package daemon

import (
	"bytes"
	"context"
	"crypto/rand"
	"encoding/hex"
	"fmt"
	"io"
	"log/slog"
	mrand "math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"plumb/cmd/plumb/internal/config"
	"plumb/store"
)

// pgState makes an empty history of its own on the test server
// (PLUMB_TEST_POSTGRES), in a fresh schema dropped at cleanup, and
// returns the name of an environment variable holding its URL (the URL
// carries the test role's password, so a config names it by state_env);
// without a server it skips the test.
func pgState(tb testing.TB) string {
	tb.Helper()
	u := os.Getenv("PLUMB_TEST_POSTGRES")
	if u == "" {
		tb.Skip("PLUMB_TEST_POSTGRES is not set: no PostgreSQL server to test against " +
			"(start a throwaway one with: eval \"$(testdata/pg/cluster.sh start)\")")
	}
	b := make([]byte, 6)
	rand.Read(b)
	schema := "plumbd_" + hex.EncodeToString(b)
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	conn, err := pgx.Connect(ctx, u)
	if err != nil {
		tb.Fatal(err)
	}
	defer conn.Close(ctx)
	if _, err := conn.Exec(ctx, "CREATE SCHEMA "+schema); err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		defer cancel()
		conn, err := pgx.Connect(ctx, u)
		if err != nil {
			tb.Errorf("drop schema %s: %v", schema, err)
			return
		}
		defer conn.Close(ctx)
		if _, err := conn.Exec(ctx, "DROP SCHEMA IF EXISTS "+schema+" CASCADE"); err != nil {
			tb.Errorf("drop schema %s: %v", schema, err)
		}
	})
	sep := "?"
	if strings.Contains(u, "?") {
		sep = "&"
	}
	env := "PLUMB_TEST_STATE_" + strings.ToUpper(schema)
	tb.Setenv(env, u+sep+"search_path="+schema)
	return env
}

// pgConfig writes a config with the state URL into dir and loads it.
func pgConfig(t testing.TB, dir, state, body string) *config.Config {
	t.Helper()
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, "plumb.toml")
	src := fmt.Sprintf("state_env = %q\nlisten = \"\"\n[watch]\ndebounce = \"5ms\"\nrefresh = \"20ms\"\nidle_flush = \"1h\"\n", state) + body
	if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := config.Load(p)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// logBuffer is a goroutine-safe log sink.
type logBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *logBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *logBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

func startLogged(t testing.TB, c *config.Config, w io.Writer) *running {
	t.Helper()
	log := slog.New(slog.NewTextHandler(w, &slog.HandlerOptions{Level: slog.LevelInfo}))
	d, err := New(context.Background(), c, Options{Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	d.leases.poll, d.leases.check = 50*time.Millisecond, 200*time.Millisecond
	ctx, cancel := context.WithCancel(context.Background())
	r := &running{d: d, cancel: cancel, done: make(chan error, 1), reload: make(chan *config.Config)}
	go func() { r.done <- d.Run(ctx, r.reload) }()
	t.Cleanup(func() { r.stop(t) })
	return r
}

func modelNames(t testing.TB, r *running) map[string]string {
	t.Helper()
	ms, err := r.d.View().Models(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]string{}
	for _, m := range ms {
		owner := "-"
		if m.Owner != nil {
			owner = fmt.Sprintf("%d alive=%v", m.Owner.PID, m.Owner.Alive)
		}
		if m.Remote {
			owner += " remote"
		}
		out[m.Name] = owner
	}
	return out
}

// TestPostgresStandbyTakesOver: two daemons configured with the same line
// share one database. The first owns the line; the second stands by
// (logging it once) and shows the line as the first's; when the first
// stops, the second takes the line over from the committed read position
// and every row is stored exactly once. A daemon with no models lists
// every model of the history.
func TestPostgresStandbyTakesOver(t *testing.T) {
	state := pgState(t)
	root := t.TempDir()
	in := filepath.Join(root, "line-a")
	body := fmt.Sprintf(lineModel, "line-a", in, false)
	var logA, logB logBuffer
	a := startLogged(t, pgConfig(t, filepath.Join(root, "a"), state, body), &logA)
	rng := mrand.New(mrand.NewPCG(7, 7))
	feed(t, filepath.Join(in, "a.csv"), rng, 0, 40, true)
	waitFor(t, "daemon A to store 40 rows", func() bool { return count(t, a.d.store, "line-a") == 40 })

	b := startLogged(t, pgConfig(t, filepath.Join(root, "b"), state, body+fmt.Sprintf(lineModel, "line-b", filepath.Join(root, "line-b"), false)), &logB)
	feed(t, filepath.Join(root, "line-b", "b.csv"), rng, 0, 30, true)
	waitFor(t, "daemon B to store line-b's 30 rows", func() bool { return count(t, b.d.store, "line-b") == 30 })
	waitFor(t, "B standing by for line-a", func() bool { return strings.Contains(logB.String(), "standing by") })
	if b.d.owns("line-a") {
		t.Fatal("B owns line-a while A runs")
	}
	feed(t, filepath.Join(in, "a.csv"), rng, 40, 40, false)
	waitFor(t, "A to store 80 rows", func() bool { return count(t, a.d.store, "line-a") == 80 })

	// Every daemon's view lists both lines.
	waitFor(t, "A's view to list line-b as remote", func() bool {
		return strings.HasSuffix(modelNames(t, a)["line-b"], "alive=true remote")
	})
	empty := startLogged(t, pgConfig(t, filepath.Join(root, "viewer"), state, ""), io.Discard)
	names := modelNames(t, empty)
	if len(names) != 2 || !strings.Contains(names["line-a"], "remote") || !strings.Contains(names["line-b"], "remote") {
		t.Errorf("a daemon with no models lists %v, want line-a and line-b, both remote", names)
	}
	if d, err := empty.d.View().Model(context.Background(), "line-b"); err != nil || d.Rows != 30 {
		t.Errorf("remote model line-b: rows %d, %v; want 30", d.Rows, err)
	}

	a.stop(t)
	feed(t, filepath.Join(in, "a.csv"), rng, 80, 40, false)
	waitFor(t, "B to take line-a over and store 120 rows", func() bool { return count(t, b.d.store, "line-a") == 120 })
	if n := strings.Count(logB.String(), "standing by"); n != 1 {
		t.Errorf("B logged standing by %d times, want once", n)
	}
	obs, err := b.d.store.Observations(context.Background(), "line-a", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	seen := map[int]int{}
	for _, o := range obs {
		seen[o.Line]++
	}
	for line := 2; line <= 121; line++ {
		if seen[line] != 1 {
			t.Errorf("line %d stored %d times, want once", line, seen[line])
		}
	}
}

// TestPostgresDaemonServerRestart restarts the server while a daemon
// ingests: /readyz (Ready) reports the outage while it lasts, the daemon
// logs it once, retries, notices its lease went with the server's
// sessions and takes the model back, and in the end every row is stored
// once. It
// restarts the whole test server, so it runs only when asked
// (PLUMB_TEST_PG_RESTART=1, PLUMB_PG_DIR from testdata/pg/cluster.sh).
func TestPostgresDaemonServerRestart(t *testing.T) {
	if os.Getenv("PLUMB_TEST_PG_RESTART") == "" || os.Getenv("PLUMB_PG_DIR") == "" {
		t.Skip("restarts the test server: set PLUMB_TEST_PG_RESTART=1 and PLUMB_PG_DIR (testdata/pg/cluster.sh), and run it alone")
	}
	state := pgState(t)
	root := t.TempDir()
	in := filepath.Join(root, "in")
	var logs logBuffer
	r := startLogged(t, pgConfig(t, root, state, fmt.Sprintf(lineModel, "m", in, false)), &logs)
	rng := mrand.New(mrand.NewPCG(9, 9))
	feed(t, filepath.Join(in, "a.csv"), rng, 0, 50, true)
	waitFor(t, "50 rows", func() bool { return count(t, r.d.store, "m") == 50 })

	stopFeed := make(chan struct{})
	fed := make(chan int)
	go func() {
		n := 50
		for {
			select {
			case <-stopFeed:
				fed <- n
				return
			case <-time.After(20 * time.Millisecond):
			}
			feed(t, filepath.Join(in, "a.csv"), rng, n, 10, false)
			n += 10
		}
	}()
	sawOutage := make(chan bool, 1)
	go func() {
		deadline := time.Now().Add(30 * time.Second)
		for time.Now().Before(deadline) {
			if err := r.d.View().Ready(context.Background()); err != nil && strings.Contains(err.Error(), "unreachable") {
				sawOutage <- true
				return
			}
			time.Sleep(20 * time.Millisecond)
		}
		sawOutage <- false
	}()
	time.Sleep(300 * time.Millisecond)
	restart := exec.Command("bash", filepath.Join("..", "..", "..", "..", "testdata", "pg", "cluster.sh"), "restart", os.Getenv("PLUMB_PG_DIR"))
	restart.Stderr = os.Stderr
	if err := restart.Run(); err != nil {
		t.Fatalf("restart the server: %v", err)
	}
	if !<-sawOutage {
		t.Error("Ready never reported the outage")
	}
	time.Sleep(500 * time.Millisecond)
	close(stopFeed)
	total := <-fed
	deadline := time.Now().Add(60 * time.Second)
	for time.Now().Before(deadline) {
		if n, err := r.d.store.CountObservations(context.Background(), "m"); err == nil && n == int64(total) {
			break
		}
		time.Sleep(100 * time.Millisecond)
	}
	if n := count(t, r.d.store, "m"); n != int64(total) {
		t.Fatalf("%d rows stored, want %d", n, total)
	}
	waitFor(t, "ready again", func() bool { return r.d.View().Ready(context.Background()) == nil })
	// The restart ended the lease's session: the daemon noticed, gave the
	// model up and owns it again.
	waitFor(t, "the model owned again after the restart", func() bool {
		os, err := r.d.pg.Owners(context.Background())
		return err == nil && len(os) == 1 && os[0].Alive && r.d.owns("m")
	})
	out := logs.String()
	if !strings.Contains(out, "lease on the model lost") {
		t.Errorf("the lost lease was not noticed:\n%s", out)
	}
	if testing.Verbose() {
		t.Logf("daemon log:\n%s", out)
	}
	if n := strings.Count(out, "state database unreachable"); n != 1 {
		t.Errorf("the outage was logged %d times, want once:\n%s", n, out)
	}
	if !strings.Contains(out, "state database reachable again") {
		t.Errorf("the end of the outage was not logged:\n%s", out)
	}
	if n := strings.Count(out, "level=ERROR msg=ingest"); n != 0 {
		t.Errorf("%d ingest errors logged besides the outage", n)
	}
}

// BenchmarkIngestPostgres is BenchmarkIngest with the state on the test
// server (PLUMB_TEST_POSTGRES): one model, p = 3, rows judged on arrival
// and committed with their read position, batch by batch.
func BenchmarkIngestPostgres(b *testing.B) {
	benchIngest(b, func(b *testing.B, dir, body string) *config.Config { return pgConfig(b, dir, pgState(b), body) })
}

// TestPostgresReloadReleases: a model dropped from the config by a reload
// is given up (its lease released), so a daemon standing by for it takes
// it over; a model added by a reload is taken.
func TestPostgresReloadReleases(t *testing.T) {
	state := pgState(t)
	root := t.TempDir()
	one := fmt.Sprintf(lineModel, "line-a", filepath.Join(root, "line-a"), false)
	two := fmt.Sprintf(lineModel, "line-b", filepath.Join(root, "line-b"), false)
	rng := mrand.New(mrand.NewPCG(5, 5))
	feed(t, filepath.Join(root, "line-a", "a.csv"), rng, 0, 20, true)
	feed(t, filepath.Join(root, "line-b", "b.csv"), rng, 0, 20, true)
	a := startLogged(t, pgConfig(t, filepath.Join(root, "a"), state, one+two), io.Discard)
	waitFor(t, "A to own both lines", func() bool { return a.d.owns("line-a") && a.d.owns("line-b") })
	b := startLogged(t, pgConfig(t, filepath.Join(root, "b"), state, two), io.Discard)
	waitFor(t, "A to store both lines", func() bool {
		return count(t, a.d.store, "line-a") == 20 && count(t, a.d.store, "line-b") == 20
	})
	if b.d.owns("line-b") {
		t.Fatal("B owns line-b while A runs it")
	}
	a.reload <- pgConfig(t, filepath.Join(root, "a"), state, one)
	waitFor(t, "B to take line-b over after A dropped it", func() bool { return b.d.owns("line-b") && !a.d.owns("line-b") })
	feed(t, filepath.Join(root, "line-b", "b.csv"), rng, 20, 10, false)
	waitFor(t, "B to store line-b's new rows", func() bool { return count(t, b.d.store, "line-b") == 30 })
	if !a.d.owns("line-a") {
		t.Error("A gave up line-a, which it still runs")
	}
}
