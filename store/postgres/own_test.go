package postgres_test

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/postgres"
)

// openSame opens another handle (another pool, as another daemon would)
// on the schema.
func openSame(t *testing.T, schema string) *postgres.DB {
	t.Helper()
	db, err := postgres.Open(context.Background(), testURL(t), postgres.WithSchema(schema))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db
}

func ownersByModel(t *testing.T, db *postgres.DB) map[string]postgres.Ownership {
	t.Helper()
	all, err := db.Owners(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	m := map[string]postgres.Ownership{}
	for _, o := range all {
		m[o.Model] = o
	}
	return m
}

// TestPostgresOwnership: one owner per model; a second daemon waits,
// owns other models meanwhile, and takes over when the owner releases
// the model or its session ends.
func TestPostgresOwnership(t *testing.T) {
	one, schema := openTemp(t)
	two := openSame(t, schema)
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	opt := postgres.AcquireOptions{Poll: 20 * time.Millisecond, Check: 50 * time.Millisecond}

	l1, err := one.Acquire(ctx, "cal", postgres.Owner{Host: "line-1", PID: 11, Label: "one"}, opt)
	if err != nil {
		t.Fatal(err)
	}
	if o := ownersByModel(t, two)["cal"]; o.Host != "line-1" || o.PID != 11 || o.Label != "one" || !o.Alive {
		t.Errorf("owner of cal = %+v, want line-1/11/one alive", o)
	}

	var waited []postgres.Ownership
	var mu sync.Mutex
	wopt := opt
	wopt.Waiting = func(o postgres.Ownership) { mu.Lock(); waited = append(waited, o); mu.Unlock() }
	got := make(chan *postgres.Lease, 1)
	go func() {
		l, err := two.Acquire(ctx, "cal", postgres.Owner{Host: "standby", PID: 22, Label: "two"}, wopt)
		if err != nil {
			t.Error(err)
		}
		got <- l
	}()
	select {
	case <-got:
		t.Fatal("a second daemon owns cal while the first holds it")
	case <-time.After(300 * time.Millisecond):
	}
	mu.Lock()
	if len(waited) != 1 || waited[0].Label != "one" || !waited[0].Alive {
		t.Errorf("Waiting called with %+v, want once with the first owner, alive", waited)
	}
	mu.Unlock()
	// Other models are free meanwhile.
	lp, err := two.Acquire(ctx, "press", postgres.Owner{Host: "standby", PID: 22, Label: "two"}, opt)
	if err != nil {
		t.Fatal(err)
	}
	if err := l1.Release(ctx); err != nil {
		t.Fatal(err)
	}
	var l2 *postgres.Lease
	select {
	case l2 = <-got:
	case <-time.After(5 * time.Second):
		t.Fatal("the standby did not take over within 5 s of the release")
	}
	own := ownersByModel(t, one)
	if o := own["cal"]; o.Label != "two" || !o.Alive {
		t.Errorf("owner of cal after the takeover = %+v", o)
	}
	if o := own["press"]; o.Label != "two" || !o.Alive {
		t.Errorf("owner of press = %+v", o)
	}

	// The owner's session ends (as when its process is killed): the lock
	// goes, the lease reports the loss, the owner shows not alive.
	if _, err := one.Pool().Exec(ctx, "SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE application_name = 'plumb owner of cal'"); err != nil {
		t.Fatal(err)
	}
	select {
	case <-l2.Lost():
	case <-time.After(5 * time.Second):
		t.Fatal("Lost not closed after the lease session ended")
	}
	if o := ownersByModel(t, one)["cal"]; o.Alive {
		t.Errorf("owner of cal alive after its session ended: %+v", o)
	}
	l3, err := one.Acquire(ctx, "cal", postgres.Owner{Host: "line-1", PID: 11, Label: "one again"}, opt)
	if err != nil {
		t.Fatal(err)
	}
	for _, l := range []*postgres.Lease{l2, l3, lp} {
		if err := l.Release(ctx); err != nil && l != l2 {
			t.Error(err)
		}
	}
}

// TestPostgresOwnerKilled: a process owning a model is SIGKILLed; a
// waiting daemon owns the model within a second of the kill.
func TestPostgresOwnerKilled(t *testing.T) {
	if os.Getenv("PLUMB_OWNER_CHILD") != "" {
		ownerChild()
		return
	}
	db, schema := openTemp(t)
	cmd := exec.Command(os.Args[0], "-test.run=^TestPostgresOwnerKilled$")
	cmd.Env = append(os.Environ(), "PLUMB_OWNER_CHILD="+schema)
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	buf := make([]byte, 64)
	n, _ := out.Read(buf) // the child prints "owned" once it holds the lock
	if !strings.Contains(string(buf[:n]), "owned") {
		t.Fatalf("child said %q", buf[:n])
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	if o := ownersByModel(t, db)["cal"]; o.PID != cmd.Process.Pid || !o.Alive {
		t.Fatalf("owner = %+v, want the child (pid %d) alive", o, cmd.Process.Pid)
	}
	got := make(chan time.Time, 1)
	go func() {
		l, err := db.Acquire(ctx, "cal", postgres.ThisProcess("standby"), postgres.AcquireOptions{Poll: 100 * time.Millisecond})
		if err != nil {
			t.Error(err)
			got <- time.Time{}
			return
		}
		got <- time.Now()
		l.Release(ctx)
	}()
	time.Sleep(300 * time.Millisecond)
	select {
	case <-got:
		t.Fatal("took the model while its owner lives")
	default:
	}
	killed := time.Now()
	if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	cmd.Wait()
	at := <-got
	if at.IsZero() {
		return
	}
	took := at.Sub(killed)
	t.Logf("took over %v after the owner was killed", took.Round(time.Millisecond))
	if took > time.Second+100*time.Millisecond {
		t.Errorf("took over %v after the kill, want within the poll interval (and the server's notice)", took)
	}
}

// ownerChild owns the model "cal" and waits to be killed.
func ownerChild() {
	ctx := context.Background()
	db, err := postgres.Open(ctx, os.Getenv("PLUMB_TEST_POSTGRES"), postgres.WithSchema(os.Getenv("PLUMB_OWNER_CHILD")))
	if err != nil {
		fmt.Println(err)
		os.Exit(1)
	}
	if _, err := db.Acquire(ctx, "cal", postgres.ThisProcess("child"), postgres.AcquireOptions{}); err != nil {
		fmt.Println(err)
		os.Exit(1)
	}
	fmt.Println("owned")
	time.Sleep(time.Hour)
}

// TestPostgresClaimDeliveries: four daemons claiming from one outbox get
// each due delivery once; an abandoned claim is due again after its hold.
func TestPostgresClaimDeliveries(t *testing.T) {
	first, schema := openTemp(t)
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	now := time.Date(2026, 3, 14, 12, 0, 0, 0, time.UTC)
	const alerts, routes = 50, 4
	for a := range alerts {
		var ds []store.Delivery
		for r := range routes {
			ds = append(ds, store.Delivery{Route: fmt.Sprintf("r%d", r), EventID: fmt.Sprintf("e%d", a),
				Payload: []byte("{}"), NextAttempt: now.Add(-time.Duration(a) * time.Second)})
		}
		rec := store.AlertRecord{ID: fmt.Sprintf("a%d", a), Model: "cal", Kind: "drift", Subject: "x", Severity: "warning",
			State: "open", FirstSeen: now, LastSeen: now, Doc: "{}"}
		if err := first.PutAlert(ctx, rec, ds); err != nil {
			t.Fatal(err)
		}
	}
	var mu sync.Mutex
	claimed := map[int64]int{}
	var wg sync.WaitGroup
	for range 4 {
		db := openSame(t, schema)
		wg.Go(func() {
			for {
				ds, err := db.ClaimDeliveries(ctx, now, 7, time.Hour)
				if err != nil {
					t.Error(err)
					return
				}
				if len(ds) == 0 {
					return
				}
				for i, d := range ds {
					if i > 0 && ds[i-1].NextAttempt.After(d.NextAttempt) {
						t.Errorf("claimed out of order: %v after %v", d.NextAttempt, ds[i-1].NextAttempt)
					}
					mu.Lock()
					claimed[d.ID]++
					mu.Unlock()
					d.State, d.Attempts = store.DeliveryDelivered, 1
					if err := db.UpdateDelivery(ctx, d); err != nil {
						t.Error(err)
					}
				}
			}
		})
	}
	wg.Wait()
	if len(claimed) != alerts*routes {
		t.Errorf("%d deliveries claimed, want %d", len(claimed), alerts*routes)
	}
	for id, n := range claimed {
		if n != 1 {
			t.Errorf("delivery %d claimed %d times", id, n)
		}
	}
	if ds, err := first.Deliveries(ctx, store.DeliveryDelivered, 0); err != nil || len(ds) != alerts*routes {
		t.Errorf("%d delivered (%v), want %d", len(ds), err, alerts*routes)
	}

	// A claim whose daemon died: due again once the hold has passed.
	if err := first.PutAlert(ctx, store.AlertRecord{ID: "late", Model: "cal", Kind: "drift", Subject: "y", State: "open", Doc: "{}"},
		[]store.Delivery{{Route: "r0", EventID: "late", NextAttempt: now}}); err != nil {
		t.Fatal(err)
	}
	if ds, err := first.ClaimDeliveries(ctx, now, 0, time.Minute); err != nil || len(ds) != 1 {
		t.Fatalf("claim = %v, %v; want the late delivery", ds, err)
	}
	if ds, err := first.ClaimDeliveries(ctx, now.Add(30*time.Second), 0, time.Minute); err != nil || len(ds) != 0 {
		t.Errorf("claim within the hold = %v, %v; want none", ds, err)
	}
	if ds, err := first.ClaimDeliveries(ctx, now.Add(2*time.Minute), 0, time.Minute); err != nil || len(ds) != 1 {
		t.Errorf("claim after the hold = %v, %v; want the late delivery again", ds, err)
	}
}
