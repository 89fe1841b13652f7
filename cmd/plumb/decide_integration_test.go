//go:build integration

package main

import (
	"bufio"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/view"
	"plumb/engine"
	"plumb/store"
	"plumb/store/sqlite"
)

// Scenario (invented): bench "C" checks a load cell's reading against
// reference loads; r.okafor reviews, j.tanaka operates the bench. The
// readings are invented for this test: reading = 1.5 + 2 load plus a
// small fixed wobble, one reading far off at a load beyond the others.

const (
	reviewerToken = "reviewer-token-for-the-decisions-test-0001"
	operatorToken = "operator-token-for-the-decisions-test-0002"
)

func tokenHash(tok string) string {
	h := sha256.Sum256([]byte(tok))
	return hex.EncodeToString(h[:])
}

// benchRow is one reading of the invented scenario.
func benchRow(load, slope float64, i int) (float64, float64) {
	return load, 1.5 + slope*load + 0.05*math.Sin(1.7*float64(i))
}

type decideHarness struct {
	t    *testing.T
	base string
	dir  string
	log  string
	cmd  *exec.Cmd
}

func (h *decideHarness) call(method, path, token string, body any) (int, []byte) {
	h.t.Helper()
	var rd io.Reader
	if body != nil {
		b, _ := json.Marshal(body)
		rd = bytes.NewReader(b)
	}
	req, err := http.NewRequest(method, h.base+path, rd)
	if err != nil {
		h.t.Fatal(err)
	}
	if body != nil {
		req.Header.Set("Content-Type", "application/json")
	}
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		h.t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, b
}

func (h *decideHarness) get(path string, v any) {
	h.t.Helper()
	st, b := h.call("GET", path, "", nil)
	if st != 200 {
		h.t.Fatalf("GET %s: %d %s", path, st, b)
	}
	if err := json.Unmarshal(b, v); err != nil {
		h.t.Fatalf("GET %s: %v", path, err)
	}
}

// wait polls cond until it holds or 30 s pass.
func (h *decideHarness) wait(what string, cond func() bool) {
	h.t.Helper()
	deadline := time.Now().Add(30 * time.Second)
	for time.Now().Before(deadline) {
		if cond() {
			return
		}
		time.Sleep(100 * time.Millisecond)
	}
	tail(h.t, h.log)
	h.t.Fatalf("timed out waiting for %s", what)
}

func (h *decideHarness) model() view.ModelDetail {
	var d view.ModelDetail
	h.get("/api/v1/models/bench-c", &d)
	return d
}

func (h *decideHarness) alertsOf(kind, state string) []view.AlertView {
	var l struct{ Items []view.AlertView }
	h.get("/api/v1/alerts?kind="+kind+"&state="+state, &l)
	return l.Items
}

// appendRows appends readings to the model's feed.
func (h *decideHarness) appendRows(lines ...string) {
	h.t.Helper()
	p := filepath.Join(h.dir, "in", "feed-1.csv")
	f, err := os.OpenFile(p, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		h.t.Fatal(err)
	}
	for _, l := range lines {
		fmt.Fprintln(f, l)
	}
	if err := f.Close(); err != nil {
		h.t.Fatal(err)
	}
}

// fileEvents reads the events the file route delivered.
func (h *decideHarness) fileEvents() []*alerts.Event {
	f, err := os.Open(filepath.Join(h.dir, "events.jsonl"))
	if err != nil {
		return nil
	}
	defer f.Close()
	var out []*alerts.Event
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<24)
	for sc.Scan() {
		e, err := alerts.DecodeEvent(sc.Bytes())
		if err != nil {
			h.t.Fatalf("events file: %v", err)
		}
		out = append(out, e)
	}
	return out
}

func freeAddr(t *testing.T) string {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	return ln.Addr().String()
}

// fitOf fits reading ~ load on the given rows, as the engine does.
func fitOf(t *testing.T, xs, ys []float64) *engine.Fit {
	m, err := engine.NewModel("reading", []string{"load"}, true)
	if err != nil {
		t.Fatal(err)
	}
	X, y, err := m.Design(map[string][]float64{"reading": ys, "load": xs})
	if err != nil {
		t.Fatal(err)
	}
	f, err := engine.Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	return f
}

