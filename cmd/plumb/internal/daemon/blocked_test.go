package daemon

import (
	"context"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumb/alerts"
	"plumb/store"
)

func alertsOf(t testing.TB, s store.Store, kind alerts.Kind) []store.AlertRecord {
	t.Helper()
	as, err := s.Alerts(context.Background(), store.AlertQuery{})
	if err != nil {
		t.Fatal(err)
	}
	var out []store.AlertRecord
	for _, a := range as {
		if a.Kind == string(kind) {
			out = append(out, a)
		}
	}
	return out
}

func openAlert(t testing.TB, s store.Store, kind alerts.Kind, subject string) bool {
	for _, a := range alertsOf(t, s, kind) {
		if a.Subject == subject && a.State == "open" {
			return true
		}
	}
	return false
}

func modelState(r *running, name string) (string, string) {
	m := r.d.models[name]
	m.mu.Lock()
	defer m.mu.Unlock()
	return m.state, m.reason
}

// saveByRename replaces name with content through a temporary dot-file.
func saveByRename(t testing.TB, name, content string) {
	t.Helper()
	tmp := filepath.Join(filepath.Dir(name), "."+filepath.Base(name)+".tmp")
	if err := os.WriteFile(tmp, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Rename(tmp, name); err != nil {
		t.Fatal(err)
	}
}

// TestSuspectWhileBlockedIsAlerted: a suspect reading that arrives while
// the model is blocked (a file that gave rows changed its header) is
// judged at arrival against the fit that includes it, and its alert is
// raised when judging resumes (here: the offending file is removed).
func TestSuspectWhileBlockedIsAlerted(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false))
	rng := rand.New(rand.NewPCG(7, 7))
	a := filepath.Join(dir, "in", "a.csv")
	b := filepath.Join(dir, "in", "b.csv")
	feed(t, a, rng, 0, 30, true)
	feed(t, b, rng, 100, 10, true)
	r := start(t, c)
	waitFor(t, "40 rows and a fit", func() bool {
		st, _ := modelState(r, "m")
		return count(t, r.d.store, "m") == 40 && st == stateJudging
	})

	// a.csv is saved with another header: the model is blocked.
	saveByRename(t, a, "id,x,z\n1,2,3\n")
	waitFor(t, "model blocked", func() bool {
		st, _ := modelState(r, "m")
		return st == stateBlocked && openAlert(t, r.d.store, alerts.KindBlocked, "m")
	})

	// A far, wrong reading arrives in b.csv meanwhile (b.csv ends at line 11).
	f, err := os.OpenFile(b, os.O_WRONLY|os.O_APPEND, 0)
	if err != nil {
		t.Fatal(err)
	}
	fmt.Fprintf(f, "999,30,60\n")
	f.Close()
	waitFor(t, "41 rows", func() bool { return count(t, r.d.store, "m") == 41 })
	o, err := r.d.store.ObservationAt(context.Background(), "m", "b.csv", 12)
	if err != nil || o.Arrival == nil || o.Arrival.Verdict != "suspect" {
		t.Fatalf("b.csv:12 at arrival: %+v, %v; want judged suspect", o.Arrival, err)
	}
	time.Sleep(150 * time.Millisecond) // several refresh intervals while blocked
	if st, _ := modelState(r, "m"); st != stateBlocked {
		t.Fatalf("state %q, want blocked still", st)
	}

	// The cause goes: judging resumes and the suspect point is alerted.
	if err := os.Remove(a); err != nil {
		t.Fatal(err)
	}
	subject := alerts.PointSubject("m", "b.csv", 12)
	waitFor(t, "suspect alert for b.csv:12", func() bool { return openAlert(t, r.d.store, alerts.KindSuspectPoint, subject) })
	waitFor(t, "blocked alert resolved", func() bool {
		st, _ := modelState(r, "m")
		return st == stateJudging && !openAlert(t, r.d.store, alerts.KindBlocked, "m")
	})
	if n := count(t, r.d.store, "m"); n != 41 {
		t.Errorf("%d rows, want 41", n)
	}
}

// TestStrayFileRefusedModelGoesOn: a file whose header does not fit the
// model is refused as a file (a blocked alert naming it, no rows read),
// the model goes on with its other files, and removing the file resolves
// the alert without a restart.
func TestStrayFileRefusedModelGoesOn(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false))
	rng := rand.New(rand.NewPCG(8, 8))
	feed(t, filepath.Join(dir, "in", "a.csv"), rng, 0, 20, true)
	notes := filepath.Join(dir, "in", "notes.csv")
	if err := os.WriteFile(notes, []byte("date,remark\n2026-12-01,new standards\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	r := start(t, c)
	subject := alerts.FileSubject("m", "notes.csv")
	waitFor(t, "file alert", func() bool { return openAlert(t, r.d.store, alerts.KindBlocked, subject) })
	a := alertsOf(t, r.d.store, alerts.KindBlocked)
	var text string
	for _, x := range a {
		if x.Subject == subject {
			var doc alerts.Alert
			if err := json.Unmarshal([]byte(x.Doc), &doc); err != nil {
				t.Fatal(err)
			}
			text = doc.Summary + " " + doc.Explanation
		}
	}
	for _, want := range []string{"notes.csv", `"date", "remark"`} {
		if !strings.Contains(text, want) {
			t.Errorf("alert %q does not say %s", text, want)
		}
	}
	feed(t, filepath.Join(dir, "in", "a.csv"), rng, 20, 5, false)
	waitFor(t, "judging on the other file", func() bool {
		st, _ := modelState(r, "m")
		return count(t, r.d.store, "m") == 25 && st == stateJudging
	})
	if openAlert(t, r.d.store, alerts.KindBlocked, "m") {
		t.Error("the model is blocked by a stray file")
	}
	if err := os.Remove(notes); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "file alert resolved", func() bool { return !openAlert(t, r.d.store, alerts.KindBlocked, subject) })
}

