package postgres_test

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"syscall"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/postgres"
)

const pgCrashRows = 100

// pgDecideCrashChild records decisions, acknowledgements and quiet
// periods on the schema PLUMB_PG_DECIDE_CRASH in a loop until killed
// (it prints "ready" after its first commit). Another child writes at the
// same time: a decision refused because the other changed the reading
// first reloads the state.
func pgDecideCrashChild(schema string) {
	ctx := context.Background()
	die := func(err error) {
		fmt.Fprintln(os.Stderr, "decide crash child:", err)
		os.Exit(3)
	}
	db, err := postgres.Open(ctx, os.Getenv("PLUMB_TEST_POSTGRES"), postgres.WithSchema(schema), postgres.WithMaxConns(2))
	if err != nil {
		die(err)
	}
	load := func() map[int64]store.Decision {
		ds, err := db.Decisions(ctx, "cal")
		if err != nil {
			die(err)
		}
		return store.ExcludedAt(ds, time.Time{})
	}
	rows, err := db.Observations(ctx, "cal", store.ObsQuery{})
	if err != nil || len(rows) != pgCrashRows {
		die(fmt.Errorf("%d observations, %v", len(rows), err))
	}
	excluded := load()
	ready := false
	for deadline := time.Now().Add(time.Minute); time.Now().Before(deadline); {
		switch k := rand.IntN(10); {
		case k < 7:
			id := rows[rand.IntN(len(rows))].ID
			d := store.Decision{Model: "cal", ObsID: id, Action: store.ActionExclude, Actor: "r.okafor", Reason: "crash test"}
			if _, ok := excluded[id]; ok {
				d.Action = store.ActionReinstate
			}
			_, err := db.Decide(ctx, d)
			if errors.Is(err, store.ErrConflict) {
				excluded = load()
				continue
			}
			if err != nil {
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

// TestPostgresDecideCrashSafety runs two processes recording decisions on
// one database and SIGKILLs them at random moments (6 rounds), then checks
// that the trail is intact and that decisions and their audit records
// were committed together: every decision names a record of its action
// and reading, and every exclude/reinstate record has its decision. The
// server rolls back what a killed client left open, and releases its
// lock on the trail with it.
func TestPostgresDecideCrashSafety(t *testing.T) {
	if schema := os.Getenv("PLUMB_PG_DECIDE_CRASH"); schema != "" {
		pgDecideCrashChild(schema)
		return
	}
	if testing.Short() {
		t.Skip("kills child processes; skipped under -short")
	}
	db, schema := openTemp(t)
	ctx := context.Background()
	ingestRows(t, db, "cal", "a.csv", pgCrashRows)
	rng := rand.New(rand.NewPCG(5, 6))
	prev, progressed := int64(0), 0
	const rounds = 6
	for i := range rounds {
		var cmds []*exec.Cmd
		for range 2 {
			cmd := exec.Command(os.Args[0], "-test.run=^TestPostgresDecideCrashSafety$")
			cmd.Env = append(os.Environ(), "PLUMB_PG_DECIDE_CRASH="+schema)
			cmd.Stderr = os.Stderr
			out, err := cmd.StdoutPipe()
			if err != nil {
				t.Fatal(err)
			}
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			cmds = append(cmds, cmd)
			if line, err := bufio.NewReader(out).ReadString('\n'); err != nil || line != "ready\n" {
				for _, c := range cmds {
					c.Process.Kill()
					c.Wait()
				}
				t.Fatalf("round %d: child said %q, %v", i, line, err)
			}
		}
		for _, cmd := range cmds {
			time.Sleep(time.Duration(10+rng.IntN(150)) * time.Millisecond)
			if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
				t.Fatal(err)
			}
			var ee *exec.ExitError
			if err := cmd.Wait(); !errors.As(err, &ee) || ee.Sys().(syscall.WaitStatus).Signal() != syscall.SIGKILL {
				t.Fatalf("round %d: child ended with %v, want killed by SIGKILL", i, err)
			}
		}
		n := checkPgDecideState(t, ctx, db, i)
		if n > prev {
			progressed++
		}
		prev = n
	}
	if progressed < rounds/2 {
		t.Errorf("the children committed in only %d of %d rounds", progressed, rounds)
	}
}

func checkPgDecideState(t *testing.T, ctx context.Context, db *postgres.DB, round int) int64 {
	t.Helper()
	rep, err := store.VerifyAudit(ctx, db)
	if err != nil || rep.Break != nil {
		t.Fatalf("round %d: VerifyAudit = %+v, %v", round, rep.Break, err)
	}
	recs, err := db.Audit(ctx, store.AuditQuery{})
	if err != nil {
		t.Fatal(err)
	}
	ds, err := db.Decisions(ctx, "cal")
	if err != nil {
		t.Fatal(err)
	}
	obs, err := db.Observations(ctx, "cal", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	line := map[int64]int{}
	for _, o := range obs {
		line[o.ID] = o.Line
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
		t.Errorf("round %d: %d exclude/reinstate records, %d decisions", round, decided, len(ds))
	}
	for _, d := range ds {
		r, ok := bySeq[d.AuditSeq]
		if !ok || r.Action != d.Action || r.Subject != fmt.Sprintf("a.csv:%d", line[d.ObsID]) {
			t.Errorf("round %d: decision %d (%s of %d) names record %d = %+v", round, d.ID, d.Action, d.ObsID, d.AuditSeq, r)
		}
	}
	t.Logf("round %d: %d audit records, %d decisions, %d set aside", round, len(recs), len(ds), len(store.ExcludedAt(ds, time.Time{})))
	return int64(len(recs))
}
