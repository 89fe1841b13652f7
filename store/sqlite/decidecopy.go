package sqlite

import (
	"context"
	"database/sql"
	"fmt"
	"time"

	"plumb/store"
)

const auditSelect = "SELECT seq, at, actor, action, model, subject, reason, before, after, prev, hash FROM audit "

// exportFrom reads the whole decision history within tx.
func exportFrom(ctx context.Context, tx *sql.Tx) (store.DecisionHistory, error) {
	var h store.DecisionHistory
	rows, err := tx.QueryContext(ctx, auditSelect+"ORDER BY seq")
	if err != nil {
		return h, err
	}
	for rows.Next() {
		var r store.AuditRecord
		var at sql.NullInt64
		if err := rows.Scan(&r.Seq, &at, &r.Actor, &r.Action, &r.Model, &r.Subject, &r.Reason, &r.Before, &r.After, &r.Prev, &r.Hash); err != nil {
			rows.Close()
			return h, err
		}
		r.At = decTime(at)
		h.Audit = append(h.Audit, r)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return h, err
	}
	if rows, err = tx.QueryContext(ctx, decisionSelect+" ORDER BY id"); err != nil {
		return h, err
	}
	if h.Decisions, err = scanDecisions(rows); err != nil {
		return h, err
	}
	if rows, err = tx.QueryContext(ctx, rebaselineSelect+" ORDER BY id"); err != nil {
		return h, err
	}
	if h.Rebaselines, err = scanRebaselines(rows); err != nil {
		return h, err
	}
	if rows, err = tx.QueryContext(ctx, quietSelect+" ORDER BY id"); err != nil {
		return h, err
	}
	h.Quiet, err = scanQuiet(rows)
	return h, err
}

// ExportDecisions returns the whole audit trail exactly as stored, with
// every decision, re-baseline and quiet period, read in one snapshot, for
// store/transfer.
func (db *DB) ExportDecisions(ctx context.Context) (store.DecisionHistory, error) {
	tx, err := db.db.BeginTx(ctx, &sql.TxOptions{ReadOnly: true})
	if err != nil {
		return store.DecisionHistory{}, fmt.Errorf("store: export decisions: %w", err)
	}
	defer tx.Rollback()
	h, err := exportFrom(ctx, tx)
	if err != nil {
		return store.DecisionHistory{}, fmt.Errorf("store: export decisions: %w", err)
	}
	return h, nil
}

// ImportDecisions writes a decision history copied from another store
// (its observation ids already this store's) in one transaction: the
// audit records this store lacks are inserted as they are, never sealed
// again, so the chain and every hash stay the source's; the rows it lacks
// are inserted with their ids, and quiet periods the source has ended
// since an earlier copy are ended. What this store holds must be a start
// of h (store.PlanImport); otherwise nothing is written and the error
// wraps store.ErrConflict. It returns what it wrote.
func (db *DB) ImportDecisions(ctx context.Context, h store.DecisionHistory) (store.ImportPlan, error) {
	var plan store.ImportPlan
	err := db.write(ctx, func(tx *sql.Tx) error {
		have, err := exportFrom(ctx, tx)
		if err != nil {
			return err
		}
		if plan, err = store.PlanImport(have, h); err != nil {
			return err
		}
		for _, r := range plan.Audit {
			at, err := encTime(r.At)
			if err != nil {
				return fmt.Errorf("audit record %d: %w", r.Seq, err)
			}
			if _, err := tx.ExecContext(ctx, `INSERT INTO audit (seq, at, actor, action, model, subject, reason, before, after, prev, hash)
				VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
				r.Seq, at, r.Actor, r.Action, r.Model, r.Subject, r.Reason, r.Before, r.After, r.Prev, r.Hash); err != nil {
				return fmt.Errorf("audit record %d: %w", r.Seq, err)
			}
		}
		for _, d := range plan.Decisions {
			at, err := encTime(d.At)
			if err != nil {
				return fmt.Errorf("decision %d: %w", d.ID, err)
			}
			if _, err := tx.ExecContext(ctx, `INSERT INTO decisions (id, model, obs_id, action, actor, reason, at, subject, audit_seq)
				VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)`, d.ID, d.Model, d.ObsID, d.Action, d.Actor, d.Reason, at, d.Subject, d.AuditSeq); err != nil {
				return fmt.Errorf("decision %d: %w", d.ID, err)
			}
		}
		for _, r := range plan.Rebaselines {
			from, err := encTime(r.From)
			if err != nil {
				return fmt.Errorf("re-baseline %d: %w", r.ID, err)
			}
			rec, err := encTime(r.Recorded)
			if err != nil {
				return fmt.Errorf("re-baseline %d: %w", r.ID, err)
			}
			if _, err := tx.ExecContext(ctx, `INSERT INTO rebaselines (id, model, from_t, actor, reason, recorded, audit_seq)
				VALUES (?, ?, ?, ?, ?, ?, ?)`, r.ID, r.Model, from, r.Actor, r.Reason, rec, r.AuditSeq); err != nil {
				return fmt.Errorf("re-baseline %d: %w", r.ID, err)
			}
		}
		for _, q := range plan.Quiet {
			var times [3]any
			for i, t := range []time.Time{q.Start, q.End, q.Created} {
				if times[i], err = encTime(t); err != nil {
					return fmt.Errorf("quiet period %d: %w", q.ID, err)
				}
			}
			if _, err := tx.ExecContext(ctx, `INSERT INTO quiet_periods (id, model, start_t, end_t, owner, reason, created, ended_by, end_reason, audit_seq)
				VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`, q.ID, q.Model, times[0], times[1], q.Owner, q.Reason, times[2],
				q.EndedBy, q.EndReason, q.AuditSeq); err != nil {
				return fmt.Errorf("quiet period %d: %w", q.ID, err)
			}
		}
		for _, q := range plan.QuietEnded {
			end, err := encTime(q.End)
			if err != nil {
				return fmt.Errorf("quiet period %d: %w", q.ID, err)
			}
			if _, err := tx.ExecContext(ctx, "UPDATE quiet_periods SET end_t = ?, ended_by = ?, end_reason = ?, audit_seq = ? WHERE id = ?",
				end, q.EndedBy, q.EndReason, q.AuditSeq, q.ID); err != nil {
				return fmt.Errorf("quiet period %d: %w", q.ID, err)
			}
		}
		return nil
	})
	if err != nil {
		return store.ImportPlan{}, fmt.Errorf("store: import decisions: %w", err)
	}
	return plan, nil
}
