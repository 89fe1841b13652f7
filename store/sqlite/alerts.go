package sqlite

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"strings"
	"time"

	"plumb/store"
)

// PutAlert inserts the alert or updates the stored one with the same ID
// (keeping its FirstSeen) and, in the same transaction, enqueues the
// deliveries.
//
// Deliveries take defaults for what the caller leaves zero: AlertID is
// a.ID, State is pending, CreatedAt is now, NextAttempt and UpdatedAt are
// CreatedAt. A delivery with a non-empty EventID already enqueued for the
// same Route is skipped, so retrying PutAlert never delivers an event twice.
func (db *DB) PutAlert(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery) error {
	return db.putAlert(ctx, a, deliveries, nil)
}

// putAlert is PutAlert; before, when not nil, runs first in the same
// transaction (PutAlertAudited appends the audit record there, so that a
// conditional write that fails takes it back too).
func (db *DB) putAlert(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery, before func(tx *sql.Tx) error) error {
	fail := func(err error) error { return fmt.Errorf("store: put alert %s: %w", a.ID, err) }
	if a.ID == "" {
		return fail(errors.New("alert needs an id"))
	}
	first, err := encTime(a.FirstSeen)
	if err != nil {
		return fail(fmt.Errorf("first seen: %w", err))
	}
	last, err := encTime(a.LastSeen)
	if err != nil {
		return fail(fmt.Errorf("last seen: %w", err))
	}
	now := db.now()
	dargs := make([][]any, len(deliveries))
	for i, d := range deliveries {
		d, err := store.DeliveryDefaults(d, a.ID, now)
		if err != nil {
			return fail(err)
		}
		var ts [3]any
		for j, t := range []time.Time{d.NextAttempt, d.CreatedAt, d.UpdatedAt} {
			if ts[j], err = encTime(t); err != nil {
				return fail(fmt.Errorf("delivery %s: %w", d.Route, err))
			}
		}
		payload := d.Payload
		if payload == nil {
			payload = []byte{}
		}
		dargs[i] = []any{d.AlertID, d.Route, d.EventID, payload, string(d.State), d.Attempts, ts[0], d.LastError, ts[1], ts[2]}
	}
	err = db.write(ctx, func(tx *sql.Tx) error {
		if before != nil {
			if err := before(tx); err != nil {
				return err
			}
		}
		if err := putAlertRow(ctx, tx, a, first, last); err != nil {
			return err
		}
		if len(dargs) == 0 {
			return nil
		}
		st, err := tx.PrepareContext(ctx, `INSERT INTO deliveries (alert_id, route, event_id, payload, state, attempts,
			next_attempt, last_error, created_at, updated_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?) ON CONFLICT DO NOTHING`)
		if err != nil {
			return err
		}
		defer st.Close()
		for _, args := range dargs {
			if _, err := st.ExecContext(ctx, args...); err != nil {
				return fmt.Errorf("delivery %s: %w", args[1], err)
			}
		}
		return nil
	})
	if err != nil {
		return fail(err)
	}
	return nil
}