// TestRefusedFileAcrossRestart: a file refused in an earlier run that was
// removed, or fixed, while plumb was stopped has its alert resolved at
// the next start.
func TestRefusedFileAcrossRestart(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false))
	rng := rand.New(rand.NewPCG(9, 9))
	feed(t, filepath.Join(dir, "in", "a.csv"), rng, 0, 20, true)
	gone := filepath.Join(dir, "in", "gone.csv")
	fixed := filepath.Join(dir, "in", "fixed.csv")
	for _, p := range []string{gone, fixed} {
		if err := os.WriteFile(p, []byte("date,remark\n2026-12-01,x\n"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	r := start(t, c)
	waitFor(t, "two file alerts", func() bool {
		return openAlert(t, r.d.store, alerts.KindBlocked, alerts.FileSubject("m", "gone.csv")) &&
			openAlert(t, r.d.store, alerts.KindBlocked, alerts.FileSubject("m", "fixed.csv"))
	})
	r.stop(t)

	if err := os.Remove(gone); err != nil {
		t.Fatal(err)
	}
	feed(t, fixed+".new", rng, 500, 3, true)
	if err := os.Rename(fixed+".new", fixed); err != nil {
		t.Fatal(err)
	}
	r = start(t, c)
	waitFor(t, "both alerts resolved", func() bool {
		return !openAlert(t, r.d.store, alerts.KindBlocked, alerts.FileSubject("m", "gone.csv")) &&
			!openAlert(t, r.d.store, alerts.KindBlocked, alerts.FileSubject("m", "fixed.csv"))
	})
	waitFor(t, "the fixed file's rows", func() bool { return count(t, r.d.store, "m") == 23 })
}

// TestHardLinkStoredOnce: a hard link beside the file it names adds no
// row: seven rows are stored once, not twice.
func TestHardLinkStoredOnce(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false))
	a := filepath.Join(dir, "in", "a.csv")
	feed(t, a, rand.New(rand.NewPCG(10, 10)), 0, 7, true)
	if err := os.Link(a, filepath.Join(dir, "in", "b.csv")); err != nil {
		t.Skip("no hard links here:", err)
	}
	r := start(t, c)
	waitFor(t, "7 rows", func() bool { return count(t, r.d.store, "m") == 7 })
	time.Sleep(200 * time.Millisecond)
	feed(t, a, rand.New(rand.NewPCG(11, 11)), 7, 2, false)
	waitFor(t, "9 rows", func() bool { return count(t, r.d.store, "m") == 9 })
	time.Sleep(200 * time.Millisecond)
	if n := count(t, r.d.store, "m"); n != 9 {
		t.Errorf("%d rows stored, want 9 (each once)", n)
	}
}

// TestSuspectHeldAcrossRestart: a suspect reading that arrived while the
// model was blocked, in a run that stopped before judging resumed, is
// alerted in the next run once a fit stands, and only once.
func TestSuspectHeldAcrossRestart(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false))
	rng := rand.New(rand.NewPCG(12, 12))
	a := filepath.Join(dir, "in", "a.csv")
	b := filepath.Join(dir, "in", "b.csv")
	feed(t, a, rng, 0, 30, true)
	feed(t, b, rng, 100, 10, true)
	r := start(t, c)
	waitFor(t, "a fit", func() bool { st, _ := modelState(r, "m"); return st == stateJudging })
	saveByRename(t, a, "id,x,z\n1,2,3\n")
	waitFor(t, "model blocked", func() bool { st, _ := modelState(r, "m"); return st == stateBlocked })
	f, err := os.OpenFile(b, os.O_WRONLY|os.O_APPEND, 0)
	if err != nil {
		t.Fatal(err)
	}
	fmt.Fprintf(f, "999,30,60\n")
	f.Close()
	waitFor(t, "41 rows", func() bool { return count(t, r.d.store, "m") == 41 })
	r.stop(t)

	if err := os.Remove(a); err != nil {
		t.Fatal(err)
	}
	r = start(t, c)
	subject := alerts.PointSubject("m", "b.csv", 12)
	waitFor(t, "suspect alert after the restart", func() bool { return openAlert(t, r.d.store, alerts.KindSuspectPoint, subject) })
	r.stop(t)
	r = start(t, c)
	waitFor(t, "a refresh", func() bool { st, _ := modelState(r, "m"); return st == stateJudging })
	for _, al := range alertsOf(t, r.d.store, alerts.KindSuspectPoint) {
		var doc alerts.Alert
		if err := json.Unmarshal([]byte(al.Doc), &doc); err != nil {
			t.Fatal(err)
		}
		if al.Subject == subject && doc.Count != 1 {
			t.Errorf("alert %s reported %d times, want once", subject, doc.Count)
		}
	}
}
