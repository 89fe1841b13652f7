package postgres

import (
	"context"
	"errors"
	"fmt"
	"slices"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"

	"plumb/engine"
	"plumb/store"
)

// RecordFit stores the fit summary and the verdict changes it caused in one
// transaction and returns the new fit id. Each change's FitID is set to
// that id (the value passed is ignored); a change whose At is zero takes
// f.At. A change naming an observation that is not the model's stores
// nothing and returns an error wrapping store.ErrNotFound.
func (db *DB) RecordFit(ctx context.Context, f store.FitRecord, changes []store.VerdictChange) (int64, error) {
	fail := func(err error) (int64, error) {
		return 0, fmt.Errorf("store: record fit %s: %w", f.Model, err)
	}
	if f.Model == "" {
		return fail(errors.New("fit needs a model"))
	}
	at, err := encTime(f.At)
	if err != nil {
		return fail(fmt.Errorf("fit time: %w", err))
	}
	var (
		obs            = make([]int64, len(changes))
		ats            = make([]pgtype.Int8, len(changes))
		from, to, flgs = make([]string, len(changes)), make([]string, len(changes)), make([]string, len(changes))
	)
	for i, c := range changes {
		t := c.At
		if t.IsZero() {
			t = f.At
		}
		a, err := encTime(t)
		if err != nil {
			return fail(fmt.Errorf("verdict change of observation %d: %w", c.ObsID, err))
		}
		if a != nil {
			ats[i] = pgtype.Int8{Int64: a.(int64), Valid: true}
		}
		obs[i] = c.ObsID
		from[i], to[i] = encVerdict(c.From), encVerdict(c.To)
		if flgs[i], err = encFlags(c.Flags); err != nil {
			return fail(fmt.Errorf("verdict change of observation %d: %w", c.ObsID, err))
		}
	}
	var fitID, modelID int64
	var newModel bool
	err = pgx.BeginFunc(ctx, db.pool, func(tx pgx.Tx) error {
		var err error
		modelID, newModel, err = db.ensureModel(ctx, tx, f.Model)
		if err != nil {
			return err
		}
		err = tx.QueryRow(ctx, `INSERT INTO fits (model_id, at, n, p, terms, estimates, std_errors, sigma, r_squared,
			fragility, fragility_k, detail, last_obs_id) VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13) RETURNING id`,
			modelID, at, f.N, f.P, f.Terms, encFloats(f.Estimates), encFloats(f.StdErrors), f.Sigma, f.RSquared,
			f.Fragility, f.FragilityK, f.Detail, f.LastObsID).Scan(&fitID)
		if err != nil {
			return err
		}
		if len(changes) == 0 {
			return nil
		}
		// One statement for all changes; only observations of the model join.
		tag, err := tx.Exec(ctx, `INSERT INTO verdict_changes (obs_id, fit_id, model_id, at, from_verdict, to_verdict, flags)
			SELECT o.id, $1, o.model_id, c.at, c.f, c.t, c.flags
			FROM unnest($2::bigint[], $3::bigint[], $4::text[], $5::text[], $6::text[]) AS c(obs, at, f, t, flags)
			JOIN observations o ON o.id = c.obs AND o.model_id = $7`,
			fitID, obs, ats, from, to, flgs, modelID)
		if err != nil {
			if isUnique(err) {
				return fmt.Errorf("two verdict changes of one observation in one fit: %w", err)
			}
			return err
		}
		if tag.RowsAffected() == int64(len(changes)) {
			return nil
		}
		var missing int64
		err = tx.QueryRow(ctx, `SELECT c FROM unnest($1::bigint[]) AS c
			WHERE NOT EXISTS (SELECT 1 FROM observations o WHERE o.id = c AND o.model_id = $2) LIMIT 1`, obs, modelID).Scan(&missing)
		if err != nil {
			return fmt.Errorf("verdict change of an observation not of model %s: %w", f.Model, store.ErrNotFound)
		}
		return fmt.Errorf("verdict change: observation %d of model %s: %w", missing, f.Model, store.ErrNotFound)
	})
	if err != nil {
		return fail(err)
	}
	if newModel {
		db.cacheModelID(f.Model, modelID)
	}
	return fitID, nil
}

const fitSelect = `SELECT id, at, n, p, terms, estimates, std_errors, sigma, r_squared, fragility, fragility_k, detail, last_obs_id
	FROM fits `

func scanFit(sc pgx.Row, f *store.FitRecord) error {
	var (
		at      pgtype.Int8
		est, se []byte
	)
	if err := sc.Scan(&f.ID, &at, &f.N, &f.P, &f.Terms, &est, &se, &f.Sigma, &f.RSquared, &f.Fragility, &f.FragilityK,
		&f.Detail, &f.LastObsID); err != nil {
		return err
	}
	var err error
	f.At = decTime(at)
	if f.Estimates, err = decFloats(est); err != nil {
		return fmt.Errorf("fit %d estimates: %w", f.ID, err)
	}
	if f.StdErrors, err = decFloats(se); err != nil {
		return fmt.Errorf("fit %d standard errors: %w", f.ID, err)
	}
	return nil
}