// putAlertRow writes the alert row: unconditionally for revision 0, else
// only at the expected stored revision (see store.Store.PutAlert). Each
// case begins with a write, so the transaction holds the write lock before
// it reads anything.
func putAlertRow(ctx context.Context, tx *sql.Tx, a store.AlertRecord, first, last any) error {
	if a.Revision == 0 {
		_, err := tx.ExecContext(ctx, `INSERT INTO alerts (id, model, kind, subject, severity, state, first_seen, last_seen, doc, revision)
			VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, 1)
			ON CONFLICT (id) DO UPDATE SET model = excluded.model, kind = excluded.kind, subject = excluded.subject,
				severity = excluded.severity, state = excluded.state, last_seen = excluded.last_seen, doc = excluded.doc,
				first_seen = COALESCE(alerts.first_seen, excluded.first_seen), revision = alerts.revision + 1`,
			a.ID, a.Model, a.Kind, a.Subject, a.Severity, a.State, first, last, a.Doc)
		return err
	}
	res, err := tx.ExecContext(ctx, `UPDATE alerts SET model = ?, kind = ?, subject = ?, severity = ?, state = ?,
		last_seen = ?, doc = ?, first_seen = COALESCE(first_seen, ?), revision = revision + 1
		WHERE id = ? AND revision = ?`,
		a.Model, a.Kind, a.Subject, a.Severity, a.State, last, a.Doc, first, a.ID, a.Revision-1)
	if err != nil {
		return err
	}
	n, err := res.RowsAffected()
	if err != nil || n == 1 {
		return err
	}
	if a.Revision == 1 {
		res, err := tx.ExecContext(ctx, `INSERT INTO alerts (id, model, kind, subject, severity, state, first_seen, last_seen, doc, revision)
			VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, 1) ON CONFLICT (id) DO NOTHING`,
			a.ID, a.Model, a.Kind, a.Subject, a.Severity, a.State, first, last, a.Doc)
		if err != nil {
			return err
		}
		if n, err := res.RowsAffected(); err != nil || n == 1 {
			return err
		}
	}
	var stored int64
	switch err := tx.QueryRowContext(ctx, `SELECT revision FROM alerts WHERE id = ?`, a.ID).Scan(&stored); {
	case errors.Is(err, sql.ErrNoRows):
		return fmt.Errorf("%w: no alert stored, revision %d written", store.ErrChanged, a.Revision)
	case err != nil:
		return err
	}
	return fmt.Errorf("%w: revision %d stored, %d written", store.ErrChanged, stored, a.Revision)
}

const alertSelect = "SELECT id, model, kind, subject, severity, state, first_seen, last_seen, doc, revision FROM alerts "

func scanAlert(sc scanner, a *store.AlertRecord) error {
	var first, last sql.NullInt64
	if err := sc.Scan(&a.ID, &a.Model, &a.Kind, &a.Subject, &a.Severity, &a.State, &first, &last, &a.Doc, &a.Revision); err != nil {
		return err
	}
	a.FirstSeen = decTime(first)
	a.LastSeen = decTime(last)
	return nil
}

// Alert returns one alert by id, or an error wrapping store.ErrNotFound.
func (db *DB) Alert(ctx context.Context, id string) (store.AlertRecord, error) {
	var a store.AlertRecord
	err := scanAlert(db.db.QueryRowContext(ctx, alertSelect+"WHERE id = ?", id), &a)
	if errors.Is(err, sql.ErrNoRows) {
		err = store.ErrNotFound
	}
	if err != nil {
		return store.AlertRecord{}, fmt.Errorf("store: alert %s: %w", id, err)
	}
	return a, nil
}

// Alerts lists the alerts matching every non-empty field of q, newest
// LastSeen first (ties by id), skipping q.Offset and returning at most
// q.Limit (<= 0: all).
func (db *DB) Alerts(ctx context.Context, q store.AlertQuery) ([]store.AlertRecord, error) {
	fail := func(err error) ([]store.AlertRecord, error) { return nil, fmt.Errorf("store: alerts: %w", err) }
	var where []string
	var args []any
	for _, f := range []struct{ col, v string }{{"state", q.State}, {"model", q.Model}, {"kind", q.Kind}, {"subject", q.Subject}} {
		if f.v != "" {
			where = append(where, f.col+" = ?")
			args = append(args, f.v)
		}
	}
	query := alertSelect
	if len(where) > 0 {
		query += "WHERE " + strings.Join(where, " AND ")
	}
	off := q.Offset
	if off < 0 {
		off = 0
	}
	query += " ORDER BY last_seen DESC, id LIMIT ? OFFSET ?"
	args = append(args, sqlLimit(q.Limit), off)
	rows, err := db.db.QueryContext(ctx, query, args...)
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	var out []store.AlertRecord
	for rows.Next() {
		var a store.AlertRecord
		if err := scanAlert(rows, &a); err != nil {
			return fail(err)
		}
		out = append(out, a)
	}
	if err := rows.Err(); err != nil {
		return fail(err)
	}
	return out, nil
}

