package postgres

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"

	"plumb/store"
)

func validState(s store.DeliveryState) bool {
	switch s {
	case store.DeliveryPending, store.DeliveryDelivered, store.DeliveryDead:
		return true
	}
	return false
}

// PutAlert inserts the alert or updates the stored one with the same ID
// (keeping its FirstSeen) and, in the same transaction, enqueues the
// deliveries, as store.Store.PutAlert describes: a delivery whose
// non-empty EventID is already enqueued for the same Route is skipped, and
// a.Revision makes the write conditional.
func (db *DB) PutAlert(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery) error {
	return db.putAlert(ctx, a, deliveries, nil)
}

// putAlert is PutAlert that runs before(tx), when set, first in the
// transaction (PutAlertAudited appends the alert's audit record there).
func (db *DB) putAlert(ctx context.Context, a store.AlertRecord, deliveries []store.Delivery, before func(tx pgx.Tx) error) error {
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
		if d.AlertID == "" {
			d.AlertID = a.ID
		}
		if d.AlertID != a.ID {
			return fail(fmt.Errorf("delivery for alert %q in PutAlert of %q", d.AlertID, a.ID))
		}
		if d.State == "" {
			d.State = store.DeliveryPending
		}
		if !validState(d.State) {
			return fail(fmt.Errorf("delivery state %q unknown", d.State))
		}
		if d.CreatedAt.IsZero() {
			d.CreatedAt = now
		}
		if d.NextAttempt.IsZero() {
			d.NextAttempt = d.CreatedAt
		}
		if d.UpdatedAt.IsZero() {
			d.UpdatedAt = d.CreatedAt
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
	err = pgx.BeginFunc(ctx, db.pool, func(tx pgx.Tx) error {
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
		var b pgx.Batch
		for _, args := range dargs {
			b.Queue(`INSERT INTO deliveries (alert_id, route, event_id, payload, state, attempts,
				next_attempt, last_error, created_at, updated_at) VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10) ON CONFLICT DO NOTHING`,
				args...)
		}
		return tx.SendBatch(ctx, &b).Close()
	})
	if err != nil {
		return fail(err)
	}
	return nil
}

// putAlertRow writes the alert row: unconditionally for revision 0, else
// only at the expected stored revision (see store.Store.PutAlert). A
// concurrent writer of the same alert waits for the row lock and then
// re-evaluates the revision condition against the committed row.
func putAlertRow(ctx context.Context, tx pgx.Tx, a store.AlertRecord, first, last any) error {
	if a.Revision == 0 {
		_, err := tx.Exec(ctx, `INSERT INTO alerts (id, model, kind, subject, severity, state, first_seen, last_seen, doc, revision)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, 1)
			ON CONFLICT (id) DO UPDATE SET model = excluded.model, kind = excluded.kind, subject = excluded.subject,
				severity = excluded.severity, state = excluded.state, last_seen = excluded.last_seen, doc = excluded.doc,
				first_seen = COALESCE(alerts.first_seen, excluded.first_seen), revision = alerts.revision + 1`,
			a.ID, a.Model, a.Kind, a.Subject, a.Severity, a.State, first, last, a.Doc)
		return err
	}
	tag, err := tx.Exec(ctx, `UPDATE alerts SET model = $1, kind = $2, subject = $3, severity = $4, state = $5,
		last_seen = $6, doc = $7, first_seen = COALESCE(first_seen, $8), revision = revision + 1
		WHERE id = $9 AND revision = $10`,
		a.Model, a.Kind, a.Subject, a.Severity, a.State, last, a.Doc, first, a.ID, a.Revision-1)
	if err != nil || tag.RowsAffected() == 1 {
		return err
	}
	if a.Revision == 1 {
		tag, err := tx.Exec(ctx, `INSERT INTO alerts (id, model, kind, subject, severity, state, first_seen, last_seen, doc, revision)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, 1) ON CONFLICT (id) DO NOTHING`,
			a.ID, a.Model, a.Kind, a.Subject, a.Severity, a.State, first, last, a.Doc)
		if err != nil || tag.RowsAffected() == 1 {
			return err
		}
	}
	var stored int64
	switch err := tx.QueryRow(ctx, `SELECT revision FROM alerts WHERE id = $1`, a.ID).Scan(&stored); {
	case errors.Is(err, pgx.ErrNoRows):
		return fmt.Errorf("%w: no alert stored, revision %d written", store.ErrChanged, a.Revision)
	case err != nil:
		return err
	}
	return fmt.Errorf("%w: revision %d stored, %d written", store.ErrChanged, stored, a.Revision)
}

const alertSelect = "SELECT id, model, kind, subject, severity, state, first_seen, last_seen, doc, revision FROM alerts "

func scanAlert(sc pgx.Row, a *store.AlertRecord) error {
	var first, last pgtype.Int8
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
	err := scanAlert(db.pool.QueryRow(ctx, alertSelect+"WHERE id = $1", id), &a)
	if errors.Is(err, pgx.ErrNoRows) {
		err = store.ErrNotFound
	}
	if err != nil {
		return store.AlertRecord{}, fmt.Errorf("store: alert %s: %w", id, err)
	}
	return a, nil
}

// Alerts lists the alerts matching every non-empty field of q, newest
// LastSeen first (ties by id, an alert never seen last), skipping q.Offset
// and returning at most q.Limit (<= 0: all).
func (db *DB) Alerts(ctx context.Context, q store.AlertQuery) ([]store.AlertRecord, error) {
	fail := func(err error) ([]store.AlertRecord, error) { return nil, fmt.Errorf("store: alerts: %w", err) }
	var where []string
	var args []any
	for _, f := range []struct{ col, v string }{{"state", q.State}, {"model", q.Model}, {"kind", q.Kind}, {"subject", q.Subject}} {
		if f.v != "" {
			args = append(args, f.v)
			where = append(where, f.col+" = $"+strconv.Itoa(len(args)))
		}
	}
	query := alertSelect
	if len(where) > 0 {
		query += "WHERE " + strings.Join(where, " AND ")
	}
	off := max(q.Offset, 0)
	args = append(args, sqlLimit(q.Limit), off)
	query += fmt.Sprintf(" ORDER BY last_seen DESC NULLS LAST, id LIMIT $%d OFFSET $%d", len(args)-1, len(args))
	rows, err := db.pool.Query(ctx, query, args...)
	if err != nil {
		return fail(err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (store.AlertRecord, error) {
		var a store.AlertRecord
		err := scanAlert(r, &a)
		return a, err
	})
	if err != nil {
		return fail(err)
	}
	return out, nil
}

const deliverySelect = `SELECT id, alert_id, route, event_id, payload, state, attempts, next_attempt, last_error,
	created_at, updated_at FROM deliveries `

func scanDelivery(sc pgx.Row, d *store.Delivery) error {
	var next int64
	var created, updated pgtype.Int8
	var state string
	if err := sc.Scan(&d.ID, &d.AlertID, &d.Route, &d.EventID, &d.Payload, &state, &d.Attempts, &next, &d.LastError,
		&created, &updated); err != nil {
		return err
	}
	d.State = store.DeliveryState(state)
	d.NextAttempt = decTime(pgtype.Int8{Int64: next, Valid: true})
	d.CreatedAt = decTime(created)
	d.UpdatedAt = decTime(updated)
	return nil
}

func (db *DB) listDeliveries(ctx context.Context, q querier, query string, args ...any) ([]store.Delivery, error) {
	rows, err := q.Query(ctx, query, args...)
	if err != nil {
		return nil, err
	}
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (store.Delivery, error) {
		var d store.Delivery
		err := scanDelivery(r, &d)
		return d, err
	})
}

// DueDeliveries returns the pending deliveries whose NextAttempt is not
// after now, most overdue first (by NextAttempt, then id), at most limit
// (<= 0: all).
func (db *DB) DueDeliveries(ctx context.Context, now time.Time, limit int) ([]store.Delivery, error) {
	t, err := encTime(now)
	if err != nil {
		return nil, fmt.Errorf("store: due deliveries: %w", err)
	}
	out, err := db.listDeliveries(ctx, db.pool, deliverySelect+"WHERE state = $1 AND next_attempt <= $2 ORDER BY next_attempt, id LIMIT $3",
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
	if !validState(d.State) {
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
	tag, err := db.pool.Exec(ctx, `UPDATE deliveries SET state = $1, attempts = $2, next_attempt = COALESCE($3, next_attempt),
		last_error = $4, updated_at = $5 WHERE id = $6`, string(d.State), d.Attempts, next, d.LastError, updated, d.ID)
	if err != nil {
		return fail(err)
	}
	if tag.RowsAffected() == 0 {
		return fail(store.ErrNotFound)
	}
	return nil
}

// Deliveries lists deliveries in the given state ("" for all), newest
// first (by id), at most limit (<= 0: all).
func (db *DB) Deliveries(ctx context.Context, state store.DeliveryState, limit int) ([]store.Delivery, error) {
	out, err := db.listDeliveries(ctx, db.pool, deliverySelect+"WHERE $1 = '' OR state = $1 ORDER BY id DESC LIMIT $2",
		string(state), sqlLimit(limit))
	if err != nil {
		return nil, fmt.Errorf("store: deliveries %s: %w", state, err)
	}
	return out, nil
}
