package postgres

import (
	"context"
	"errors"
	"fmt"
	"hash/fnv"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"

	"plumb/store"
)

// The decisions and the audit trail (store.Decisions), in the tables of
// migration 0004.
//
// Appending to the trail is serialised across every process that shares
// the database: each transaction that appends first takes the trail's
// transaction-level advisory lock (auditLockKey), then reads the last
// record and seals the new one after it (store.Seal), and holds the lock
// until it commits or rolls back. Two daemons, or a daemon and the
// command line, therefore never give two records the same number or the
// same predecessor; the primary key on seq would refuse that anyway, as a
// second line of defence. Reads take no lock.
//
// Each decision is written in the transaction that appends its audit
// record, under the same lock, after it has read the state it changes
// (the reading's latest decision, the model's re-baselines, the quiet
// period): two people deciding on the same reading at once are decided
// one after the other, and the second sees the first.

var _ store.Decisions = (*DB)(nil)

// auditLockKey is the advisory lock (bigint form) of the trail of this
// schema: FNV-1a of the schema's name, so that histories in two schemas
// of one database do not wait for each other.
func (db *DB) auditLockKey() int64 {
	h := fnv.New64a()
	h.Write([]byte("plumb audit\x00" + db.schema))
	return int64(h.Sum64())
}

// writeAudited runs fn in a transaction that holds the trail's lock.
func (db *DB) writeAudited(ctx context.Context, fn func(tx pgx.Tx) error) error {
	return pgx.BeginFunc(ctx, db.pool, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, "SELECT pg_advisory_xact_lock($1)", db.auditLockKey()); err != nil {
			return fmt.Errorf("lock the audit trail: %w", err)
		}
		return fn(tx)
	})
}

// stamp returns t, or the clock's now when t is zero.
func (db *DB) stamp(t time.Time) time.Time {
	if t.IsZero() {
		return db.now().UTC()
	}
	return t.UTC()
}

// plainText checks that each named string can be stored in a TEXT column
// (valid UTF-8 without NUL), so that such a write is refused with
// store.ErrInvalid naming the field rather than failing in the server.
func plainText(fields ...string) error {
	for i := 0; i+1 < len(fields); i += 2 {
		name, s := fields[i], fields[i+1]
		if !utf8.ValidString(s) || strings.IndexByte(s, 0) >= 0 {
			return fmt.Errorf("%w: the %s is not plain text (invalid UTF-8 or a NUL byte), which PostgreSQL cannot store", store.ErrInvalid, name)
		}
	}
	return nil
}

func plainRecord(r store.AuditRecord) error {
	return plainText("actor", r.Actor, "action", r.Action, "model", r.Model, "subject", r.Subject,
		"reason", r.Reason, "state before", r.Before, "state after", r.After, "previous hash", r.Prev, "hash", r.Hash)
}

// lastAudit returns the last record of the trail (Seq 0 when it is empty).
// The caller holds the trail's lock.
func lastAudit(ctx context.Context, tx pgx.Tx) (store.AuditRecord, error) {
	var last store.AuditRecord
	err := tx.QueryRow(ctx, "SELECT seq, hash FROM audit ORDER BY seq DESC LIMIT 1").Scan(&last.Seq, &last.Hash)
	if errors.Is(err, pgx.ErrNoRows) {
		err = nil
	}
	return last, err
}

// appendAudit seals r after the last record of the trail and inserts it,
// inside tx, which holds the trail's lock.
func appendAudit(ctx context.Context, tx pgx.Tx, r store.AuditRecord) (store.AuditRecord, error) {
	if err := plainRecord(r); err != nil {
		return r, err
	}
	at, err := encTime(r.At)
	if err != nil {
		return r, fmt.Errorf("%w: %v", store.ErrInvalid, err)
	}
	last, err := lastAudit(ctx, tx)
	if err != nil {
		return r, err
	}
	r = store.Seal(r, last)
	return r, insertAudit(ctx, tx, r, at)
}

// insertAudit inserts r as it is (sealed).
func insertAudit(ctx context.Context, tx pgx.Tx, r store.AuditRecord, at any) error {
	_, err := tx.Exec(ctx, `INSERT INTO audit (seq, at, actor, action, model, subject, reason, before, after, prev, hash)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11)`,
		r.Seq, at, r.Actor, r.Action, r.Model, r.Subject, r.Reason, r.Before, r.After, r.Prev, r.Hash)
	return err
}

