//go:build integration

package main

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	mrand "math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/postgres"
)

// fleetConfig is one daemon's config: its lines, a file route named
// "events" (the same route name on every daemon, each with its own file)
// and the state URL from PLUMB_FLEET_STATE.
func fleetConfig(t *testing.T, dir, name string, lines ...string) string {
	t.Helper()
	var b strings.Builder
	fmt.Fprintf(&b, `state_env = "PLUMB_FLEET_STATE"
listen = ""
log_level = "info"
[watch]
debounce = "5ms"
refresh = "200ms"
idle_flush = "1h"
[[route]]
name = "events"
kind = "file"
path = "events-%s.jsonl"
`, name)
	for _, l := range lines {
		fmt.Fprintf(&b, `[[model]]
name = %q
folder = %q
response = "y"
terms = ["x"]
[model.fragility]
enabled = false
`, l, filepath.Join(dir, l))
	}
	p := filepath.Join(dir, name+".toml")
	writeFile(t, p, b.String())
	return p
}

// writeLine appends rows 1..n to dir/line/feed.csv in bursts: y = 2 +
// 0.5x + noise, a bad row every 997 rows and, every 1,500 rows, a point
// far out in x and off the line (outlier and influential: an alert).
func writeLine(dir, line string, n int, seed uint64, done chan<- error) {
	rng := mrand.New(mrand.NewPCG(seed, seed))
	f, err := os.Create(filepath.Join(dir, line, "feed.csv"))
	if err != nil {
		done <- err
		return
	}
	defer f.Close()
	fmt.Fprintln(f, "id,x,y")
	for i := 1; i <= n; {
		var b strings.Builder
		for k := 1 + rng.IntN(150); k > 0 && i <= n; k-- {
			x := float64(i%1000) / 10
			switch {
			case i%997 == 0:
				fmt.Fprintf(&b, "%d,%g,not-a-number\n", i, x)
			case i%1500 == 0:
				fmt.Fprintf(&b, "%d,%g,%g\n", i, 400.0, -1000.0)
			default:
				fmt.Fprintf(&b, "%d,%g,%g\n", i, x, 2+0.5*x+rng.NormFloat64())
			}
			i++
		}
		if _, err := f.WriteString(b.String()); err != nil {
			done <- err
			return
		}
		time.Sleep(time.Duration(rng.IntN(10)) * time.Millisecond)
	}
	done <- nil
}