func sameCoefficients(t *testing.T, what string, got []view.Coefficient, want []float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d coefficients, want %d", what, len(got), len(want))
	}
	for i, c := range got {
		if d := math.Abs(float64(c.Estimate) - want[i]); d > 1e-9*math.Max(1, math.Abs(want[i])) {
			t.Errorf("%s: %s = %.15g, want %.15g", what, c.Term, float64(c.Estimate), want[i])
		}
	}
}

// startBench starts the built daemon on the invented bench with two
// named users and 30 ordinary readings plus one far off at line 32. It
// returns the harness and the ordinary readings as the file holds them.
func startBench(t *testing.T, ctx context.Context) (h *decideHarness, xs, ys []float64) {
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	addr := freeAddr(t)
	cfg := filepath.Join(dir, "plumb.toml")
	writeFile(t, cfg, benchConfig(addr))
	h = &decideHarness{t: t, base: "http://" + addr, dir: dir, log: filepath.Join(dir, "daemon.log")}
	lines := []string{"load,reading"}
	for i := 1; i <= 30; i++ {
		x, y := benchRow(float64(i), 2, i)
		xs, ys = append(xs, x), append(ys, y)
		lines = append(lines, fmt.Sprintf("%g,%.6f", x, y))
	}
	for i := range ys { // as the file holds them
		fmt.Sscanf(fmt.Sprintf("%.6f", ys[i]), "%g", &ys[i])
	}
	lines = append(lines, "60,131.5") // line 32: expected near 121.5
	h.appendRows(lines...)
	h.cmd = startDaemon(t, ctx, cfg, h.log)
	t.Cleanup(func() {
		h.stop()
		if t.Failed() {
			tail(t, h.log)
		}
	})
	up := time.Now().Add(30 * time.Second)
	for {
		resp, err := http.Get(h.base + "/healthz")
		if err == nil {
			resp.Body.Close()
			break
		}
		if time.Now().After(up) {
			t.Fatalf("the daemon does not serve: %v", err)
		}
		time.Sleep(100 * time.Millisecond)
	}
	return h, xs, ys
}

// stop ends the daemon with SIGTERM and waits for it.
func (h *decideHarness) stop() {
	if h.cmd != nil && h.cmd.ProcessState == nil {
		_ = h.cmd.Process.Signal(syscall.SIGTERM)
		_ = h.cmd.Wait()
	}
}

func benchConfig(addr string) string {
	return `state = "plumb.db"
listen = "` + addr + `"
quiet_max = "1h"

[watch]
debounce = "50ms"
refresh = "200ms"
rescan = "1s"

[[model]]
name = "bench-c"
folder = "in"
pattern = "feed-*.csv"
response = "reading"
terms = ["load"]
min_rows = 8
routes = ["events"]

[model.window]
rows = 40

[model.fragility]
enabled = false

[model.alerts.drift]
k = 4
baseline_rows = 10

[[route]]
name = "events"
kind = "file"
path = "events.jsonl"

[[user]]
name = "r.okafor"
role = "reviewer"
token_sha256 = "` + tokenHash(reviewerToken) + `"

[[user]]
name = "j.tanaka"
role = "operator"
token_sha256 = "` + tokenHash(operatorToken) + `"
`
}

