package sqlite

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"slices"

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
	terms, err := encStrings(f.Terms)
	if err != nil {
		return fail(fmt.Errorf("terms: %w", err))
	}
	type change struct {
		at    any // encoded time
		flags string
		c     *store.VerdictChange
	}
	cs := make([]change, len(changes))
	for i := range changes {
		c := &changes[i]
		t := c.At
		if t.IsZero() {
			t = f.At
		}
		a, err := encTime(t)
		if err != nil {
			return fail(fmt.Errorf("verdict change of observation %d: %w", c.ObsID, err))
		}
		fl, err := encFlags(c.Flags)
		if err != nil {
			return fail(fmt.Errorf("verdict change of observation %d: %w", c.ObsID, err))
		}
		cs[i] = change{at: a, flags: fl, c: c}
	}
	var fitID int64
	var modelID int64
	var newModel bool
	err = db.write(ctx, func(tx *sql.Tx) error {
		var err error
		modelID, newModel, err = db.ensureModel(ctx, tx, f.Model)
		if err != nil {
			return err
		}
		res, err := tx.ExecContext(ctx, `INSERT INTO fits (model_id, at, n, p, terms, estimates, std_errors, sigma, r_squared,
			fragility, fragility_k, detail, last_obs_id) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
			modelID, at, f.N, f.P, terms, encFloats(f.Estimates), encFloats(f.StdErrors), encReal(f.Sigma), encReal(f.RSquared),
			f.Fragility, f.FragilityK, f.Detail, f.LastObsID)
		if err != nil {
			return err
		}
		if fitID, err = res.LastInsertId(); err != nil {
			return err
		}
		if len(cs) == 0 {
			return nil
		}
		st, err := tx.PrepareContext(ctx, `INSERT INTO verdict_changes (obs_id, fit_id, model_id, at, from_verdict, to_verdict, flags)
			SELECT id, ?, model_id, ?, ?, ?, ? FROM observations WHERE id = ? AND model_id = ?`)
		if err != nil {
			return err
		}
		defer st.Close()
		for _, c := range cs {
			res, err := st.ExecContext(ctx, fitID, c.at, string(c.c.From), string(c.c.To), c.flags, c.c.ObsID, modelID)
			if err != nil {
				return fmt.Errorf("verdict change of observation %d: %w", c.c.ObsID, err)
			}
			if n, err := res.RowsAffected(); err != nil {
				return err
			} else if n == 0 {
				return fmt.Errorf("verdict change: observation %d of model %s: %w", c.c.ObsID, f.Model, store.ErrNotFound)
			}
		}
		return nil
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

func scanFit(sc scanner, f *store.FitRecord) error {
	var (
		at        sql.NullInt64
		terms     string
		est, se   []byte
		sigma, r2 sql.NullFloat64
	)
	if err := sc.Scan(&f.ID, &at, &f.N, &f.P, &terms, &est, &se, &sigma, &r2, &f.Fragility, &f.FragilityK, &f.Detail, &f.LastObsID); err != nil {
		return err
	}
	var err error
	f.At = decTime(at)
	if f.Terms, err = decStrings(terms); err != nil {
		return fmt.Errorf("fit %d terms: %w", f.ID, err)
	}
	if f.Estimates, err = decFloats(est); err != nil {
		return fmt.Errorf("fit %d estimates: %w", f.ID, err)
	}
	if f.StdErrors, err = decFloats(se); err != nil {
		return fmt.Errorf("fit %d standard errors: %w", f.ID, err)
	}
	f.Sigma = decReal(sigma)
	f.RSquared = decReal(r2)
	return nil
}

// Fits returns the model's fits after the fit id afterID, oldest first, at
// most limit (<= 0: all).
func (db *DB) Fits(ctx context.Context, model string, afterID int64, limit int) ([]store.FitRecord, error) {
	fail := func(err error) ([]store.FitRecord, error) {
		return nil, fmt.Errorf("store: fits %s: %w", model, err)
	}
	mid, ok, err := db.lookupModel(ctx, db.db, model)
	if err != nil {
		return fail(err)
	}
	if !ok {
		return nil, nil
	}
	rows, err := db.db.QueryContext(ctx, fitsQuery, mid, afterID, sqlLimit(limit))
	if err != nil {
		return fail(err)
	}
	out, err := scanFits(rows, model)
	if err != nil {
		return fail(err)
	}
	return out, nil
}

// The fit queries, kept as constants so that a test can check their query
// plans: both walk the index fits_model (model_id, id), forwards or
// backwards, and stop after LIMIT rows.
const (
	fitsQuery       = fitSelect + "WHERE model_id = ? AND id > ? ORDER BY id LIMIT ?"
	latestFitsQuery = fitSelect + "WHERE model_id = ? ORDER BY id DESC LIMIT ?"
)

// LatestFits returns the model's n most recent fits, oldest first (n <= 0:
// all). It reads the index fits_model backwards from the newest fit and
// stops after n rows, so its cost does not grow with the history.
func (db *DB) LatestFits(ctx context.Context, model string, n int) ([]store.FitRecord, error) {
	fail := func(err error) ([]store.FitRecord, error) {
		return nil, fmt.Errorf("store: latest fits %s: %w", model, err)
	}
	mid, ok, err := db.lookupModel(ctx, db.db, model)
	if err != nil {
		return fail(err)
	}
	if !ok {
		return nil, nil
	}
	rows, err := db.db.QueryContext(ctx, latestFitsQuery, mid, sqlLimit(n))
	if err != nil {
		return fail(err)
	}
	out, err := scanFits(rows, model)
	if err != nil {
		return fail(err)
	}
	slices.Reverse(out)
	return out, nil
}

// CountFits returns how many fits the model has (0 for an unknown model),
// counting entries of the index fits_model.
func (db *DB) CountFits(ctx context.Context, model string) (int64, error) {
	var n int64
	err := db.db.QueryRowContext(ctx, countFitsQuery, model).Scan(&n)
	if err != nil {
		return 0, fmt.Errorf("store: count fits %s: %w", model, err)
	}
	return n, nil
}

// countFitsQuery counts one model's fits (a query-plan test checks that it
// reads the index, not the fit rows).
const countFitsQuery = `SELECT COUNT(*) FROM fits WHERE model_id = (SELECT id FROM models WHERE name = ?)`

// scanFits reads every row of rows (fitSelect columns) and closes it.
func scanFits(rows *sql.Rows, model string) ([]store.FitRecord, error) {
	defer rows.Close()
	var out []store.FitRecord
	for rows.Next() {
		f := store.FitRecord{Model: model}
		if err := scanFit(rows, &f); err != nil {
			return nil, err
		}
		out = append(out, f)
	}
	if err := rows.Err(); err != nil {
		return nil, err
	}
	return out, nil
}

// LastFit returns the model's most recent fit, or an error wrapping
// store.ErrNotFound.
func (db *DB) LastFit(ctx context.Context, model string) (store.FitRecord, error) {
	f := store.FitRecord{Model: model}
	err := scanFit(db.db.QueryRowContext(ctx,
		fitSelect+"WHERE model_id = (SELECT id FROM models WHERE name = ?) ORDER BY id DESC LIMIT 1", model), &f)
	if errors.Is(err, sql.ErrNoRows) {
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
	rows, err := db.db.QueryContext(ctx, `SELECT fit_id, at, from_verdict, to_verdict, flags FROM verdict_changes
		WHERE obs_id = ? ORDER BY fit_id`, obsID)
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	var out []store.VerdictChange
	for rows.Next() {
		c := store.VerdictChange{ObsID: obsID}
		var at sql.NullInt64
		var from, to string
		var flags sql.NullString
		if err := rows.Scan(&c.FitID, &at, &from, &to, &flags); err != nil {
			return fail(err)
		}
		c.At = decTime(at)
		c.From, c.To = engine.Word(from), engine.Word(to)
		if c.Flags, err = decFlags(flags); err != nil {
			return fail(fmt.Errorf("observation %d: %w", obsID, err))
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
	mid, ok, err := db.lookupModel(ctx, db.db, model)
	if err != nil {
		return fail(err)
	}
	if !ok {
		return out, nil
	}
	rows, err := db.db.QueryContext(ctx, `SELECT vc.obs_id, vc.to_verdict, o.verdict
		FROM (SELECT obs_id, MAX(fit_id) AS fit_id FROM verdict_changes WHERE model_id = ? GROUP BY obs_id) l
		JOIN verdict_changes vc ON vc.obs_id = l.obs_id AND vc.fit_id = l.fit_id
		JOIN observations o ON o.id = vc.obs_id`, mid)
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	for rows.Next() {
		var id int64
		var to string
		var arrival sql.NullString
		if err := rows.Scan(&id, &to, &arrival); err != nil {
			return fail(err)
		}
		if !arrival.Valid || arrival.String != to {
			out[id] = engine.Word(to)
		}
	}
	if err := rows.Err(); err != nil {
		return fail(err)
	}
	return out, nil
}

// sqlLimit maps "<= 0: all" to SQLite's LIMIT -1.
func sqlLimit(n int) int64 {
	if n <= 0 {
		return -1
	}
	return int64(n)
}