// TestPostgresFleet: three daemons share one PostgreSQL database. A runs
// line-a, B runs line-b, C is configured with line-a too and stands by.
// While both lines are written, the owner of line-a is SIGKILLed twice
// (the standby takes over each time; the killed one comes back as the
// standby). Afterwards each line's rows are stored exactly once, status
// from either config lists both lines with their owners, and each alert
// event went out once on the route "events" (the routes' files together
// hold every delivered event once).
func TestPostgresFleet(t *testing.T) {
	schema, url := fleetSchema(t)
	env := "PLUMB_FLEET_STATE=" + url
	dir := t.TempDir()
	for _, l := range []string{"line-a", "line-b"} {
		if err := os.MkdirAll(filepath.Join(dir, l), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	cfgA := fleetConfig(t, dir, "a", "line-a")
	cfgB := fleetConfig(t, dir, "b", "line-b")
	cfgC := fleetConfig(t, dir, "c", "line-a")
	ctx, cancel := context.WithTimeout(context.Background(), 8*time.Minute)
	defer cancel()
	db, err := postgres.Open(ctx, os.Getenv("PLUMB_TEST_POSTGRES"), postgres.WithSchema(schema))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()

	logs := map[string]string{}
	procs := map[string]*exec.Cmd{}
	run := func(name, cfg string) {
		logs[name] = filepath.Join(dir, name+".log")
		procs[name] = startDaemon(t, ctx, cfg, logs[name], env)
	}
	defer func() {
		if t.Failed() {
			for _, name := range []string{"a", "b", "c"} {
				t.Logf("daemon %s:", name)
				tail(t, logs[name])
			}
		}
	}()
	run("a", cfgA)
	run("b", cfgB)
	ownerOf := func(model string) (postgres.Ownership, bool) {
		os, err := db.Owners(ctx)
		if err != nil {
			return postgres.Ownership{}, false
		}
		for _, o := range os {
			if o.Model == model && o.Alive {
				return o, true
			}
		}
		return postgres.Ownership{}, false
	}
	waitUntil(t, 20*time.Second, "A to own line-a", func() bool {
		o, ok := ownerOf("line-a")
		return ok && o.PID == procs["a"].Process.Pid
	})
	run("c", cfgC)

	const rowsA, rowsB = 20_000, 8_000
	doneA, doneB := make(chan error, 1), make(chan error, 1)
	go writeLine(dir, "line-a", rowsA, 11, doneA)
	go writeLine(dir, "line-b", rowsB, 12, doneB)

	// Kill line-a's owner twice during ingest; it comes back as standby.
	for k := 0; k < 2; k++ {
		time.Sleep(time.Duration(400+mrand.IntN(500)) * time.Millisecond)
		o, ok := ownerOf("line-a")
		if !ok {
			t.Fatalf("kill %d: line-a has no live owner", k+1)
		}
		var victim string
		for name, p := range procs {
			if p.Process.Pid == o.PID {
				victim = name
			}
		}
		if victim == "" || victim == "b" {
			t.Fatalf("kill %d: line-a owned by pid %d, not one of A and C", k+1, o.PID)
		}
		if err := procs[victim].Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		_ = procs[victim].Wait()
		t.Logf("kill %d: SIGKILLed daemon %s (pid %d), owner of line-a", k+1, victim, o.PID)
		waitUntil(t, 20*time.Second, "the standby to take line-a over", func() bool {
			n, ok := ownerOf("line-a")
			return ok && n.PID != o.PID
		})
		cfg := cfgA
		if victim == "c" {
			cfg = cfgC
		}
		run(victim, cfg)
	}
	for _, c := range []chan error{doneA, doneB} {
		if err := <-c; err != nil {
			t.Fatal(err)
		}
	}

	// Every row in, each exactly once.
	for _, l := range []struct {
		model string
		n     int
	}{{"line-a", rowsA}, {"line-b", rowsB}} {
		waitUntil(t, 2*time.Minute, l.model+"'s rows", func() bool {
			n, _ := db.CountObservations(ctx, l.model)
			q, _ := db.CountQuarantined(ctx, l.model)
			return n+q >= int64(l.n)
		})
		obs, err := db.Observations(ctx, l.model, store.ObsQuery{})
		if err != nil {
			t.Fatal(err)
		}
		quar, err := db.Quarantined(ctx, l.model, 0, 0)
		if err != nil {
			t.Fatal(err)
		}
		seen := map[string]int{}
		for _, o := range obs {
			seen[strings.SplitN(o.Raw, ",", 2)[0]]++
		}
		for _, q := range quar {
			seen[strings.SplitN(q.Raw, ",", 2)[0]]++
		}
		bad := l.n / 997
		if len(obs) != l.n-bad || len(quar) != bad {
			t.Errorf("%s: %d observations and %d quarantined, want %d and %d", l.model, len(obs), len(quar), l.n-bad, bad)
		}
		for i := 1; i <= l.n; i++ {
			if c := seen[fmt.Sprint(i)]; c != 1 {
				t.Errorf("%s: row id %d stored %d times", l.model, i, c)
				break
			}
		}
	}

	// status from either config lists both lines, each with its owner.
	for _, cfg := range []string{cfgA, cfgB} {
		cmd := exec.CommandContext(ctx, plumbBinary(t), "status", "--config", cfg)
		cmd.Env = append(os.Environ(), env)
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("status --config %s: %v\n%s", filepath.Base(cfg), err, out)
		}
		if testing.Verbose() {
			t.Logf("status --config %s:\n%s", filepath.Base(cfg), out)
		}
		for _, want := range []string{"line-a", "line-b", "OWNER"} {
			if !strings.Contains(string(out), want) {
				t.Errorf("status --config %s lacks %q:\n%s", filepath.Base(cfg), want, out)
			}
		}
		if strings.Contains(string(out), "xxxxx") || strings.Contains(string(out), "password") {
			t.Errorf("status shows the URL's password:\n%s", out)
		}
	}

	// alerts from B's config lists line-a's alerts too; report from A's
	// config writes line-b's report.
	plumbOut := func(args ...string) string {
		t.Helper()
		cmd := exec.CommandContext(ctx, plumbBinary(t), args...)
		cmd.Env = append(os.Environ(), env)
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("plumb %s: %v\n%s", strings.Join(args, " "), err, out)
		}
		return string(out)
	}
	// The owner that took line-a over last judges its rows at its next
	// refresh: wait for each line's first alert before listing them.
	for _, model := range []string{"line-a", "line-b"} {
		waitUntil(t, time.Minute, model+"'s alerts", func() bool {
			as, err := db.Alerts(ctx, store.AlertQuery{Model: model})
			return err == nil && len(as) > 0
		})
	}
	if out := plumbOut("alerts", "--config", cfgB, "--state", "all"); !strings.Contains(out, "line-a") || !strings.Contains(out, "line-b") {
		t.Errorf("alerts --config b.toml does not list both lines' alerts:\n%s", out)
	}
	reportB := filepath.Join(dir, "line-b.html")
	plumbOut("report", "--config", cfgA, "-o", reportB, "line-b")
	if b, err := os.ReadFile(reportB); err != nil || !strings.Contains(string(b), "line-b") || !strings.Contains(string(b), "intercept") {
		t.Errorf("report of line-b from a.toml: %v; it lacks the model or its coefficients", err)
	}

	// Each alert event went out once on the route "events".
	var delivered []store.Delivery
	waitUntil(t, time.Minute, "every delivery done", func() bool {
		pending, err := db.Deliveries(ctx, store.DeliveryPending, 0)
		if err != nil || len(pending) > 0 {
			return false
		}
		delivered, err = db.Deliveries(ctx, store.DeliveryDelivered, 0)
		return err == nil
	})
	if len(delivered) == 0 {
		t.Fatal("no alert was delivered; the test's far-out points raise none")
	}
	written := map[string]int{}
	for _, name := range []string{"a", "b", "c"} {
		f, err := os.Open(filepath.Join(dir, "events-"+name+".jsonl"))
		if os.IsNotExist(err) {
			continue
		}
		if err != nil {
			t.Fatal(err)
		}
		sc := bufio.NewScanner(f)
		sc.Buffer(nil, 1<<20)
		for sc.Scan() {
			var ev struct {
				ID string `json:"id"`
			}
			if err := json.Unmarshal(sc.Bytes(), &ev); err != nil {
				t.Fatalf("events-%s.jsonl: %v", name, err)
			}
			written[ev.ID]++
		}
		f.Close()
	}
	for _, d := range delivered {
		if d.Route != "events" {
			continue
		}
		if written[d.EventID] != 1 {
			t.Errorf("event %s (alert %s) written %d times, want once", d.EventID, d.AlertID, written[d.EventID])
		}
		delete(written, d.EventID)
	}
	for id, n := range written {
		t.Errorf("event %s written %d times but not recorded as delivered", id, n)
	}
	dead, _ := db.Deliveries(ctx, store.DeliveryDead, 0)
	if len(dead) > 0 {
		t.Errorf("%d deliveries dead-lettered, first: %+v", len(dead), dead[0])
	}
	t.Logf("%d events delivered once each", len(delivered))
}

func waitUntil(t *testing.T, limit time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(limit)
	for time.Now().Before(deadline) {
		if cond() {
			return
		}
		time.Sleep(100 * time.Millisecond)
	}
	t.Fatalf("timed out after %v waiting for %s", limit, what)
}