const deliverySelect = `SELECT id, alert_id, route, event_id, payload, state, attempts, next_attempt, last_error,
	created_at, updated_at FROM deliveries `

func scanDelivery(sc scanner, d *store.Delivery) error {
	var next int64
	var created, updated sql.NullInt64
	var state string
	if err := sc.Scan(&d.ID, &d.AlertID, &d.Route, &d.EventID, &d.Payload, &state, &d.Attempts, &next, &d.LastError,
		&created, &updated); err != nil {
		return err
	}
	d.State = store.DeliveryState(state)
	d.NextAttempt = decTime(sql.NullInt64{Int64: next, Valid: true})
	d.CreatedAt = decTime(created)
	d.UpdatedAt = decTime(updated)
	return nil
}

func (db *DB) listDeliveries(ctx context.Context, query string, args ...any) ([]store.Delivery, error) {
	rows, err := db.db.QueryContext(ctx, query, args...)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []store.Delivery
	for rows.Next() {
		var d store.Delivery
		if err := scanDelivery(rows, &d); err != nil {
			return nil, err
		}
		out = append(out, d)
	}
	return out, rows.Err()
}

// DueDeliveries returns the pending deliveries whose NextAttempt is not
// after now, most overdue first (by NextAttempt, then id), at most limit
// (<= 0: all).
func (db *DB) DueDeliveries(ctx context.Context, now time.Time, limit int) ([]store.Delivery, error) {
	t, err := encTime(now)
	if err != nil {
		return nil, fmt.Errorf("store: due deliveries: %w", err)
	}
	out, err := db.listDeliveries(ctx, deliverySelect+"WHERE state = ? AND next_attempt <= ? ORDER BY next_attempt, id LIMIT ?",
		string(store.DeliveryPending), t, sqlLimit(limit))
	if err != nil {
		return nil, fmt.Errorf("store: due deliveries: %w", err)
	}
	return out, nil
}

// UpdateDelivery stores the delivery's State, Attempts, NextAttempt (kept
// when zero), LastError and UpdatedAt (now when zero), found by ID. An
// unknown ID gives an error wrapping store.ErrNotFound.
func (db *DB) UpdateDelivery(ctx context.Context, d store.Delivery) error {
	fail := func(err error) error { return fmt.Errorf("store: update delivery %d: %w", d.ID, err) }
	if !store.ValidDeliveryState(d.State) {
		return fail(fmt.Errorf("delivery state %q unknown", d.State))
	}
	next, err := encTime(d.NextAttempt)
	if err != nil {
		return fail(err)
	}
	if d.UpdatedAt.IsZero() {
		d.UpdatedAt = db.now()
	}
	updated, err := encTime(d.UpdatedAt)
	if err != nil {
		return fail(err)
	}
	err = db.write(ctx, func(tx *sql.Tx) error {
		res, err := tx.ExecContext(ctx, `UPDATE deliveries SET state = ?, attempts = ?, next_attempt = COALESCE(?, next_attempt),
			last_error = ?, updated_at = ? WHERE id = ?`, string(d.State), d.Attempts, next, d.LastError, updated, d.ID)
		if err != nil {
			return err
		}
		n, err := res.RowsAffected()
		if err != nil {
			return err
		}
		if n == 0 {
			return store.ErrNotFound
		}
		return nil
	})
	if err != nil {
		return fail(err)
	}
	return nil
}

// Deliveries lists deliveries in the given state ("" for all), newest
// first (by id), at most limit (<= 0: all).
func (db *DB) Deliveries(ctx context.Context, state store.DeliveryState, limit int) ([]store.Delivery, error) {
	out, err := db.listDeliveries(ctx, deliverySelect+"WHERE ? = '' OR state = ? ORDER BY id DESC LIMIT ?",
		string(state), string(state), sqlLimit(limit))
	if err != nil {
		return nil, fmt.Errorf("store: deliveries %s: %w", state, err)
	}
	return out, nil
}
