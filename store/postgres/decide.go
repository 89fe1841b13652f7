package postgres

import (
	"context"
	"errors"
	"fmt"
	"hash/fnv"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"

	"plumb/store"
)

var _ store.Decisions = (*DB)(nil)

// Writers of the audit trail are serialised across processes by a
// transaction-level advisory lock (auditLockKey) taken before the last
// record is read: two daemons, or a daemon and the command line, append
// one after the other and the chain stays one chain. The lock is released
// with the transaction.

// auditLockKey is the advisory lock of the schema's audit trail: FNV-1a
// of the schema, in its own namespace (model locks hash "plumb model").
func (db *DB) auditLockKey() int64 {
	h := fnv.New64a()
	h.Write([]byte("plumb audit\x00" + db.schema))
	return int64(h.Sum64())
}

// stamp returns t in UTC, or the clock's now when t is zero.
func (db *DB) stamp(t time.Time) time.Time {
	if t.IsZero() {
		return db.now().UTC()
	}
	return t.UTC()
}

// writeAudited runs fn in a transaction that holds the trail's lock.
func (db *DB) writeAudited(ctx context.Context, fn func(tx pgx.Tx) error) error {
	return pgx.BeginFunc(ctx, db.pool, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, "SELECT pg_advisory_xact_lock($1)", db.auditLockKey()); err != nil {
			return err
		}
		return fn(tx)
	})
}

// appendAudit seals r after the last record of the trail and inserts it,
// inside tx (which holds the trail's lock).
func appendAudit(ctx context.Context, tx pgx.Tx, r store.AuditRecord) (store.AuditRecord, error) {
	var last store.AuditRecord
	err := tx.QueryRow(ctx, "SELECT seq, hash FROM audit ORDER BY seq DESC LIMIT 1").Scan(&last.Seq, &last.Hash)
	if err != nil && !errors.Is(err, pgx.ErrNoRows) {
		return r, err
	}
	at, err := encTime(r.At)
	if err != nil {
		return r, fmt.Errorf("%w: %v", store.ErrInvalid, err)
	}
	r = store.Seal(r, last)
	_, err = tx.Exec(ctx, `INSERT INTO audit (seq, at, actor, action, model, subject, reason, before, after, prev, hash)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11)`,
		r.Seq, at, r.Actor, r.Action, r.Model, r.Subject, r.Reason, r.Before, r.After, r.Prev, r.Hash)
	return r, err
}

const pgDecisionSelect = "SELECT id, model, obs_id, action, actor, reason, at, subject, audit_seq FROM decisions"

