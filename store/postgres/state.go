package postgres

import (
	"context"
	"errors"
	"fmt"
	"slices"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"

	"plumb/store"
)

const quarantineSelect = `SELECT q.id, m.name, s.path, q.generation, q.line, q.col, q.raw, q.reason, q.at, q.col_name, q.field
	FROM quarantine q JOIN models m ON m.id = q.model_id JOIN sources s ON s.id = q.source_id`

// The quarantine queries: one model's rows walk quarantine_model, all
// models' rows the primary key, forwards from afterID or backwards from
// the newest, and stop after LIMIT rows.
const (
	quarantineQuery          = quarantineSelect + " WHERE q.model_id = $1 AND q.id > $2 ORDER BY q.id LIMIT $3"
	quarantineAllQuery       = quarantineSelect + " WHERE q.id > $1 ORDER BY q.id LIMIT $2"
	latestQuarantineQuery    = quarantineSelect + " WHERE q.model_id = $1 ORDER BY q.id DESC LIMIT $2"
	latestQuarantineAllQuery = quarantineSelect + " ORDER BY q.id DESC LIMIT $1"
)

// Quarantined returns the quarantined rows of the model (model "" for all
// models) after the id afterID, oldest first, at most limit (<= 0: all).
func (db *DB) Quarantined(ctx context.Context, model string, afterID int64, limit int) ([]store.QuarantineRow, error) {
	out, err := db.queryQuarantine(ctx, model, quarantineAllQuery, quarantineQuery, afterID, sqlLimit(limit))
	if err != nil {
		return nil, fmt.Errorf("store: quarantined %s: %w", model, err)
	}
	return out, nil
}

// LatestQuarantined returns the n most recent quarantined rows of the
// model (model "" for all models), oldest first (n <= 0: all).
func (db *DB) LatestQuarantined(ctx context.Context, model string, n int) ([]store.QuarantineRow, error) {
	out, err := db.queryQuarantine(ctx, model, latestQuarantineAllQuery, latestQuarantineQuery, sqlLimit(n))
	if err != nil {
		return nil, fmt.Errorf("store: latest quarantined %s: %w", model, err)
	}
	slices.Reverse(out)
	return out, nil
}

// queryQuarantine runs all (model "") or one (the model's id, then args)
// and scans the rows; an unknown model has none.
func (db *DB) queryQuarantine(ctx context.Context, model, all, one string, args ...any) ([]store.QuarantineRow, error) {
	query := all
	if model != "" {
		mid, ok, err := db.lookupModel(ctx, db.pool, model)
		if err != nil || !ok {
			return nil, err
		}
		query, args = one, append([]any{mid}, args...)
	}
	rows, err := db.pool.Query(ctx, query, args...)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []store.QuarantineRow
	for rows.Next() {
		var q store.QuarantineRow
		var at pgtype.Int8
		var raw []byte
		if err := rows.Scan(&q.ID, &q.Model, &q.Path, &q.Generation, &q.Line, &q.Column, &raw, &q.Reason, &at, &q.ColumnName, &q.Field); err != nil {
			return nil, err
		}
		q.Raw = string(raw)
		q.At = decTime(at)
		out = append(out, q)
	}
	return out, rows.Err()
}

// CountQuarantined returns how many rows of the model (model "" for all
// models) are quarantined, from the sources' counts.
func (db *DB) CountQuarantined(ctx context.Context, model string) (int64, error) {
	var n int64
	err := db.pool.QueryRow(ctx, `SELECT COALESCE(SUM(s.quarantined), 0)::bigint FROM sources s JOIN models m ON m.id = s.model_id
		WHERE $1 = '' OR m.name = $1`, model).Scan(&n)
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
	if _, err := db.pool.Exec(ctx, `INSERT INTO model_states (model, state, reason, at) VALUES ($1, $2, $3, $4)
		ON CONFLICT (model) DO UPDATE SET state = excluded.state, reason = excluded.reason, at = excluded.at`,
		s.Model, s.State, s.Reason, at); err != nil {
		return fail(err)
	}
	return nil
}

// ModelStates returns the recorded state of every model, by model name.
func (db *DB) ModelStates(ctx context.Context) ([]store.ModelState, error) {
	fail := func(err error) ([]store.ModelState, error) { return nil, fmt.Errorf("store: model states: %w", err) }
	rows, err := db.pool.Query(ctx, "SELECT model, state, reason, at FROM model_states ORDER BY model")
	if err != nil {
		return fail(err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (store.ModelState, error) {
		var s store.ModelState
		var at pgtype.Int8
		err := r.Scan(&s.Model, &s.State, &s.Reason, &at)
		s.At = decTime(at)
		return s, err
	})
	if err != nil {
		return fail(err)
	}
	return out, nil
}
