package transfer_test

import (
	"context"
	"errors"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/transfer"
)

// A history with a recorded decision is refused before anything is
// written, with the reason.
func TestCopyRefusesDecisions(t *testing.T) {
	ctx := context.Background()
	src := openSQLite(t)
	fill(t, src)
	obs, err := src.Observations(ctx, "cal", store.ObsQuery{Limit: 1})
	if err != nil || len(obs) == 0 {
		t.Fatalf("observations: %v", err)
	}
	if _, err := src.Decide(ctx, store.Decision{Model: "cal", ObsID: obs[0].ID, Action: store.ActionExclude, Actor: "r.okafor", Reason: "valve left open"}); err != nil {
		t.Fatal(err)
	}
	dst := openSQLite(t)
	_, err = transfer.Copy(ctx, src, dst, transfer.Options{})
	if !errors.Is(err, transfer.ErrDecisions) {
		t.Fatalf("copy of a history with decisions: %v, want ErrDecisions", err)
	}
	t.Logf("refused: %v", err)
	if ms, err := dst.Models(ctx); err != nil || len(ms) != 0 {
		t.Errorf("the target holds %v (%v) after a refused copy, want nothing", ms, err)
	}
}

// The audit trail of alert changes is copied record for record, each
// sealed with the source's hash; a second run copies nothing; a target
// that keeps no trail is refused.
func TestCopyAuditTrail(t *testing.T) {
	ctx := context.Background()
	src := openSQLite(t)
	fill(t, src)
	for i, act := range []string{store.ActionOpen, store.ActionAcknowledge, store.ActionResolve} {
		// Times to the nanosecond: the hash covers them.
		r := store.AuditRecord{At: t0.Add(time.Duration(i)*time.Second + 123), Actor: "j.tanaka", Action: act, Model: "cal",
			Subject: "sp-0123456789abcdef", Reason: "note " + act, After: `{"state":"x"}`}
		if _, err := src.AppendAudit(ctx, r); err != nil {
			t.Fatal(err)
		}
	}
	want, err := src.Audit(ctx, store.AuditQuery{})
	if err != nil {
		t.Fatal(err)
	}

	if _, err := transfer.Copy(ctx, src, struct{ store.Store }{openSQLite(t)}, transfer.Options{}); !errors.Is(err, transfer.ErrTrail) {
		t.Errorf("copy to a target without a trail: %v, want ErrTrail", err)
	}

	dst := openSQLite(t)
	rep, err := transfer.Copy(ctx, src, dst, transfer.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if rep.Audit != 3 || rep.CopiedAudit != 3 {
		t.Errorf("audit %d, copied %d; want 3 and 3", rep.Audit, rep.CopiedAudit)
	}
	got, err := dst.Audit(ctx, store.AuditQuery{})
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != len(want) {
		t.Fatalf("%d records copied, want %d", len(got), len(want))
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("record %d: copied %+v, source %+v", want[i].Seq, got[i], want[i])
		}
	}
	vr, err := store.VerifyAudit(ctx, dst)
	if err != nil || vr.Break != nil {
		t.Errorf("the copied trail does not verify: %v %v", err, vr.Break)
	}
	rep, err = transfer.Copy(ctx, src, dst, transfer.Options{})
	if err != nil || rep.CopiedAudit != 0 || rep.Audit != 3 {
		t.Errorf("second run: %+v, %v; want nothing copied", rep, err)
	}
}
