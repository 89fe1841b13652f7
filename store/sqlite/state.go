package sqlite

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"slices"

	"plumb/store"
)

// Quarantined returns the quarantined rows of the model (model "" for all
// models) after the id afterID, oldest first, at most limit (<= 0: all).
func (db *DB) Quarantined(ctx context.Context, model string, afterID int64, limit int) ([]store.QuarantineRow, error) {
	fail := func(err error) ([]store.QuarantineRow, error) {
		return nil, fmt.Errorf("store: quarantined %s: %w", model, err)
	}
	out, err := db.queryQuarantine(ctx, model, quarantineAllQuery, quarantineQuery, afterID, sqlLimit(limit))
	if err != nil {
		return fail(err)
	}
	return out, nil
}

const quarantineSelect = `SELECT q.id, m.name, s.path, q.generation, q.line, q.col, q.raw, q.reason, q.at, q.col_name, q.field
	FROM quarantine q JOIN models m ON m.id = q.model_id JOIN sources s ON s.id = q.source_id`

// The queries of LatestQuarantined, kept as constants so that a test can
// check their query plans: one model's rows walk the index
// quarantine_model (model_id, id) backwards, all models' rows the primary
// key backwards; both stop after LIMIT rows.
// The queries of Quarantined: one model's rows walk quarantine_model
// forward from afterID, all models' rows the primary key.
const (
	quarantineQuery    = quarantineSelect + " WHERE q.model_id = ? AND q.id > ? ORDER BY q.id LIMIT ?"
	quarantineAllQuery = quarantineSelect + " WHERE q.id > ? ORDER BY q.id LIMIT ?"
)

const (
	latestQuarantineQuery    = quarantineSelect + " WHERE q.model_id = ? ORDER BY q.id DESC LIMIT ?"
	latestQuarantineAllQuery = quarantineSelect + " ORDER BY q.id DESC LIMIT ?"
)

// LatestQuarantined returns the n most recent quarantined rows of the
// model (model "" for all models), oldest first (n <= 0: all). It reads
// backwards from the newest row and stops after n, so its cost does not
// grow with the quarantine.
func (db *DB) LatestQuarantined(ctx context.Context, model string, n int) ([]store.QuarantineRow, error) {
	fail := func(err error) ([]store.QuarantineRow, error) {
		return nil, fmt.Errorf("store: latest quarantined %s: %w", model, err)
	}
	out, err := db.queryQuarantine(ctx, model, latestQuarantineAllQuery, latestQuarantineQuery, sqlLimit(n))
	if err != nil {
		return fail(err)
	}
	slices.Reverse(out)
	return out, nil
}

// queryQuarantine runs all (model "") or one (the model's id, then args)
// and scans the rows; an unknown model has none.
func (db *DB) queryQuarantine(ctx context.Context, model, all, one string, args ...any) ([]store.QuarantineRow, error) {
	if model == "" {
		rows, err := db.db.QueryContext(ctx, all, args...)
		if err != nil {
			return nil, err
		}
		return scanQuarantine(rows)
	}
	mid, ok, err := db.lookupModel(ctx, db.db, model)
	if err != nil || !ok {
		return nil, err
	}
	rows, err := db.db.QueryContext(ctx, one, append([]any{mid}, args...)...)
	if err != nil {
		return nil, err
	}
	return scanQuarantine(rows)
}

// scanQuarantine reads every row of rows (quarantineSelect columns) and
// closes it.
func scanQuarantine(rows *sql.Rows) ([]store.QuarantineRow, error) {
	defer rows.Close()
	var out []store.QuarantineRow
	for rows.Next() {
		var q store.QuarantineRow
		var at sql.NullInt64
		if err := rows.Scan(&q.ID, &q.Model, &q.Path, &q.Generation, &q.Line, &q.Column, &q.Raw, &q.Reason, &at, &q.ColumnName, &q.Field); err != nil {
			return nil, err
		}
		q.At = decTime(at)
		out = append(out, q)
	}
	if err := rows.Err(); err != nil {
		return nil, err
	}
	return out, nil
}

// CountQuarantined returns how many rows of the model (model "" for all
// models) are quarantined.
func (db *DB) CountQuarantined(ctx context.Context, model string) (int64, error) {
	var n int64
	err := db.db.QueryRowContext(ctx, `SELECT COALESCE(SUM(s.quarantined), 0) FROM sources s JOIN models m ON m.id = s.model_id
		WHERE ? = '' OR m.name = ?`, model, model).Scan(&n)
	if err != nil {
		return 0, fmt.Errorf("store: count quarantined %s: %w", model, err)
	}
	return n, nil
}

// SetModelState records the model's current state, replacing the previous.
func (db *DB) SetModelState(ctx context.Context, s store.ModelState) error {
	fail := func(err error) error { return fmt.Errorf("store: set model state %s: %w", s.Model, err) }
	if s.Model == "" {
		return fail(errors.New("state needs a model"))
	}
	at, err := encTime(s.At)
	if err != nil {
		return fail(err)
	}
	err = db.write(ctx, func(tx *sql.Tx) error {
		_, err := tx.ExecContext(ctx, `INSERT INTO model_states (model, state, reason, at) VALUES (?, ?, ?, ?)
			ON CONFLICT (model) DO UPDATE SET state = excluded.state, reason = excluded.reason, at = excluded.at`,
			s.Model, s.State, s.Reason, at)
		return err
	})
	if err != nil {
		return fail(err)
	}
	return nil
}

// ModelStates returns the recorded state of every model, by model name.
func (db *DB) ModelStates(ctx context.Context) ([]store.ModelState, error) {
	fail := func(err error) ([]store.ModelState, error) { return nil, fmt.Errorf("store: model states: %w", err) }
	rows, err := db.db.QueryContext(ctx, "SELECT model, state, reason, at FROM model_states ORDER BY model")
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	var out []store.ModelState
	for rows.Next() {
		var s store.ModelState
		var at sql.NullInt64
		if err := rows.Scan(&s.Model, &s.State, &s.Reason, &at); err != nil {
			return fail(err)
		}
		s.At = decTime(at)
		out = append(out, s)
	}
	if err := rows.Err(); err != nil {
		return fail(err)
	}
	return out, nil
}
