package sqlite_test

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/sqlite"
)

// decideCrashEnv names the database a re-executed test binary records
// decisions into until it is killed.
const decideCrashEnv = "PLUMB_STORE_DECIDE_CRASH_DB"

const decideCrashRows = 200

// decideCrashChild records decisions, alert changes and quiet periods in a
// loop until killed (it prints "ready" after its first commit).
func decideCrashChild(path string) {
	ctx := context.Background()
	die := func(err error) {
		fmt.Fprintln(os.Stderr, "decide crash child:", err)
		os.Exit(3)
	}
	db, err := sqlite.Open(ctx, path)
	if err != nil {
		die(err)
	}
	if n, err := db.CountObservations(ctx, "cal"); err != nil {
		die(err)
	} else if n == 0 {
		b := store.Batch{Source: store.Source{Model: "cal", Path: "a.csv", Offset: 10 * decideCrashRows, Line: decideCrashRows + 1}}
		for l := 2; l <= decideCrashRows+1; l++ {
			b.Observations = append(b.Observations, store.Observation{Line: l, Raw: "x", Values: []float64{1, 2}})
		}
		if _, err := db.Ingest(ctx, b); err != nil {
			die(err)
		}
	}
	ds, err := db.Decisions(ctx, "cal")
	if err != nil {
		die(err)
	}
	excluded := store.ExcludedAt(ds, time.Time{})
	ready := false
	for deadline := time.Now().Add(time.Minute); time.Now().Before(deadline); {
		switch k := rand.IntN(10); {
		case k < 7:
			id := int64(1 + rand.IntN(decideCrashRows))
			d := store.Decision{Model: "cal", ObsID: id, Action: store.ActionExclude, Actor: "r.okafor", Reason: "crash test"}
			if _, ok := excluded[id]; ok {
				d.Action = store.ActionReinstate
			}
			if _, err := db.Decide(ctx, d); err != nil {
				die(err)
			}
			if d.Action == store.ActionExclude {
				excluded[id] = d
			} else {
				delete(excluded, id)
			}
		case k < 9:
			if _, err := db.AppendAudit(ctx, store.AuditRecord{Actor: "l.hart", Action: store.ActionAcknowledge, Subject: "al"}); err != nil {
				die(err)
			}
		default:
			now := time.Now()
			if _, err := db.SetQuiet(ctx, store.QuietPeriod{Start: now, End: now.Add(time.Hour), Owner: "o", Reason: "r"}); err != nil {
				die(err)
			}
		}
		if !ready {
			fmt.Println("ready")
			ready = true
		}
	}
	die(errors.New("not killed within a minute"))
}

// TestDecideCrashSafety kills a process that records decisions (SIGKILL
// at random moments, 8 times) and checks after each that the trail is
// intact and that decisions and their audit records were committed
// together: every decision names a record of its action and reading, and
// every exclude/reinstate record has its decision.
func TestDecideCrashSafety(t *testing.T) {
	if testing.Short() {
		t.Skip("kills child processes; skipped under -short")
	}
	path := filepath.Join(t.TempDir(), "decide.db")
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(3, 4))
	prev := int64(0)
	progressed := 0
	const kills = 8
	for i := range kills {
		cmd := exec.Command(os.Args[0], "-test.run=^$")
		cmd.Env = append(os.Environ(), decideCrashEnv+"="+path)
		cmd.Stderr = os.Stderr
		out, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		if line, err := bufio.NewReader(out).ReadString('\n'); err != nil || line != "ready\n" {
			cmd.Process.Kill()
			cmd.Wait()
			t.Fatalf("run %d: child said %q, %v", i, line, err)
		}
		time.Sleep(time.Duration(10+rng.IntN(150)) * time.Millisecond)
		if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		var ee *exec.ExitError
		if err := cmd.Wait(); !errors.As(err, &ee) || ee.Sys().(syscall.WaitStatus).Signal() != syscall.SIGKILL {
			t.Fatalf("run %d: child ended with %v, want killed by SIGKILL", i, err)
		}
		n := checkDecideState(t, ctx, path, i)
		if n > prev {
			progressed++
		}
		prev = n
	}
	if progressed < kills/2 {
		t.Errorf("the child committed in only %d of %d runs", progressed, kills)
	}
}

func checkDecideState(t *testing.T, ctx context.Context, path string, run int) int64 {
	t.Helper()
	db, err := sqlite.Open(ctx, path)
	if err != nil {
		t.Fatalf("run %d: reopen: %v", run, err)
	}
	defer db.Close()
	rep, err := store.VerifyAudit(ctx, db)
	if err != nil || rep.Break != nil {
		t.Fatalf("run %d: VerifyAudit = %+v, %v", run, rep.Break, err)
	}
	recs, err := db.Audit(ctx, store.AuditQuery{})
	if err != nil {
		t.Fatal(err)
	}
	ds, err := db.Decisions(ctx, "cal")
	if err != nil {
		t.Fatal(err)
	}
	bySeq := make(map[int64]store.AuditRecord, len(recs))
	decided := 0
	for _, r := range recs {
		bySeq[r.Seq] = r
		if r.Action == store.ActionExclude || r.Action == store.ActionReinstate {
			decided++
		}
	}
	if decided != len(ds) {
		t.Errorf("run %d: %d exclude/reinstate records, %d decisions", run, decided, len(ds))
	}
	for _, d := range ds {
		r, ok := bySeq[d.AuditSeq]
		if !ok || r.Action != d.Action || r.Subject != fmt.Sprintf("a.csv:%d", d.ObsID+1) {
			t.Errorf("run %d: decision %d (%s of %d) names record %d = %+v", run, d.ID, d.Action, d.ObsID, d.AuditSeq, r)
		}
	}
	t.Logf("run %d: %d audit records, %d decisions, %d set aside", run, len(recs), len(ds), len(store.ExcludedAt(ds, time.Time{})))
	return int64(len(recs))
}