// nextID returns the next id of one of the decision tables (MAX + 1),
// under the trail's lock, which every writer of those tables holds.
func nextID(ctx context.Context, tx pgx.Tx, table string) (int64, error) {
	var id int64
	err := tx.QueryRow(ctx, "SELECT COALESCE(MAX(id), 0) + 1 FROM "+table).Scan(&id)
	return id, err
}

const decisionSelect = "SELECT id, model, obs_id, action, actor, reason, at, subject, audit_seq FROM decisions "

func scanDecisions(rows pgx.Rows) ([]store.Decision, error) {
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (store.Decision, error) {
		var d store.Decision
		var at pgtype.Int8
		err := r.Scan(&d.ID, &d.Model, &d.ObsID, &d.Action, &d.Actor, &d.Reason, &at, &d.Subject, &d.AuditSeq)
		d.At = decTime(at)
		return d, err
	})
}

// Decide implements store.Decisions.
func (db *DB) Decide(ctx context.Context, d store.Decision) (store.Decision, error) {
	fail := func(err error) (store.Decision, error) {
		return store.Decision{}, fmt.Errorf("store: %s reading %d of %s: %w", d.Action, d.ObsID, d.Model, err)
	}
	if err := store.CheckDecision(d); err != nil {
		return fail(err)
	}
	if err := plainText("model", d.Model, "actor", d.Actor, "reason", d.Reason, "alert", d.Subject); err != nil {
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
		rows, err := tx.Query(ctx, decisionSelect+"WHERE obs_id = $1 ORDER BY id DESC LIMIT 1", d.ObsID)
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
		if d.ID, err = nextID(ctx, tx, "decisions"); err != nil {
			return err
		}
		_, err = tx.Exec(ctx, `INSERT INTO decisions (id, model, obs_id, action, actor, reason, at, subject, audit_seq)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9)`, d.ID, d.Model, d.ObsID, d.Action, d.Actor, d.Reason, at, d.Subject, d.AuditSeq)
		return err
	})
	if err != nil {
		return fail(err)
	}
	return d, nil
}

// Decisions implements store.Decisions.
func (db *DB) Decisions(ctx context.Context, model string) ([]store.Decision, error) {
	rows, err := db.pool.Query(ctx, decisionSelect+"WHERE model = $1 ORDER BY id", model)
	if err != nil {
		return nil, fmt.Errorf("store: decisions %s: %w", model, err)
	}
	out, err := scanDecisions(rows)
	if err != nil {
		return nil, fmt.Errorf("store: decisions %s: %w", model, err)
	}
	return out, nil
}

const rebaselineSelect = "SELECT id, model, from_t, actor, reason, recorded, audit_seq FROM rebaselines "

func scanRebaselines(rows pgx.Rows) ([]store.Rebaseline, error) {
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (store.Rebaseline, error) {
		var rb store.Rebaseline
		var from, rec pgtype.Int8
		err := r.Scan(&rb.ID, &rb.Model, &from, &rb.Actor, &rb.Reason, &rec, &rb.AuditSeq)
		rb.From, rb.Recorded = decTime(from), decTime(rec)
		return rb, err
	})
}

// Rebaseline implements store.Decisions.
func (db *DB) Rebaseline(ctx context.Context, r store.Rebaseline) (store.Rebaseline, error) {
	fail := func(err error) (store.Rebaseline, error) {
		return store.Rebaseline{}, fmt.Errorf("store: re-baseline %s: %w", r.Model, err)
	}
	if err := store.CheckRebaseline(r); err != nil {
		return fail(err)
	}
	if err := plainText("model", r.Model, "actor", r.Actor, "reason", r.Reason); err != nil {
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
		rows, err := tx.Query(ctx, rebaselineSelect+"WHERE model = $1 ORDER BY id", r.Model)
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
		if r.ID, err = nextID(ctx, tx, "rebaselines"); err != nil {
			return err
		}
		_, err = tx.Exec(ctx, `INSERT INTO rebaselines (id, model, from_t, actor, reason, recorded, audit_seq)
			VALUES ($1, $2, $3, $4, $5, $6, $7)`, r.ID, r.Model, from, r.Actor, r.Reason, rec, r.AuditSeq)
		return err
	})
	if err != nil {
		return fail(err)
	}
	return r, nil
}

// Rebaselines implements store.Decisions.
func (db *DB) Rebaselines(ctx context.Context, model string) ([]store.Rebaseline, error) {
	rows, err := db.pool.Query(ctx, rebaselineSelect+"WHERE model = $1 ORDER BY id", model)
	if err != nil {
		return nil, fmt.Errorf("store: re-baselines %s: %w", model, err)
	}
	out, err := scanRebaselines(rows)
	if err != nil {
		return nil, fmt.Errorf("store: re-baselines %s: %w", model, err)
	}
	return out, nil
}

