package sqlite

import (
	"context"
	"database/sql"
	"fmt"

	"plumb/store"
)

// Models returns the name of every model the history knows (one that has
// read a file or recorded a fit, or has a recorded state), sorted.
func (db *DB) Models(ctx context.Context) ([]string, error) {
	rows, err := db.db.QueryContext(ctx, `SELECT name FROM models UNION SELECT model FROM model_states ORDER BY 1`)
	if err != nil {
		return nil, fmt.Errorf("store: models: %w", err)
	}
	defer rows.Close()
	var out []string
	for rows.Next() {
		var n string
		if err := rows.Scan(&n); err != nil {
			return nil, fmt.Errorf("store: models: %w", err)
		}
		out = append(out, n)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: models: %w", err)
	}
	return out, nil
}

// ModelVerdictChanges returns every verdict change of the model's
// observations, by fit then observation id.
func (db *DB) ModelVerdictChanges(ctx context.Context, model string) ([]store.VerdictChange, error) {
	fail := func(err error) ([]store.VerdictChange, error) {
		return nil, fmt.Errorf("store: verdict changes of %s: %w", model, err)
	}
	rows, err := db.db.QueryContext(ctx, `SELECT obs_id, fit_id, at, from_verdict, to_verdict, flags FROM verdict_changes
		WHERE model_id = (SELECT id FROM models WHERE name = ?) ORDER BY fit_id, obs_id`, model)
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	var out []store.VerdictChange
	for rows.Next() {
		var c store.VerdictChange
		var at sql.NullInt64
		var flags sql.NullString
		if err := rows.Scan(&c.ObsID, &c.FitID, &at, &c.From, &c.To, &flags); err != nil {
			return fail(err)
		}
		c.At = decTime(at)
		var err error
		if c.Flags, err = decFlags(flags); err != nil {
			return fail(err)
		}
		out = append(out, c)
	}
	if err := rows.Err(); err != nil {
		return fail(err)
	}
	return out, nil
}