func collectDecisions(rows pgx.Rows, err error) ([]store.Decision, error) {
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []store.Decision
	for rows.Next() {
		var d store.Decision
		var at pgtype.Int8
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
	err = db.writeAudited(ctx, func(tx pgx.Tx) error {
		var o store.Observation
		err := tx.QueryRow(ctx, `SELECT o.id, s.path, o.generation, o.line FROM observations o
			JOIN sources s ON s.id = o.source_id JOIN models m ON m.id = o.model_id
			WHERE o.id = $1 AND m.name = $2`, d.ObsID, d.Model).Scan(&o.ID, &o.Path, &o.Generation, &o.Line)
		if errors.Is(err, pgx.ErrNoRows) {
			return store.ErrNotFound
		}
		if err != nil {
			return err
		}
		prev, err := collectDecisions(tx.Query(ctx, pgDecisionSelect+" WHERE obs_id = $1 ORDER BY id DESC LIMIT 1", d.ObsID))
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
		return tx.QueryRow(ctx, `INSERT INTO decisions (model, obs_id, action, actor, reason, at, subject, audit_seq)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8) RETURNING id`, d.Model, d.ObsID, d.Action, d.Actor, d.Reason, at, d.Subject, d.AuditSeq).Scan(&d.ID)
	})
	if err != nil {
		return fail(err)
	}
	return d, nil
}

// Decisions implements store.Decisions.
func (db *DB) Decisions(ctx context.Context, model string) ([]store.Decision, error) {
	out, err := collectDecisions(db.pool.Query(ctx, pgDecisionSelect+" WHERE model = $1 ORDER BY id", model))
	if err != nil {
		return nil, fmt.Errorf("store: decisions %s: %w", model, err)
	}
	return out, nil
}

const pgRebaselineSelect = "SELECT id, model, from_t, actor, reason, recorded, audit_seq FROM rebaselines"

func collectRebaselines(rows pgx.Rows, err error) ([]store.Rebaseline, error) {
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []store.Rebaseline
	for rows.Next() {
		var r store.Rebaseline
		var from, rec pgtype.Int8
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
	err = db.writeAudited(ctx, func(tx pgx.Tx) error {
		mine, err := collectRebaselines(tx.Query(ctx, pgRebaselineSelect+" WHERE model = $1 ORDER BY id", r.Model))
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
		return tx.QueryRow(ctx, `INSERT INTO rebaselines (model, from_t, actor, reason, recorded, audit_seq)
			VALUES ($1, $2, $3, $4, $5, $6) RETURNING id`, r.Model, from, r.Actor, r.Reason, rec, r.AuditSeq).Scan(&r.ID)
	})
	if err != nil {
		return fail(err)
	}
	return r, nil
}

// Rebaselines implements store.Decisions.
func (db *DB) Rebaselines(ctx context.Context, model string) ([]store.Rebaseline, error) {
	out, err := collectRebaselines(db.pool.Query(ctx, pgRebaselineSelect+" WHERE model = $1 ORDER BY id", model))
	if err != nil {
		return nil, fmt.Errorf("store: re-baselines %s: %w", model, err)
	}
	return out, nil
}

const pgQuietSelect = "SELECT id, model, start_t, end_t, owner, reason, created, ended_by, end_reason, audit_seq FROM quiet_periods"

func collectQuiet(rows pgx.Rows, err error) ([]store.QuietPeriod, error) {
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []store.QuietPeriod
	for rows.Next() {
		var q store.QuietPeriod
		var start, end, created pgtype.Int8
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
	err := db.writeAudited(ctx, func(tx pgx.Tx) error {
		// The id is taken (under the trail's lock) before the insert, so
		// that the audit record, which names it, is written first.
		if err := tx.QueryRow(ctx, "SELECT COALESCE(MAX(id), 0) + 1 FROM quiet_periods").Scan(&q.ID); err != nil {
			return err
		}
		a, err := appendAudit(ctx, tx, store.QuietSetAudit(q))
		if err != nil {
			return err
		}
		q.AuditSeq = a.Seq
		_, err = tx.Exec(ctx, `INSERT INTO quiet_periods (id, model, start_t, end_t, owner, reason, created, audit_seq)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8)`, q.ID, q.Model, times[0], times[1], q.Owner, q.Reason, times[2], q.AuditSeq)
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
	err := db.writeAudited(ctx, func(tx pgx.Tx) error {
		qs, err := collectQuiet(tx.Query(ctx, pgQuietSelect+" WHERE id = $1 FOR UPDATE", id))
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
		_, err = tx.Exec(ctx, "UPDATE quiet_periods SET end_t = $1, ended_by = $2, end_reason = $3, audit_seq = $4 WHERE id = $5",
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
	out, err := collectQuiet(db.pool.Query(ctx, pgQuietSelect+" WHERE ($1 = '' OR model = '' OR model = $1) AND end_t > $2 ORDER BY id", model, a))
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
	err := db.writeAudited(ctx, func(tx pgx.Tx) error {
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
	limit := int64(1<<63 - 1)
	if q.Limit > 0 {
		limit = int64(q.Limit)
	}
	rows, err := db.pool.Query(ctx, `SELECT seq, at, actor, action, model, subject, reason, before, after, prev, hash
		FROM audit WHERE seq > $1 AND at >= $2 AND at < $3 ORDER BY seq LIMIT $4`, q.AfterSeq, from, to, limit)
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	var out []store.AuditRecord
	for rows.Next() {
		var r store.AuditRecord
		var at pgtype.Int8
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

// PutAlertAudited implements store.Decisions: PutAlert and, in the same
// transaction (holding the trail's lock), the audit record derived from
// the stored alert and the new one.
func (db *DB) PutAlertAudited(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery, audit store.AlertAudit) error {
	return db.putAlert(ctx, a, deliveries, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, "SELECT pg_advisory_xact_lock($1)", db.auditLockKey()); err != nil {
			return err
		}
		var old *store.AlertRecord
		var stored store.AlertRecord
		switch err := scanAlert(tx.QueryRow(ctx, alertSelect+"WHERE id = $1", a.ID), &stored); {
		case err == nil:
			old = &stored
		case !errors.Is(err, pgx.ErrNoRows):
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
		_, err := appendAudit(ctx, tx, rec)
		return err
	})
}