const quietSelect = "SELECT id, model, start_t, end_t, owner, reason, created, ended_by, end_reason, audit_seq FROM quiet_periods "

func scanQuiet(rows pgx.Rows) ([]store.QuietPeriod, error) {
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (store.QuietPeriod, error) {
		var q store.QuietPeriod
		var start, end, created pgtype.Int8
		err := r.Scan(&q.ID, &q.Model, &start, &end, &q.Owner, &q.Reason, &created, &q.EndedBy, &q.EndReason, &q.AuditSeq)
		q.Start, q.End, q.Created = decTime(start), decTime(end), decTime(created)
		return q, err
	})
}

// quietTimes encodes a period's start, end and creation.
func quietTimes(q store.QuietPeriod) ([3]any, error) {
	var times [3]any
	for i, t := range []time.Time{q.Start, q.End, q.Created} {
		v, err := encTime(t)
		if err != nil {
			return times, fmt.Errorf("%w: %v", store.ErrInvalid, err)
		}
		times[i] = v
	}
	return times, nil
}

// SetQuiet implements store.Decisions.
func (db *DB) SetQuiet(ctx context.Context, q store.QuietPeriod) (store.QuietPeriod, error) {
	fail := func(err error) (store.QuietPeriod, error) {
		return store.QuietPeriod{}, fmt.Errorf("store: set quiet period: %w", err)
	}
	if err := store.CheckQuiet(q); err != nil {
		return fail(err)
	}
	if err := plainText("model", q.Model, "owner", q.Owner, "reason", q.Reason); err != nil {
		return fail(err)
	}
	q.Start, q.End, q.Created = q.Start.UTC(), q.End.UTC(), db.stamp(q.Created)
	q.EndedBy, q.EndReason = "", ""
	times, err := quietTimes(q)
	if err != nil {
		return fail(err)
	}
	err = db.writeAudited(ctx, func(tx pgx.Tx) error {
		// The id is taken before the insert so that the audit record,
		// which names it, can be written first (the row refers to it).
		var err error
		if q.ID, err = nextID(ctx, tx, "quiet_periods"); err != nil {
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
	if err := plainText("actor", actor, "reason", reason); err != nil {
		return fail(err)
	}
	at = db.stamp(at)
	var q store.QuietPeriod
	err := db.writeAudited(ctx, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, quietSelect+"WHERE id = $1", id)
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
			return fmt.Errorf("%w: %v", store.ErrInvalid, err)
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
	rows, err := db.pool.Query(ctx, quietSelect+"WHERE ($1 = '' OR model = '' OR model = $1) AND end_t > $2 ORDER BY id", model, a)
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
	if err := plainRecord(r); err != nil {
		return fail(err)
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

const auditSelect = "SELECT seq, at, actor, action, model, subject, reason, before, after, prev, hash FROM audit "

func scanAudit(rows pgx.Rows) ([]store.AuditRecord, error) {
	return pgx.CollectRows(rows, func(row pgx.CollectableRow) (store.AuditRecord, error) {
		var r store.AuditRecord
		var at pgtype.Int8
		err := row.Scan(&r.Seq, &at, &r.Actor, &r.Action, &r.Model, &r.Subject, &r.Reason, &r.Before, &r.After, &r.Prev, &r.Hash)
		r.At = decTime(at)
		return r, err
	})
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
	rows, err := db.pool.Query(ctx, auditSelect+"WHERE seq > $1 AND at >= $2 AND at < $3 ORDER BY seq LIMIT $4",
		q.AfterSeq, from, to, sqlLimit(q.Limit))
	if err != nil {
		return fail(err)
	}
	out, err := scanAudit(rows)
	if err != nil {
		return fail(err)
	}
	return out, nil
}

// PutAlertAudited implements store.Decisions. It takes the trail's lock
// first, then reads the stored alert FOR UPDATE, so the record is derived
// from the state the write replaces, even when two processes raise the
// same new alert at once. Every audited write takes the two in this
// order (plain PutAlert takes only the alert's row), so they cannot wait
// for each other in a circle.
func (db *DB) PutAlertAudited(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery, audit store.AlertAudit) error {
	return db.putAlert(ctx, a, deliveries, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, "SELECT pg_advisory_xact_lock($1)", db.auditLockKey()); err != nil {
			return fmt.Errorf("lock the audit trail: %w", err)
		}
		var old *store.AlertRecord
		var stored store.AlertRecord
		switch err := scanAlert(tx.QueryRow(ctx, alertSelect+"WHERE id = $1 FOR UPDATE", a.ID), &stored); {
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