// The fit queries: both walk the index fits_model (model_id, id), forwards
// or backwards, and stop after LIMIT rows.
const (
	fitsQuery       = fitSelect + "WHERE model_id = $1 AND id > $2 ORDER BY id LIMIT $3"
	latestFitsQuery = fitSelect + "WHERE model_id = $1 ORDER BY id DESC LIMIT $2"
)

// Fits returns the model's fits after the fit id afterID, oldest first, at
// most limit (<= 0: all).
func (db *DB) Fits(ctx context.Context, model string, afterID int64, limit int) ([]store.FitRecord, error) {
	out, err := db.queryFits(ctx, model, fitsQuery, afterID, sqlLimit(limit))
	if err != nil {
		return nil, fmt.Errorf("store: fits %s: %w", model, err)
	}
	return out, nil
}

// LatestFits returns the model's n most recent fits, oldest first (n <= 0:
// all), reading the index fits_model backwards and stopping after n.
func (db *DB) LatestFits(ctx context.Context, model string, n int) ([]store.FitRecord, error) {
	out, err := db.queryFits(ctx, model, latestFitsQuery, sqlLimit(n))
	if err != nil {
		return nil, fmt.Errorf("store: latest fits %s: %w", model, err)
	}
	slices.Reverse(out)
	return out, nil
}

// queryFits runs query with the model's id and args; an unknown model has
// no fits.
func (db *DB) queryFits(ctx context.Context, model, query string, args ...any) ([]store.FitRecord, error) {
	mid, ok, err := db.lookupModel(ctx, db.pool, model)
	if err != nil || !ok {
		return nil, err
	}
	rows, err := db.pool.Query(ctx, query, append([]any{mid}, args...)...)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []store.FitRecord
	for rows.Next() {
		f := store.FitRecord{Model: model}
		if err := scanFit(rows, &f); err != nil {
			return nil, err
		}
		out = append(out, f)
	}
	return out, rows.Err()
}

// CountFits returns how many fits the model has (0 for an unknown model).
func (db *DB) CountFits(ctx context.Context, model string) (int64, error) {
	var n int64
	err := db.pool.QueryRow(ctx, `SELECT COUNT(*) FROM fits WHERE model_id = (SELECT id FROM models WHERE name = $1)`, model).Scan(&n)
	if err != nil {
		return 0, fmt.Errorf("store: count fits %s: %w", model, err)
	}
	return n, nil
}

// LastFit returns the model's most recent fit, or an error wrapping
// store.ErrNotFound.
func (db *DB) LastFit(ctx context.Context, model string) (store.FitRecord, error) {
	f := store.FitRecord{Model: model}
	err := scanFit(db.pool.QueryRow(ctx,
		fitSelect+"WHERE model_id = (SELECT id FROM models WHERE name = $1) ORDER BY id DESC LIMIT 1", model), &f)
	if errors.Is(err, pgx.ErrNoRows) {
		err = store.ErrNotFound
	}
	if err != nil {
		return store.FitRecord{}, fmt.Errorf("store: last fit %s: %w", model, err)
	}
	return f, nil
}

// VerdictChanges returns the verdict history of one observation, oldest
// first (empty when it never changed).
func (db *DB) VerdictChanges(ctx context.Context, obsID int64) ([]store.VerdictChange, error) {
	fail := func(err error) ([]store.VerdictChange, error) {
		return nil, fmt.Errorf("store: verdict changes of observation %d: %w", obsID, err)
	}
	rows, err := db.pool.Query(ctx, `SELECT fit_id, at, from_verdict, to_verdict, flags FROM verdict_changes
		WHERE obs_id = $1 ORDER BY fit_id`, obsID)
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	var out []store.VerdictChange
	for rows.Next() {
		c := store.VerdictChange{ObsID: obsID}
		var at pgtype.Int8
		var from, to, flags pgtype.Text
		if err := rows.Scan(&c.FitID, &at, &from, &to, &flags); err != nil {
			return fail(err)
		}
		c.At = decTime(at)
		c.From, c.To = decVerdict(from), decVerdict(to)
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

// CurrentVerdicts returns, by observation id, the latest verdict of every
// observation of the model whose latest verdict differs from its arrival
// verdict (an observation that arrived without diagnostics counts as
// differing once it has any change).
func (db *DB) CurrentVerdicts(ctx context.Context, model string) (map[int64]engine.Word, error) {
	fail := func(err error) (map[int64]engine.Word, error) {
		return nil, fmt.Errorf("store: current verdicts %s: %w", model, err)
	}
	out := make(map[int64]engine.Word)
	mid, ok, err := db.lookupModel(ctx, db.pool, model)
	if err != nil {
		return fail(err)
	}
	if !ok {
		return out, nil
	}
	rows, err := db.pool.Query(ctx, `SELECT DISTINCT ON (vc.obs_id) vc.obs_id, vc.to_verdict, o.verdict
		FROM verdict_changes vc JOIN observations o ON o.id = vc.obs_id
		WHERE vc.model_id = $1 ORDER BY vc.obs_id, vc.fit_id DESC`, mid)
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	for rows.Next() {
		var id int64
		var to, arrival pgtype.Text
		if err := rows.Scan(&id, &to, &arrival); err != nil {
			return fail(err)
		}
		if v := decVerdict(to); !arrival.Valid || decVerdict(arrival) != v {
			out[id] = v
		}
	}
	if err := rows.Err(); err != nil {
		return fail(err)
	}
	return out, nil
}
