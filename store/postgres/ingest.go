package postgres

import (
	"context"
	"errors"
	"fmt"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"

	"plumb/store"
)

// obsCols are the columns copied per observation, in value order.
var obsCols = []string{"id", "model_id", "source_id", "generation", "line", "raw", "vals", "t", "arrived_at",
	"leverage", "residual", "student_int", "student_ext", "cooks", "dffits", "dfbetas", "covratio", "outlier_p", "verdict", "flags", "label"}

const nObsCols = 21

var qrnCols = []string{"model_id", "source_id", "generation", "line", "col", "raw", "reason", "at", "col_name", "field"}

// Ingest commits the batch's observations, its quarantined rows and the
// source's new read state in one transaction.
//
// The transaction locks the model's row first, so the batches of one
// model commit one at a time across every process sharing the database;
// then it checks the stored read position (a batch that does not advance
// it is store.ErrStale and stores nothing), takes ids from the sequence
// and copies the rows with COPY.
//
// The stored Rows and Quarantined counts of the source are maintained by
// the store; the values in b.Source are ignored. Observations and
// quarantined rows may leave Model, Path and Generation zero, which means
// those of b.Source; any other value is an error.
func (db *DB) Ingest(ctx context.Context, b store.Batch) ([]int64, error) {
	src := b.Source
	fail := func(err error) ([]int64, error) {
		return nil, fmt.Errorf("store: ingest %s/%s: %w", src.Model, src.Path, err)
	}
	if src.Model == "" || src.Path == "" {
		return fail(errors.New("source needs a model and a path"))
	}
	updatedAt := src.UpdatedAt
	if updatedAt.IsZero() {
		updatedAt = db.now()
	}
	updated, err := encTime(updatedAt)
	if err != nil {
		return fail(fmt.Errorf("source updated at: %w", err))
	}

	// Encode outside the transaction; ids and the model and source ids are
	// filled in inside.
	rows := make([][]any, len(b.Observations))
	flat := make([]any, len(b.Observations)*nObsCols)
	for i := range b.Observations {
		o := &b.Observations[i]
		if err := checkProvenance(src, o.Model, o.Path, o.Generation); err != nil {
			return fail(fmt.Errorf("observation line %d: %w", o.Line, err))
		}
		a := flat[i*nObsCols : (i+1)*nObsCols : (i+1)*nObsCols]
		a[3] = int32(src.Generation)
		a[4] = int64(o.Line)
		a[5] = []byte(o.Raw)
		a[20] = []byte(o.Label)
		a[6] = encFloats(o.Values)
		if a[7], err = encTime(o.Time); err != nil {
			return fail(fmt.Errorf("observation line %d time: %w", o.Line, err))
		}
		if a[8], err = encTime(o.ArrivedAt); err != nil {
			return fail(fmt.Errorf("observation line %d arrived at: %w", o.Line, err))
		}
		if err := encArrival(a[9:], o.Arrival); err != nil {
			return fail(fmt.Errorf("observation line %d flags: %w", o.Line, err))
		}
		rows[i] = a
	}
	qrows := make([][]any, len(b.Quarantine))
	for i := range b.Quarantine {
		q := &b.Quarantine[i]
		if err := checkProvenance(src, q.Model, q.Path, q.Generation); err != nil {
			return fail(fmt.Errorf("quarantined line %d: %w", q.Line, err))
		}
		at, err := encTime(q.At)
		if err != nil {
			return fail(fmt.Errorf("quarantined line %d time: %w", q.Line, err))
		}
		qrows[i] = []any{nil, nil, int32(src.Generation), int64(q.Line), int32(q.Column), []byte(q.Raw), q.Reason, at, q.ColumnName, int32(q.Field)}
	}

	ids := make([]int64, len(b.Observations))
	var modelID int64
	var newModel bool
	err = pgx.BeginFunc(ctx, db.pool, func(tx pgx.Tx) error {
		var err error
		modelID, newModel, err = db.ensureModel(ctx, tx, src.Model)
		if err != nil {
			return err
		}
		var (
			stored      [6]pgtype.Int8 // NULL when the source is new
			nObs, nQuar = int64(len(b.Observations)), int64(len(b.Quarantine))
		)
		// One round trip: lock the model's row, then read the source's
		// stored state. Two statements, since a statement's snapshot is
		// taken when it starts: the read must start after the lock is held
		// to see what the previous holder committed.
		var bt pgx.Batch
		bt.Queue("SELECT 1 FROM models WHERE id = $1 FOR NO KEY UPDATE", modelID)
		bt.Queue(`SELECT id, generation, read_offset, rows_total, quarantined, missing FROM sources
			WHERE model_id = $1 AND path = $2`, modelID, src.Path).QueryRow(func(r pgx.Row) error {
			err := r.Scan(&stored[0], &stored[1], &stored[2], &stored[3], &stored[4], &stored[5])
			if errors.Is(err, pgx.ErrNoRows) {
				return nil
			}
			return err
		})
		if err := tx.SendBatch(ctx, &bt).Close(); err != nil {
			return err
		}
		sid, gen, off, nrows, nquar, nmiss := stored[0].Int64, stored[1].Int64, stored[2].Int64, stored[3].Int64, stored[4].Int64, stored[5].Int64
		state := []any{int32(src.Generation), encInode(src.Inode), src.Size, src.Offset, int64(src.Line),
			src.Fingerprint, int32(src.FingerprintLen), []byte(src.Header), nonNilBytes(src.Digest)}
		if sid == 0 {
			err = tx.QueryRow(ctx, `INSERT INTO sources (generation, inode, size, read_offset, line, fingerprint, fingerprint_len,
				header, digest, rows_total, quarantined, missing, updated_at, model_id, path)
				VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15) RETURNING id`,
				append(state, nObs, nQuar, b.Missing, updated, modelID, src.Path)...).Scan(&sid)
			if err != nil {
				return err
			}
		} else {
			g := int64(src.Generation)
			if g < gen || (g == gen && src.Offset <= off) {
				return fmt.Errorf("generation %d offset %d, stored generation %d offset %d: %w",
					src.Generation, src.Offset, gen, off, store.ErrStale)
			}
			if _, err := tx.Exec(ctx, `UPDATE sources SET generation = $1, inode = $2, size = $3, read_offset = $4, line = $5,
				fingerprint = $6, fingerprint_len = $7, header = $8, digest = $9, rows_total = $10, quarantined = $11,
				missing = $12, updated_at = $13 WHERE id = $14`, append(state, nrows+nObs, nquar+nQuar, nmiss+b.Missing, updated, sid)...); err != nil {
				return err
			}
		}

		if len(ids) > 0 {
			if err := nextIDs(ctx, tx, "observations_id_seq", ids); err != nil {
				return err
			}
			for i, a := range rows {
				a[0], a[1], a[2] = ids[i], modelID, sid
			}
			if _, err := tx.CopyFrom(ctx, pgx.Identifier{"observations"}, obsCols, pgx.CopyFromRows(rows)); err != nil {
				if isUnique(err) {
					return fmt.Errorf("observation already stored (same file, generation and line): %w", err)
				}
				return err
			}
		}
		if len(qrows) > 0 {
			for _, q := range qrows {
				q[0], q[1] = modelID, sid
			}
			if _, err := tx.CopyFrom(ctx, pgx.Identifier{"quarantine"}, qrnCols, pgx.CopyFromRows(qrows)); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return fail(err)
	}
	if newModel {
		db.cacheModelID(src.Model, modelID)
	}
	return ids, nil
}

// nextIDs fills ids with values of the sequence seq, in increasing order.
// The model's row lock orders one model's batches; the ids of one batch
// are increasing, so one model's observations are numbered in commit order.
func nextIDs(ctx context.Context, tx pgx.Tx, seq string, ids []int64) error {
	rows, err := tx.Query(ctx, "SELECT nextval($1::regclass) AS id FROM generate_series(1, $2) ORDER BY id", seq, len(ids))
	if err != nil {
		return err
	}
	defer rows.Close()
	i := 0
	for rows.Next() {
		if i == len(ids) {
			return errors.New("sequence gave too many ids")
		}
		if err := rows.Scan(&ids[i]); err != nil {
			return err
		}
		i++
	}
	if err := rows.Err(); err != nil {
		return err
	}
	if i != len(ids) {
		return fmt.Errorf("sequence gave %d ids for %d rows", i, len(ids))
	}
	return nil
}

// checkProvenance accepts the zero value (meaning: the batch's source) or
// the source's own model, path and generation.
func checkProvenance(src store.Source, model, path string, gen int) error {
	if model != "" && model != src.Model {
		return fmt.Errorf("model %q differs from the batch's %q", model, src.Model)
	}
	if path != "" && path != src.Path {
		return fmt.Errorf("path %q differs from the batch's %q", path, src.Path)
	}
	if gen != 0 && gen != src.Generation {
		return fmt.Errorf("generation %d differs from the batch's %d", gen, src.Generation)
	}
	return nil
}

// Sources returns the read state of every file the model has read, by path.
func (db *DB) Sources(ctx context.Context, model string) ([]store.Source, error) {
	fail := func(err error) ([]store.Source, error) { return nil, fmt.Errorf("store: sources %s: %w", model, err) }
	rows, err := db.pool.Query(ctx, `SELECT s.path, s.generation, s.inode, s.size, s.read_offset, s.line,
		s.fingerprint, s.fingerprint_len, s.header, s.digest, s.rows_total, s.quarantined, s.missing, s.updated_at
		FROM sources s JOIN models m ON m.id = s.model_id WHERE m.name = $1 ORDER BY s.path`, model)
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	var out []store.Source
	for rows.Next() {
		s := store.Source{Model: model}
		var inode int64
		var header []byte
		var updated pgtype.Int8
		if err := rows.Scan(&s.Path, &s.Generation, &inode, &s.Size, &s.Offset, &s.Line,
			&s.Fingerprint, &s.FingerprintLen, &header, &s.Digest, &s.Rows, &s.Quarantined, &s.Missing, &updated); err != nil {
			return fail(err)
		}
		s.Inode = decInode(inode)
		s.Header = string(header)
		if len(s.Digest) == 0 {
			s.Digest = nil
		}
		s.UpdatedAt = decTime(updated)
		out = append(out, s)
	}
	if err := rows.Err(); err != nil {
		return fail(err)
	}
	return out, nil
}

// obsSelect reads the columns scanObs expects.
const obsSelect = `SELECT o.id, s.path, o.generation, o.line, o.raw, o.vals, o.t, o.arrived_at,
	o.leverage, o.residual, o.student_int, o.student_ext, o.cooks, o.dffits, o.dfbetas, o.covratio, o.outlier_p, o.verdict, o.flags, o.label
	FROM observations o JOIN sources s ON s.id = o.source_id `

// scanObs reads one row of obsSelect.
func scanObs(sc pgx.Row, o *store.Observation) error {
	var (
		raw, vals, dfb, label     []byte
		t, arrived                pgtype.Int8
		lev, res, si, se, ck, dff pgtype.Float8
		cov, outp                 pgtype.Float8
		verdict, flags            pgtype.Text
	)
	if err := sc.Scan(&o.ID, &o.Path, &o.Generation, &o.Line, &raw, &vals, &t, &arrived,
		&lev, &res, &si, &se, &ck, &dff, &dfb, &cov, &outp, &verdict, &flags, &label); err != nil {
		return err
	}
	var err error
	o.Raw = string(raw)
	o.Label = string(label)
	if o.Values, err = decFloats(vals); err != nil {
		return fmt.Errorf("observation %d values: %w", o.ID, err)
	}
	o.Time = decTime(t)
	o.ArrivedAt = decTime(arrived)
	o.Arrival = nil
	if verdict.Valid {
		d := &store.Diagnostics{
			Leverage:            lev.Float64,
			Residual:            res.Float64,
			StudentizedInternal: si.Float64,
			StudentizedExternal: se.Float64,
			CooksDistance:       ck.Float64,
			DFFITS:              dff.Float64,
			COVRATIO:            cov.Float64,
			OutlierPBonferroni:  outp.Float64,
			Verdict:             decVerdict(verdict),
		}
		if d.Flags, err = decFlags(flags); err != nil {
			return fmt.Errorf("observation %d flags: %w", o.ID, err)
		}
		if d.DFBETAS, err = decFloats(dfb); err != nil {
			return fmt.Errorf("observation %d DFBETAS: %w", o.ID, err)
		}
		o.Arrival = d
	}
	return nil
}

// Observations returns the model's observations in ascending id order,
// after q.AfterID, at most q.Limit (<= 0: all), of one file when q.Path is
// set. An unknown model or path gives an empty result.
func (db *DB) Observations(ctx context.Context, model string, q store.ObsQuery) ([]store.Observation, error) {
	fail := func(err error) ([]store.Observation, error) {
		return nil, fmt.Errorf("store: observations %s: %w", model, err)
	}
	mid, ok, err := db.lookupModel(ctx, db.pool, model)
	if err != nil {
		return fail(err)
	}
	if !ok {
		return nil, nil
	}
	var rows pgx.Rows
	if q.Path == "" {
		rows, err = db.pool.Query(ctx, obsSelect+"WHERE o.model_id = $1 AND o.id > $2 ORDER BY o.id LIMIT $3",
			mid, q.AfterID, sqlLimit(q.Limit))
	} else {
		rows, err = db.pool.Query(ctx, obsSelect+"WHERE o.model_id = $1 AND o.id > $2 AND s.path = $4 ORDER BY o.id LIMIT $3",
			mid, q.AfterID, sqlLimit(q.Limit), q.Path)
	}
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	var out []store.Observation
	for rows.Next() {
		o := store.Observation{Model: model}
		if err := scanObs(rows, &o); err != nil {
			return fail(err)
		}
		out = append(out, o)
	}
	if err := rows.Err(); err != nil {
		return fail(err)
	}
	return out, nil
}

// ObservationAt returns the observation at the file's line in its newest
// generation holding that line, or an error wrapping store.ErrNotFound.
func (db *DB) ObservationAt(ctx context.Context, model, path string, line int) (store.Observation, error) {
	o := store.Observation{Model: model}
	err := scanObs(db.pool.QueryRow(ctx, obsSelect+`WHERE o.source_id = (SELECT s.id FROM sources s JOIN models m ON m.id = s.model_id
		WHERE m.name = $1 AND s.path = $2) AND o.line = $3 ORDER BY o.generation DESC LIMIT 1`, model, path, line), &o)
	if errors.Is(err, pgx.ErrNoRows) {
		err = store.ErrNotFound
	}
	if err != nil {
		return store.Observation{}, fmt.Errorf("store: observation %s/%s:%d: %w", model, path, line, err)
	}
	return o, nil
}

// CountObservations returns how many observations the model holds (0 for
// an unknown model), from the sources' counts.
func (db *DB) CountObservations(ctx context.Context, model string) (int64, error) {
	var n int64
	err := db.pool.QueryRow(ctx, `SELECT COALESCE(SUM(s.rows_total), 0)::bigint FROM sources s JOIN models m ON m.id = s.model_id
		WHERE m.name = $1`, model).Scan(&n)
	if err != nil {
		return 0, fmt.Errorf("store: count observations %s: %w", model, err)
	}
	return n, nil
}

// nonNilBytes is b, or an empty slice for nil: the digest column is NOT
// NULL and pgx writes a nil slice as NULL.
func nonNilBytes(b []byte) []byte {
	if b == nil {
		return []byte{}
	}
	return b
}
