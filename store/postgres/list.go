package postgres

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"

	"plumb/store"
)

// Models returns the name of every model the history knows (one that has
// read a file or recorded a fit, or has a recorded state or owner),
// sorted bytewise. With a shared database these are the models of every daemon.
func (db *DB) Models(ctx context.Context) ([]string, error) {
	rows, err := db.pool.Query(ctx, `SELECT name COLLATE "C" FROM models UNION SELECT model FROM model_states
		UNION SELECT model FROM model_owners ORDER BY 1`)
	if err != nil {
		return nil, fmt.Errorf("store: models: %w", err)
	}
	out, err := pgx.CollectRows(rows, pgx.RowTo[string])
	if err != nil {
		return nil, fmt.Errorf("store: models: %w", err)
	}
	return out, nil
}

// ModelVerdictChanges returns every verdict change of the model's
// observations, by fit then observation id.
func (db *DB) ModelVerdictChanges(ctx context.Context, model string) ([]store.VerdictChange, error) {
	rows, err := db.pool.Query(ctx, `SELECT obs_id, fit_id, at, from_verdict, to_verdict, flags FROM verdict_changes
		WHERE model_id = (SELECT id FROM models WHERE name = $1) ORDER BY fit_id, obs_id`, model)
	if err != nil {
		return nil, fmt.Errorf("store: verdict changes of %s: %w", model, err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (store.VerdictChange, error) {
		var c store.VerdictChange
		var at pgtype.Int8
		var from, to, flags pgtype.Text
		err := r.Scan(&c.ObsID, &c.FitID, &at, &from, &to, &flags)
		if err != nil {
			return c, err
		}
		c.At = decTime(at)
		c.From, c.To = decVerdict(from), decVerdict(to)
		c.Flags, err = decFlags(flags)
		return c, err
	})
	if err != nil {
		return nil, fmt.Errorf("store: verdict changes of %s: %w", model, err)
	}
	return out, nil
}