// TestDecisionsEndToEnd runs the built daemon with two named users and
// checks issue 18's decisions through the API: a suspect reading set
// aside by a reviewer leaves the next fit (which equals a fit without
// that row), its alert resolves with the note and the trail records
// both; an operator may not exclude (403); reinstating restores the old
// fit; a quiet period holds deliveries and sends one summary at its end;
// a re-baseline clears a drift alert.
func TestDecisionsEndToEnd(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 4*time.Minute)
	defer cancel()
	h, xs, ys := startBench(t, ctx)
	dir := h.dir

	var sp view.AlertView
	h.wait("the suspect-point alert", func() bool {
		as := h.alertsOf("suspect_point", "open")
		if len(as) == 1 {
			sp = as[0]
		}
		return len(as) == 1
	})
	if !strings.HasSuffix(sp.Subject, "feed-1.csv:32") {
		t.Fatalf("suspect alert on %s, want line 32", sp.Subject)
	}
	var withRow view.ModelDetail
	h.wait("the fit of 31 rows", func() bool { withRow = h.model(); return withRow.N == 31 })

	// Who acts.
	var who struct{ Name, Role string }
	st, b := h.call("GET", "/api/v1/whoami", reviewerToken, nil)
	if err := json.Unmarshal(b, &who); err != nil || st != 200 || who.Name != "r.okafor" || who.Role != "reviewer" {
		t.Fatalf("whoami: %d %s", st, b)
	}

	// An operator may not set a reading aside; nobody may without a reason.
	excl := map[string]any{"row": "feed-1.csv:32", "reason": "valve left open during the run", "alert": sp.ID}
	if st, b := h.call("POST", "/api/v1/models/bench-c/exclude", operatorToken, excl); st != http.StatusForbidden {
		t.Fatalf("operator's exclude: %d %s, want 403", st, b)
	}
	if st, b := h.call("POST", "/api/v1/models/bench-c/exclude", "", excl); st != http.StatusUnauthorized {
		t.Fatalf("anonymous exclude: %d %s, want 401", st, b)
	}
	if st, b := h.call("POST", "/api/v1/models/bench-c/exclude", reviewerToken, map[string]any{"row": "feed-1.csv:32"}); st != http.StatusBadRequest {
		t.Fatalf("exclude without a reason: %d %s, want 400", st, b)
	}
	st, b = h.call("POST", "/api/v1/models/bench-c/exclude", reviewerToken, excl)
	if st != 200 {
		t.Fatalf("reviewer's exclude: %d %s", st, b)
	}
	var dec view.DecisionView
	if err := json.Unmarshal(b, &dec); err != nil {
		t.Fatal(err)
	}
	if dec.By != "r.okafor" || !strings.HasPrefix(dec.Note, "set aside by r.okafor on ") || dec.AuditSeq == 0 {
		t.Fatalf("decision %+v", dec)
	}
	if st, _ := h.call("POST", "/api/v1/models/bench-c/exclude", reviewerToken, excl); st != http.StatusConflict {
		t.Fatalf("excluding twice: %d, want 409", st)
	}

	// The next fit leaves the reading out: the coefficients of a fit
	// without that row.
	var without view.ModelDetail
	h.wait("the fit without the set-aside reading", func() bool { without = h.model(); return without.N == 30 })
	clean := fitOf(t, xs, ys)
	sameCoefficients(t, "fit after the exclusion", without.Coefficients, []float64{clean.Coef[0].Estimate, clean.Coef[1].Estimate})
	if len(without.SetAside) != 1 || without.SetAside[0].Line != 32 || without.SetAside[0].Note != dec.Note {
		t.Errorf("set-aside points %+v, want line 32 with %q", without.SetAside, dec.Note)
	}
	for _, p := range without.Points {
		if p.Line == 32 {
			t.Errorf("the set-aside reading is still a point of the fit")
		}
	}
	// It stays stored and listed, marked.
	var obs struct{ Items []view.ObservationView }
	h.get("/api/v1/models/bench-c/observations?limit=1000", &obs)
	if len(obs.Items) != 31 || obs.Items[30].SetAside == nil || obs.Items[30].SetAside.Note != dec.Note {
		t.Errorf("observations: %d listed, last marked %+v", len(obs.Items), obs.Items[len(obs.Items)-1].SetAside)
	}
	// The alert resolves with the note, by the reviewer.
	h.wait("the alert resolved with the note", func() bool {
		var a view.AlertView
		h.get("/api/v1/alerts/"+sp.ID, &a)
		return a.State == view.AlertResolved && a.Note == dec.Note
	})

	// Reinstating restores the old fit.
	if st, b := h.call("POST", "/api/v1/models/bench-c/reinstate", reviewerToken, map[string]any{"obs": dec.ObsID, "reason": "valve log shows it was closed"}); st != 200 {
		t.Fatalf("reinstate: %d %s", st, b)
	}
	var back view.ModelDetail
	h.wait("the fit with the reading back", func() bool { back = h.model(); return back.N == 31 })
	var old []float64
	for _, c := range withRow.Coefficients {
		old = append(old, float64(c.Estimate))
	}
	sameCoefficients(t, "fit after reinstating", back.Coefficients, old)
	if len(back.SetAside) != 0 {
		t.Errorf("set-aside points after reinstating: %+v", back.SetAside)
	}

	// Quiet: quiet_max is enforced; an operator may set a period.
	now := time.Now().UTC()
	long := map[string]any{"model": "bench-c", "end": now.Add(2 * time.Hour).Format(time.RFC3339), "reason": "pump service"}
	if st, b := h.call("POST", "/api/v1/quiet", operatorToken, long); st != http.StatusBadRequest {
		t.Fatalf("a period over quiet_max: %d %s, want 400", st, b)
	}
	quiet := map[string]any{"model": "bench-c", "end": now.Add(6 * time.Second).Format(time.RFC3339), "reason": "pump service"}
	st, b = h.call("POST", "/api/v1/quiet", operatorToken, quiet)
	if st != 200 {
		t.Fatalf("set quiet: %d %s", st, b)
	}
	var qp view.QuietView
	json.Unmarshal(b, &qp)
	before := len(h.fileEvents())
	h.wait("the quiet mark", func() bool { return !h.model().QuietUntil.IsZero() })
	h.appendRows("70,153.5") // line 33: expected near 141.5
	var held view.AlertView
	h.wait("an alert raised under quiet", func() bool {
		for _, a := range h.alertsOf("suspect_point", "open") {
			if strings.HasSuffix(a.Subject, ":33") {
				held = a
				return true
			}
		}
		return false
	})
	if !held.Held {
		t.Errorf("the alert raised under quiet is not marked held")
	}
	time.Sleep(time.Second) // a delivery pass
	if n := len(h.fileEvents()); n != before {
		t.Fatalf("%d events delivered during the quiet period", n-before)
	}
	var summaries []*alerts.Event
	h.wait("the summary at the end of the quiet period", func() bool {
		summaries = nil
		for _, e := range h.fileEvents() {
			if e.Type == alerts.SummaryType {
				summaries = append(summaries, e)
			}
		}
		return len(summaries) > 0
	})
	time.Sleep(2 * time.Second) // more passes: still one
	summaries = nil
	for _, e := range h.fileEvents()[before:] {
		if e.Type == alerts.SummaryType {
			summaries = append(summaries, e)
		} else if e.AlertID == held.ID {
			t.Errorf("the held alert's own event %s was delivered after the period", e.ID)
		}
	}
	if len(summaries) != 1 {
		t.Fatalf("%d summaries, want 1", len(summaries))
	}
	var doc alerts.QuietSummaryDoc
	if err := json.Unmarshal(summaries[0].Data, &doc); err != nil {
		t.Fatal(err)
	}
	listed := false
	for _, a := range doc.Open {
		listed = listed || a.ID == held.ID
	}
	if !listed || doc.Period.Reason != "pump service" || doc.Period.Owner != "j.tanaka" {
		t.Errorf("summary %+v does not name the held alert %s", doc, held.ID)
	}

	// Drift: the bench's slope moves (a sensor swap); a re-baseline from
	// the swap clears the drift alert.
	swap := time.Now().UTC().Add(-time.Second)
	var shifted []string
	for i := 1; i <= 40; i++ {
		x, y := benchRow(float64(i%30+1), 2.6, 100+i)
		shifted = append(shifted, fmt.Sprintf("%g,%.6f", x, y))
	}
	time.Sleep(1100 * time.Millisecond) // arrivals after swap
	h.appendRows(shifted...)
	var drift view.AlertView
	h.wait("the drift alert", func() bool {
		as := h.alertsOf("drift", "open")
		if len(as) > 0 {
			drift = as[0]
		}
		return len(as) > 0
	})
	if st, _ := h.call("POST", "/api/v1/models/bench-c/rebaseline", operatorToken, map[string]any{"reason": "load cell replaced"}); st != http.StatusForbidden {
		t.Fatalf("operator's re-baseline: %d, want 403", st)
	}
	st, b = h.call("POST", "/api/v1/models/bench-c/rebaseline", reviewerToken,
		map[string]any{"from": swap.Format(time.RFC3339), "reason": "load cell replaced"})
	if st != 200 {
		t.Fatalf("re-baseline: %d %s", st, b)
	}
	var rb view.RebaselineView
	json.Unmarshal(b, &rb)
	h.wait("the drift alert resolved by the re-baseline", func() bool {
		var a view.AlertView
		h.get("/api/v1/alerts/"+drift.ID, &a)
		return a.State == view.AlertResolved && a.Note == rb.Note
	})
	time.Sleep(time.Second) // later refreshes against the new baseline
	var a view.AlertView
	h.get("/api/v1/alerts/"+drift.ID, &a)
	if a.State != view.AlertResolved {
		t.Errorf("drift alert %s after the re-baseline, want it to stay resolved", a.State)
	}
	if d := h.model(); len(d.Rebaselines) != 1 || d.Rebaselines[0].Note != rb.Note {
		t.Errorf("model's re-baselines %+v", d.Rebaselines)
	}

	// The trail records it all, and its chain holds.
	h.stop()
	db, err := sqlite.Open(ctx, filepath.Join(dir, "plumb.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	recs, err := db.Audit(ctx, store.AuditQuery{})
	if err != nil {
		t.Fatal(err)
	}
	found := map[string]bool{}
	for _, r := range recs {
		switch {
		case r.Action == store.ActionExclude && r.Actor == "r.okafor" && r.Reason == excl["reason"]:
			found["exclude"] = true
		case r.Action == store.ActionResolve && r.Subject == sp.ID && r.Actor == "r.okafor" && r.Reason == dec.Note:
			found["resolve by the note"] = true
		case r.Action == store.ActionReinstate && r.Actor == "r.okafor":
			found["reinstate"] = true
		case r.Action == store.ActionQuietSet && r.Actor == "j.tanaka":
			found["quiet"] = true
		case r.Action == store.ActionRebaseline && r.Actor == "r.okafor":
			found["rebaseline"] = true
		case r.Action == store.ActionResolve && r.Subject == drift.ID && r.Reason == rb.Note:
			found["drift resolved"] = true
		case r.Action == store.ActionOpen && r.Subject == held.ID:
			found["held alert opened"] = true
		}
	}
	for _, k := range []string{"exclude", "resolve by the note", "reinstate", "quiet", "rebaseline", "drift resolved", "held alert opened"} {
		if !found[k] {
			t.Errorf("the trail has no %s record", k)
		}
	}
	rep, err := store.VerifyAudit(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Break != nil {
		t.Errorf("audit chain broken: %v", rep.Break)
	}
	_ = qp
}

// TestDecideCommandBesideDaemon: "plumb decide exclude" on the state
// database while the daemon runs takes effect at the daemon's next
// refresh: the fit leaves the reading out and its alert resolves with the
// note, under the operating-system user.
func TestDecideCommandBesideDaemon(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	h, _, _ := startBench(t, ctx)
	var sp view.AlertView
	h.wait("the suspect-point alert", func() bool {
		as := h.alertsOf("suspect_point", "open")
		if len(as) == 1 {
			sp = as[0]
		}
		return len(as) == 1
	})
	out, err := exec.CommandContext(ctx, plumbBinary(t), "decide", "exclude", "--config", filepath.Join(h.dir, "plumb.toml"),
		"--model", "bench-c", "--row", "feed-1.csv:32", "--reason", "valve left open", "--alert", sp.ID).CombinedOutput()
	if err != nil {
		t.Fatalf("plumb decide exclude: %v\n%s", err, out)
	}
	h.wait("the fit without the reading", func() bool { return h.model().N == 30 })
	h.wait("the alert resolved with the note", func() bool {
		var a view.AlertView
		h.get("/api/v1/alerts/"+sp.ID, &a)
		return a.State == view.AlertResolved && strings.HasPrefix(a.Note, "set aside by os:") && strings.HasSuffix(a.Note, ": valve left open")
	})
}
