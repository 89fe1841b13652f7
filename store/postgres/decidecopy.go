package postgres

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5"

	"plumb/store"
)

// exportFrom reads the whole decision history through q.
func exportFrom(ctx context.Context, q querier) (store.DecisionHistory, error) {
	var h store.DecisionHistory
	rows, err := q.Query(ctx, auditSelect+"ORDER BY seq")
	if err != nil {
		return h, err
	}
	if h.Audit, err = scanAudit(rows); err != nil {
		return h, err
	}
	if rows, err = q.Query(ctx, decisionSelect+"ORDER BY id"); err != nil {
		return h, err
	}
	if h.Decisions, err = scanDecisions(rows); err != nil {
		return h, err
	}
	if rows, err = q.Query(ctx, rebaselineSelect+"ORDER BY id"); err != nil {
		return h, err
	}
	if h.Rebaselines, err = scanRebaselines(rows); err != nil {
		return h, err
	}
	if rows, err = q.Query(ctx, quietSelect+"ORDER BY id"); err != nil {
		return h, err
	}
	h.Quiet, err = scanQuiet(rows)
	return h, err
}

// ExportDecisions returns the whole audit trail exactly as stored, with
// every decision, re-baseline and quiet period, read in one snapshot, for
// store/transfer.
func (db *DB) ExportDecisions(ctx context.Context) (store.DecisionHistory, error) {
	var h store.DecisionHistory
	err := pgx.BeginTxFunc(ctx, db.pool, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly}, func(tx pgx.Tx) error {
		var err error
		h, err = exportFrom(ctx, tx)
		return err
	})
	if err != nil {
		return h, fmt.Errorf("store: export decisions: %w", err)
	}
	return h, nil
}

// ImportDecisions writes a decision history copied from another store
// (its observation ids already this store's) in one transaction under
// the trail's lock: the audit records this store lacks are inserted as
// they are, never sealed again, so the chain and every hash stay the
// source's; the rows it lacks are inserted with their ids, and quiet
// periods the source has ended since an earlier copy are ended. What
// this store holds must be a start of h (store.PlanImport); otherwise
// nothing is written and the error wraps store.ErrConflict. It returns
// what it wrote.
func (db *DB) ImportDecisions(ctx context.Context, h store.DecisionHistory) (store.ImportPlan, error) {
	var plan store.ImportPlan
	fail := func(err error) (store.ImportPlan, error) {
		return store.ImportPlan{}, fmt.Errorf("store: import decisions: %w", err)
	}
	for _, r := range h.Audit {
		if err := plainRecord(r); err != nil {
			return fail(fmt.Errorf("audit record %d: %w", r.Seq, err))
		}
	}
	err := db.writeAudited(ctx, func(tx pgx.Tx) error {
		have, err := exportFrom(ctx, tx)
		if err != nil {
			return err
		}
		if plan, err = store.PlanImport(have, h); err != nil {
			return err
		}
		if len(plan.Audit) > 0 {
			rows := make([][]any, len(plan.Audit))
			for i, r := range plan.Audit {
				at, err := encTime(r.At)
				if err != nil {
					return fmt.Errorf("audit record %d: %w", r.Seq, err)
				}
				rows[i] = []any{r.Seq, at, r.Actor, r.Action, r.Model, r.Subject, r.Reason, r.Before, r.After, r.Prev, r.Hash}
			}
			if _, err := tx.CopyFrom(ctx, pgx.Identifier{"audit"},
				[]string{"seq", "at", "actor", "action", "model", "subject", "reason", "before", "after", "prev", "hash"},
				pgx.CopyFromRows(rows)); err != nil {
				return err
			}
		}
		var b pgx.Batch
		for _, d := range plan.Decisions {
			if err := plainText("actor", d.Actor, "reason", d.Reason, "alert", d.Subject); err != nil {
				return fmt.Errorf("decision %d: %w", d.ID, err)
			}
			at, err := encTime(d.At)
			if err != nil {
				return fmt.Errorf("decision %d: %w", d.ID, err)
			}
			b.Queue(`INSERT INTO decisions (id, model, obs_id, action, actor, reason, at, subject, audit_seq)
				VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9)`, d.ID, d.Model, d.ObsID, d.Action, d.Actor, d.Reason, at, d.Subject, d.AuditSeq)
		}
		for _, r := range plan.Rebaselines {
			if err := plainText("actor", r.Actor, "reason", r.Reason); err != nil {
				return fmt.Errorf("re-baseline %d: %w", r.ID, err)
			}
			from, err := encTime(r.From)
			if err != nil {
				return fmt.Errorf("re-baseline %d: %w", r.ID, err)
			}
			rec, err := encTime(r.Recorded)
			if err != nil {
				return fmt.Errorf("re-baseline %d: %w", r.ID, err)
			}
			b.Queue(`INSERT INTO rebaselines (id, model, from_t, actor, reason, recorded, audit_seq)
				VALUES ($1, $2, $3, $4, $5, $6, $7)`, r.ID, r.Model, from, r.Actor, r.Reason, rec, r.AuditSeq)
		}
		for _, q := range plan.Quiet {
			if err := plainText("owner", q.Owner, "reason", q.Reason, "ended by", q.EndedBy, "end reason", q.EndReason); err != nil {
				return fmt.Errorf("quiet period %d: %w", q.ID, err)
			}
			times, err := quietTimes(q)
			if err != nil {
				return fmt.Errorf("quiet period %d: %w", q.ID, err)
			}
			b.Queue(`INSERT INTO quiet_periods (id, model, start_t, end_t, owner, reason, created, ended_by, end_reason, audit_seq)
				VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10)`,
				q.ID, q.Model, times[0], times[1], q.Owner, q.Reason, times[2], q.EndedBy, q.EndReason, q.AuditSeq)
		}
		for _, q := range plan.QuietEnded {
			if err := plainText("ended by", q.EndedBy, "end reason", q.EndReason); err != nil {
				return fmt.Errorf("quiet period %d: %w", q.ID, err)
			}
			end, err := encTime(q.End)
			if err != nil {
				return fmt.Errorf("quiet period %d: %w", q.ID, err)
			}
			b.Queue("UPDATE quiet_periods SET end_t = $1, ended_by = $2, end_reason = $3, audit_seq = $4 WHERE id = $5",
				end, q.EndedBy, q.EndReason, q.AuditSeq, q.ID)
		}
		if b.Len() == 0 {
			return nil
		}
		return tx.SendBatch(ctx, &b).Close()
	})
	if err != nil {
		return fail(err)
	}
	return plan, nil
}
