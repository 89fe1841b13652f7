package sqlite

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"time"

	"plumb/store"
)

var _ store.Decisions = (*DB)(nil)

// stamp returns t, or the clock's now when t is zero.
func (db *DB) stamp(t time.Time) time.Time {
	if t.IsZero() {
		return db.now().UTC()
	}
	return t.UTC()
}

// appendAudit seals r after the last record of the trail and inserts it,
// inside tx (which the caller's write holds, so no other writer appends
// in between).
func appendAudit(ctx context.Context, tx *sql.Tx, r store.AuditRecord) (store.AuditRecord, error) {
	var last store.AuditRecord
	err := tx.QueryRowContext(ctx, "SELECT seq, hash FROM audit ORDER BY seq DESC LIMIT 1").Scan(&last.Seq, &last.Hash)
	if err != nil && !errors.Is(err, sql.ErrNoRows) {
		return r, err
	}
	at, err := encTime(r.At)
	if err != nil {
		return r, err
	}
	r = store.Seal(r, last)
	_, err = tx.ExecContext(ctx, `INSERT INTO audit (seq, at, actor, action, model, subject, reason, before, after, prev, hash)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
		r.Seq, at, r.Actor, r.Action, r.Model, r.Subject, r.Reason, r.Before, r.After, r.Prev, r.Hash)
	return r, err
}

const decisionSelect = "SELECT id, model, obs_id, action, actor, reason, at, subject, audit_seq FROM decisions"

func scanDecisions(rows *sql.Rows) ([]store.Decision, error) {
	defer rows.Close()
	var out []store.Decision
	for rows.Next() {
		var d store.Decision
		var at sql.NullInt64
		if err := rows.Scan(&d.ID, &d.Model, &d.ObsID, &d.Action, &d.Actor, &d.Reason, &at, &d.Subject, &d.AuditSeq); err != nil {
			return nil, err
		}
		d.At = decTime(at)
		out = append(out, d)
	}
	return out, rows.Err()
}

// Decide implements store.Decisions.
func (db *DB) Decide(ctx context.Context, d store.Decision) (store.Decision, error) {
	fail := func(err error) (store.Decision, error) {
		return store.Decision{}, fmt.Errorf("store: %s reading %d of %s: %w", d.Action, d.ObsID, d.Model, err)
	}
	if err := store.CheckDecision(d); err != nil {
		return fail(err)
	}
	d.At = db.stamp(d.At)
	at, err := encTime(d.At)
	if err != nil {
		return fail(fmt.Errorf("%w: %v", store.ErrInvalid, err))
	}
	err = db.write(ctx, func(tx *sql.Tx) error {
		var o store.Observation
		err := tx.QueryRowContext(ctx, `SELECT o.id, s.path, o.generation, o.line FROM observations o
			JOIN sources s ON s.id = o.source_id JOIN models m ON m.id = o.model_id
			WHERE o.id = ? AND m.name = ?`, d.ObsID, d.Model).Scan(&o.ID, &o.Path, &o.Generation, &o.Line)
		if errors.Is(err, sql.ErrNoRows) {
			return store.ErrNotFound
		}
		if err != nil {
			return err
		}
		rows, err := tx.QueryContext(ctx, decisionSelect+" WHERE obs_id = ? ORDER BY id DESC LIMIT 1", d.ObsID)
		if err != nil {
			return err
		}
		prev, err := scanDecisions(rows)
		if err != nil {
			return err
		}
		var prior *store.Decision
		if len(prev) > 0 {
			prior = &prev[0]
		}
		rec, err := store.DecisionAudit(d, o, prior)
		if err != nil {
			return err
		}
		if rec, err = appendAudit(ctx, tx, rec); err != nil {
			return err
		}
		d.AuditSeq = rec.Seq
		res, err := tx.ExecContext(ctx, `INSERT INTO decisions (model, obs_id, action, actor, reason, at, subject, audit_seq)
			VALUES (?, ?, ?, ?, ?, ?, ?, ?)`, d.Model, d.ObsID, d.Action, d.Actor, d.Reason, at, d.Subject, d.AuditSeq)
		if err != nil {
			return err
		}
		d.ID, err = res.LastInsertId()
		return err
	})
	if err != nil {
		return fail(err)
	}
	return d, nil
}

// Decisions implements store.Decisions.
func (db *DB) Decisions(ctx context.Context, model string) ([]store.Decision, error) {
	rows, err := db.db.QueryContext(ctx, decisionSelect+" WHERE model = ? ORDER BY id", model)
	if err != nil {
		return nil, fmt.Errorf("store: decisions %s: %w", model, err)
	}
	out, err := scanDecisions(rows)
	if err != nil {
		return nil, fmt.Errorf("store: decisions %s: %w", model, err)
	}
	return out, nil
}

const rebaselineSelect = "SELECT id, model, from_t, actor, reason, recorded, audit_seq FROM rebaselines"

func scanRebaselines(rows *sql.Rows) ([]store.Rebaseline, error) {
	defer rows.Close()
	var out []store.Rebaseline
	for rows.Next() {
		var r store.Rebaseline
		var from, rec sql.NullInt64
		if err := rows.Scan(&r.ID, &r.Model, &from, &r.Actor, &r.Reason, &rec, &r.AuditSeq); err != nil {
			return nil, err
		}
		r.From, r.Recorded = decTime(from), decTime(rec)
		out = append(out, r)
	}
	return out, rows.Err()
}

// Rebaseline implements store.Decisions.
func (db *DB) Rebaseline(ctx context.Context, r store.Rebaseline) (store.Rebaseline, error) {
	fail := func(err error) (store.Rebaseline, error) {
		return store.Rebaseline{}, fmt.Errorf("store: re-baseline %s: %w", r.Model, err)
	}
	if err := store.CheckRebaseline(r); err != nil {
		return fail(err)
	}
	r.From, r.Recorded = r.From.UTC(), db.stamp(r.Recorded)
	from, err := encTime(r.From)
	if err != nil {
		return fail(fmt.Errorf("%w: %v", store.ErrInvalid, err))
	}
	rec, err := encTime(r.Recorded)
	if err != nil {
		return fail(fmt.Errorf("%w: %v", store.ErrInvalid, err))
	}
	err = db.write(ctx, func(tx *sql.Tx) error {
		rows, err := tx.QueryContext(ctx, rebaselineSelect+" WHERE model = ? ORDER BY id", r.Model)
		if err != nil {
			return err
		}
		mine, err := scanRebaselines(rows)
		if err != nil {
			return err
		}
		var prior *store.Rebaseline
		if p, ok := store.BaselineFrom(mine, time.Time{}); ok {
			prior = &p
		}
		a, err := appendAudit(ctx, tx, store.RebaselineAudit(r, prior))
		if err != nil {
			return err
		}
		r.AuditSeq = a.Seq
		res, err := tx.ExecContext(ctx, `INSERT INTO rebaselines (model, from_t, actor, reason, recorded, audit_seq)
			VALUES (?, ?, ?, ?, ?, ?)`, r.Model, from, r.Actor, r.Reason, rec, r.AuditSeq)
		if err != nil {
			return err
		}
		r.ID, err = res.LastInsertId()
		return err
	})
	if err != nil {
		return fail(err)
	}
	return r, nil
}

// Rebaselines implements store.Decisions.
func (db *DB) Rebaselines(ctx context.Context, model string) ([]store.Rebaseline, error) {
	rows, err := db.db.QueryContext(ctx, rebaselineSelect+" WHERE model = ? ORDER BY id", model)
	if err != nil {
		return nil, fmt.Errorf("store: re-baselines %s: %w", model, err)
	}
	out, err := scanRebaselines(rows)
	if err != nil {
		return nil, fmt.Errorf("store: re-baselines %s: %w", model, err)
	}
	return out, nil
}

const quietSelect = "SELECT id, model, start_t, end_t, owner, reason, created, ended_by, end_reason, audit_seq FROM quiet_periods"

func scanQuiet(rows *sql.Rows) ([]store.QuietPeriod, error) {
	defer rows.Close()
	var out []store.QuietPeriod
	for rows.Next() {
		var q store.QuietPeriod
		var start, end, created sql.NullInt64
		if err := rows.Scan(&q.ID, &q.Model, &start, &end, &q.Owner, &q.Reason, &created, &q.EndedBy, &q.EndReason, &q.AuditSeq); err != nil {
			return nil, err
		}
		q.Start, q.End, q.Created = decTime(start), decTime(end), decTime(created)
		out = append(out, q)
	}
	return out, rows.Err()
}

// SetQuiet implements store.Decisions.
func (db *DB) SetQuiet(ctx context.Context, q store.QuietPeriod) (store.QuietPeriod, error) {
	fail := func(err error) (store.QuietPeriod, error) {
		return store.QuietPeriod{}, fmt.Errorf("store: set quiet period: %w", err)
	}
	if err := store.CheckQuiet(q); err != nil {
		return fail(err)
	}
	q.Start, q.End, q.Created = q.Start.UTC(), q.End.UTC(), db.stamp(q.Created)
	q.EndedBy, q.EndReason = "", ""
	var times [3]any
	for i, t := range []time.Time{q.Start, q.End, q.Created} {
		v, err := encTime(t)
		if err != nil {
			return fail(fmt.Errorf("%w: %v", store.ErrInvalid, err))
		}
		times[i] = v
	}
	err := db.write(ctx, func(tx *sql.Tx) error {
		// The id is taken before the insert so that the audit record,
		// which names it, can be written first (the row refers to it).
		if err := tx.QueryRowContext(ctx, "SELECT COALESCE(MAX(id), 0) + 1 FROM quiet_periods").Scan(&q.ID); err != nil {
			return err
		}
		a, err := appendAudit(ctx, tx, store.QuietSetAudit(q))
		if err != nil {
			return err
		}
		q.AuditSeq = a.Seq
		_, err = tx.ExecContext(ctx, `INSERT INTO quiet_periods (id, model, start_t, end_t, owner, reason, created, audit_seq)
			VALUES (?, ?, ?, ?, ?, ?, ?, ?)`, q.ID, q.Model, times[0], times[1], q.Owner, q.Reason, times[2], q.AuditSeq)
		return err
	})
	if err != nil {
		return fail(err)
	}
	return q, nil
}

// EndQuiet implements store.Decisions.
func (db *DB) EndQuiet(ctx context.Context, id int64, at time.Time, actor, reason string) (store.QuietPeriod, error) {
	fail := func(err error) (store.QuietPeriod, error) {
		return store.QuietPeriod{}, fmt.Errorf("store: end quiet period %d: %w", id, err)
	}
	at = db.stamp(at)
	var q store.QuietPeriod
	err := db.write(ctx, func(tx *sql.Tx) error {
		rows, err := tx.QueryContext(ctx, quietSelect+" WHERE id = ?", id)
		if err != nil {
			return err
		}
		qs, err := scanQuiet(rows)
		if err != nil {
			return err
		}
		if len(qs) == 0 {
			return store.ErrNotFound
		}
		var rec store.AuditRecord
		q, rec, err = store.EndQuietAt(qs[0], at, actor, reason)
		if err != nil {
			return err
		}
		end, err := encTime(q.End)
		if err != nil {
			return err
		}
		a, err := appendAudit(ctx, tx, rec)
		if err != nil {
			return err
		}
		q.AuditSeq = a.Seq
		_, err = tx.ExecContext(ctx, "UPDATE quiet_periods SET end_t = ?, ended_by = ?, end_reason = ?, audit_seq = ? WHERE id = ?",
			end, q.EndedBy, q.EndReason, q.AuditSeq, q.ID)
		return err
	})
	if err != nil {
		return fail(err)
	}
	return q, nil
}

// QuietPeriods implements store.Decisions.
func (db *DB) QuietPeriods(ctx context.Context, model string, after time.Time) ([]store.QuietPeriod, error) {
	fail := func(err error) ([]store.QuietPeriod, error) {
		return nil, fmt.Errorf("store: quiet periods %s: %w", model, err)
	}
	var a int64 = -1 << 63
	if !after.IsZero() {
		v, err := encTime(after)
		if err != nil {
			return fail(err)
		}
		a = v.(int64)
	}
	rows, err := db.db.QueryContext(ctx, quietSelect+" WHERE (? = '' OR model = '' OR model = ?) AND end_t > ? ORDER BY id", model, model, a)
	if err != nil {
		return fail(err)
	}
	out, err := scanQuiet(rows)
	if err != nil {
		return fail(err)
	}
	return out, nil
}

// AppendAudit implements store.Decisions.
func (db *DB) AppendAudit(ctx context.Context, r store.AuditRecord) (store.AuditRecord, error) {
	fail := func(err error) (store.AuditRecord, error) {
		return store.AuditRecord{}, fmt.Errorf("store: append audit record: %w", err)
	}
	if err := store.CheckAudit(r); err != nil {
		return fail(err)
	}
	r.At = db.stamp(r.At)
	if _, err := encTime(r.At); err != nil {
		return fail(fmt.Errorf("%w: %v", store.ErrInvalid, err))
	}
	err := db.write(ctx, func(tx *sql.Tx) error {
		var err error
		r, err = appendAudit(ctx, tx, r)
		return err
	})
	if err != nil {
		return fail(err)
	}
	return r, nil
}

// Audit implements store.Decisions. Records come back exactly as stored,
// whatever state the chain is in, so that store.VerifyAudit can judge it.
func (db *DB) Audit(ctx context.Context, q store.AuditQuery) ([]store.AuditRecord, error) {
	fail := func(err error) ([]store.AuditRecord, error) { return nil, fmt.Errorf("store: audit trail: %w", err) }
	from, to := int64(-1<<63), int64(1<<63-1)
	if !q.From.IsZero() {
		v, err := encTime(q.From)
		if err != nil {
			return fail(err)
		}
		from = v.(int64)
	}
	if !q.To.IsZero() {
		v, err := encTime(q.To)
		if err != nil {
			return fail(err)
		}
		to = v.(int64)
	}
	rows, err := db.db.QueryContext(ctx, `SELECT seq, at, actor, action, model, subject, reason, before, after, prev, hash
		FROM audit WHERE seq > ? AND at >= ? AND at < ? ORDER BY seq LIMIT ?`, q.AfterSeq, from, to, sqlLimit(q.Limit))
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	var out []store.AuditRecord
	for rows.Next() {
		var r store.AuditRecord
		var at sql.NullInt64
		if err := rows.Scan(&r.Seq, &at, &r.Actor, &r.Action, &r.Model, &r.Subject, &r.Reason, &r.Before, &r.After, &r.Prev, &r.Hash); err != nil {
			return fail(err)
		}
		r.At = decTime(at)
		out = append(out, r)
	}
	if err := rows.Err(); err != nil {
		return fail(err)
	}
	return out, nil
}

// PutAlertAudited implements store.Decisions.
func (db *DB) PutAlertAudited(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery, audit store.AlertAudit) error {
	return db.putAlert(ctx, a, deliveries, func(tx *sql.Tx) error {
		var old *store.AlertRecord
		var stored store.AlertRecord
		switch err := scanAlert(tx.QueryRowContext(ctx, alertSelect+"WHERE id = ?", a.ID), &stored); {
		case err == nil:
			old = &stored
		case !errors.Is(err, sql.ErrNoRows):
			return err
		}
		rec, ok := audit(old, a)
		if !ok {
			return nil
		}
		if err := store.CheckAudit(rec); err != nil {
			return err
		}
		rec.At = db.stamp(rec.At)
		if _, err := encTime(rec.At); err != nil {
			return fmt.Errorf("%w: %v", store.ErrInvalid, err)
		}
		_, err := appendAudit(ctx, tx, rec)
		return err
	})
}
