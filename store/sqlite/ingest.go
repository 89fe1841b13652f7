package sqlite

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"strings"

	"plumb/engine"
	"plumb/store"

	msqlite "modernc.org/sqlite"
	sqlite3 "modernc.org/sqlite/lib"
)

// obsCols are the columns written per observation, in bind order.
const obsCols = "id, model_id, source_id, generation, line, raw, vals, t, arrived_at, " +
	"leverage, residual, student_int, student_ext, cooks, dffits, dfbetas, covratio, outlier_p, verdict, flags, label"

const nObsCols = 21

// obsChunks are the row counts of the prepared multi-row INSERTs; a batch
// is written greedily with the largest that fits.
var obsChunks = [...]int{128, 32, 8, 1}

// ingestStmts are prepared once per DB (and by database/sql once per
// pooled connection), then bound to each write transaction.
type ingestStmts struct {
	insertObs                 [len(obsChunks)]*sql.Stmt
	selSource, insSource      *sql.Stmt
	updSource, maxObs, insQrn *sql.Stmt
}

func (s *ingestStmts) close() {
	for _, st := range append(s.insertObs[:], s.selSource, s.insSource, s.updSource, s.maxObs, s.insQrn) {
		if st != nil {
			st.Close()
		}
	}
}

const (
	selSourceSQL = "SELECT id, generation, read_offset, rows_total, quarantined, missing FROM sources WHERE model_id = ? AND path = ?"
	insSourceSQL = `INSERT INTO sources (generation, inode, size, read_offset, line, fingerprint, fingerprint_len, header,
		digest, rows_total, quarantined, missing, updated_at, model_id, path) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`
	updSourceSQL = `UPDATE sources SET generation = ?, inode = ?, size = ?, read_offset = ?, line = ?,
		fingerprint = ?, fingerprint_len = ?, header = ?, digest = ?, rows_total = ?, quarantined = ?, missing = ?, updated_at = ?
		WHERE id = ?`
	maxObsSQL = "SELECT COALESCE(MAX(id), 0) FROM observations"
	insQrnSQL = `INSERT INTO quarantine (model_id, source_id, generation, line, col, raw, reason, at, col_name, field)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`
)

// ingestStatements prepares the ingest statements on first use. A failure
// is returned, not kept: the next call tries again.
func (db *DB) ingestStatements() (*ingestStmts, error) {
	db.stmtMu.Lock()
	defer db.stmtMu.Unlock()
	if db.stmts != nil {
		return db.stmts, nil
	}
	s := &ingestStmts{}
	prepare := func(dst **sql.Stmt, q string) error {
		st, err := db.db.PrepareContext(context.Background(), q)
		if err != nil {
			s.close()
			return err
		}
		*dst = st
		return nil
	}
	one := "(" + strings.TrimSuffix(strings.Repeat("?,", nObsCols), ",") + ")"
	for i, n := range obsChunks {
		q := "INSERT INTO observations (" + obsCols + ") VALUES " + strings.TrimSuffix(strings.Repeat(one+",", n), ",")
		if err := prepare(&s.insertObs[i], q); err != nil {
			return nil, err
		}
	}
	for _, p := range []struct {
		dst **sql.Stmt
		q   string
	}{{&s.selSource, selSourceSQL}, {&s.insSource, insSourceSQL}, {&s.updSource, updSourceSQL},
		{&s.maxObs, maxObsSQL}, {&s.insQrn, insQrnSQL}} {
		if err := prepare(p.dst, p.q); err != nil {
			return nil, err
		}
	}
	db.stmts = s
	return s, nil
}

// Ingest commits the batch's observations, its quarantined rows and the
// source's new read state in one IMMEDIATE transaction.
//
// The stored Rows and Quarantined counts of the source are maintained by
// the store (the stored counts plus this batch's); the values in b.Source
// are ignored. Observations and quarantined rows may leave Model, Path and
// Generation zero, which means those of b.Source; any other value is an
// error. A batch whose generation is lower than the stored one, or equal
// with an offset that does not advance, stores nothing and returns an
// error wrapping store.ErrStale.
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

	// Encode outside the write lock; ids, model and source are filled in
	// inside. The binder holds the values without one allocation each.
	bd := getBinder(len(b.Observations))
	defer bd.release()
	for i := range b.Observations {
		o := &b.Observations[i]
		if err := store.CheckProvenance(src, o.Model, o.Path, o.Generation); err != nil {
			return fail(fmt.Errorf("observation line %d: %w", o.Line, err))
		}
		bd.args = append(bd.args, nil, nil, nil) // id, model_id, source_id
		bd.int64(int64(src.Generation))
		bd.int64(int64(o.Line))
		bd.str(o.Raw)
		bd.floats(o.Values)
		if err := bd.time(o.Time); err != nil {
			return fail(fmt.Errorf("observation line %d time: %w", o.Line, err))
		}
		if err := bd.time(o.ArrivedAt); err != nil {
			return fail(fmt.Errorf("observation line %d arrived at: %w", o.Line, err))
		}
		if d := o.Arrival; d != nil {
			bd.real(d.Leverage)
			bd.real(d.Residual)
			bd.real(d.StudentizedInternal)
			bd.real(d.StudentizedExternal)
			bd.real(d.CooksDistance)
			bd.real(d.DFFITS)
			bd.floats(d.DFBETAS)
			bd.real(d.COVRATIO)
			bd.real(d.OutlierPBonferroni)
			bd.str(string(d.Verdict))
			bd.flags(d)
		} else {
			for range nObsCols - 10 { // the arrival columns, leverage .. flags
				bd.args = append(bd.args, nil)
			}
		}
		bd.str(o.Label)
	}
	args := bd.args
	qargs := make([][]any, len(b.Quarantine))
	for i := range b.Quarantine {
		q := &b.Quarantine[i]
		if err := store.CheckProvenance(src, q.Model, q.Path, q.Generation); err != nil {
			return fail(fmt.Errorf("quarantined line %d: %w", q.Line, err))
		}
		at, err := encTime(q.At)
		if err != nil {
			return fail(fmt.Errorf("quarantined line %d time: %w", q.Line, err))
		}
		qargs[i] = []any{int64(src.Generation), int64(q.Line), int64(q.Column), q.Raw, q.Reason, at, q.ColumnName, int64(q.Field)}
	}

	stmts, err := db.ingestStatements()
	if err != nil {
		return fail(fmt.Errorf("prepare: %w", err))
	}

	ids := make([]int64, len(b.Observations))
	var modelID int64
	var newModel bool
	err = db.write(ctx, func(tx *sql.Tx) error {
		var err error
		modelID, newModel, err = db.ensureModel(ctx, tx, src.Model)
		if err != nil {
			return err
		}
		var (
			sid         int64
			gen, off    int64
			rows, quar  int64
			miss        int64
			nObs, nQuar = int64(len(b.Observations)), int64(len(b.Quarantine))
			stateArgs   = []any{int64(src.Generation), encInode(src.Inode), src.Size, src.Offset, int64(src.Line), src.Fingerprint, int64(src.FingerprintLen), src.Header, digestArg(src.Digest)}
		)
		err = tx.StmtContext(ctx, stmts.selSource).QueryRowContext(ctx, modelID, src.Path).Scan(&sid, &gen, &off, &rows, &quar, &miss)
		switch {
		case errors.Is(err, sql.ErrNoRows):
			res, err := tx.StmtContext(ctx, stmts.insSource).ExecContext(ctx,
				append(stateArgs, nObs, nQuar, b.Missing, updated, modelID, src.Path)...)
			if err != nil {
				return err
			}
			if sid, err = res.LastInsertId(); err != nil {
				return err
			}
		case err != nil:
			return err
		default:
			g := int64(src.Generation)
			if g < gen || (g == gen && src.Offset <= off) {
				return fmt.Errorf("generation %d offset %d, stored generation %d offset %d: %w",
					src.Generation, src.Offset, gen, off, store.ErrStale)
			}
			if _, err := tx.StmtContext(ctx, stmts.updSource).ExecContext(ctx,
				append(stateArgs, rows+nObs, quar+nQuar, miss+b.Missing, updated, sid)...); err != nil {
				return err
			}
		}

		if len(ids) > 0 {
			var base int64
			if err := tx.StmtContext(ctx, stmts.maxObs).QueryRowContext(ctx).Scan(&base); err != nil {
				return err
			}
			// The ids are bound from ids itself, model and source from
			// their variables, none of which change until the inserts ran.
			mid, src := ref64(&modelID), ref64(&sid)
			for i := range ids {
				ids[i] = base + 1 + int64(i)
				a := args[i*nObsCols:]
				a[0], a[1], a[2] = ref64(&ids[i]), mid, src
			}
			if err := insertChunks(ctx, tx, stmts, args); err != nil {
				return err
			}
		}
		if len(qargs) > 0 {
			st := tx.StmtContext(ctx, stmts.insQrn)
			for _, q := range qargs {
				if _, err := st.ExecContext(ctx, append([]any{modelID, sid}, q...)...); err != nil {
					return err
				}
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

// digestArg binds a digest; nil is stored as the empty blob (NOT NULL).
func digestArg(d []byte) []byte {
	if d == nil {
		return []byte{}
	}
	return d
}

// insertChunks writes the observation rows in args with the prepared
// multi-row statements, largest first.
func insertChunks(ctx context.Context, tx *sql.Tx, stmts *ingestStmts, args []any) error {
	rows := len(args) / nObsCols
	for k, n := range obsChunks {
		if rows < n {
			continue
		}
		st := tx.StmtContext(ctx, stmts.insertObs[k])
		for rows >= n {
			if _, err := st.ExecContext(ctx, args[:n*nObsCols]...); err != nil {
				if isUnique(err) {
					return fmt.Errorf("observation already stored (same file, generation and line): %w", err)
				}
				return err
			}
			args = args[n*nObsCols:]
			rows -= n
		}
	}
	return nil
}

// isUnique reports whether err is SQLite's UNIQUE constraint failure.
func isUnique(err error) bool {
	var e *msqlite.Error
	return errors.As(err, &e) && e.Code() == sqlite3.SQLITE_CONSTRAINT_UNIQUE
}

// checkProvenance accepts the zero value (meaning: the batch's source) or
// the source's own model, path and generation.
// Sources returns the read state of every file the model has read, by path.
func (db *DB) Sources(ctx context.Context, model string) ([]store.Source, error) {
	rows, err := db.db.QueryContext(ctx, `SELECT s.path, s.generation, s.inode, s.size, s.read_offset, s.line,
		s.fingerprint, s.fingerprint_len, s.header, s.digest, s.rows_total, s.quarantined, s.missing, s.updated_at
		FROM sources s JOIN models m ON m.id = s.model_id WHERE m.name = ? ORDER BY s.path`, model)
	if err != nil {
		return nil, fmt.Errorf("store: sources %s: %w", model, err)
	}
	defer rows.Close()
	var out []store.Source
	for rows.Next() {
		s := store.Source{Model: model}
		var inode int64
		var updated sql.NullInt64
		if err := rows.Scan(&s.Path, &s.Generation, &inode, &s.Size, &s.Offset, &s.Line,
			&s.Fingerprint, &s.FingerprintLen, &s.Header, &s.Digest, &s.Rows, &s.Quarantined, &s.Missing, &updated); err != nil {
			return nil, fmt.Errorf("store: sources %s: %w", model, err)
		}
		s.Inode = decInode(inode)
		if len(s.Digest) == 0 {
			s.Digest = nil
		}
		s.UpdatedAt = decTime(updated)
		out = append(out, s)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: sources %s: %w", model, err)
	}
	return out, nil
}

// obsSelect reads the columns scanObs expects.
const obsSelect = `SELECT id, source_id, generation, line, raw, vals, t, arrived_at,
	leverage, residual, student_int, student_ext, cooks, dffits, dfbetas, covratio, outlier_p, verdict, flags, label
	FROM observations `

type scanner interface{ Scan(dest ...any) error }

// scanObs reads one row of obsSelect from rows (not a *sql.Row: the blobs
// are scanned as sql.RawBytes and decoded into fresh slices).
func scanObs(sc *sql.Rows, o *store.Observation, sourceID *int64) error {
	var (
		vals, dfb                 sql.RawBytes
		t, arrived                sql.NullInt64
		lev, res, si, se, ck, dff sql.NullFloat64
		cov, outp                 sql.NullFloat64
		verdict, flags            sql.NullString
	)
	if err := sc.Scan(&o.ID, sourceID, &o.Generation, &o.Line, &o.Raw, &vals, &t, &arrived,
		&lev, &res, &si, &se, &ck, &dff, &dfb, &cov, &outp, &verdict, &flags, &o.Label); err != nil {
		return err
	}
	var err error
	if o.Values, err = decFloats(vals); err != nil {
		return fmt.Errorf("observation %d values: %w", o.ID, err)
	}
	o.Time = decTime(t)
	o.ArrivedAt = decTime(arrived)
	o.Arrival = nil
	if verdict.Valid {
		d := &store.Diagnostics{
			Leverage:            decReal(lev),
			Residual:            decReal(res),
			StudentizedInternal: decReal(si),
			StudentizedExternal: decReal(se),
			CooksDistance:       decReal(ck),
			DFFITS:              decReal(dff),
			COVRATIO:            decReal(cov),
			OutlierPBonferroni:  decReal(outp),
			Verdict:             engine.Word(verdict.String),
		}
		if d.Flags, err = decFlags(flags); err != nil {
			return fmt.Errorf("observation %d: %w", o.ID, err)
		}
		if d.DFBETAS, err = decFloats(dfb); err != nil {
			return fmt.Errorf("observation %d DFBETAS: %w", o.ID, err)
		}
		o.Arrival = d
	}
	return nil
}

// sourcePaths maps the model's source ids to their paths.
func (db *DB) sourcePaths(ctx context.Context, modelID int64) (map[int64]string, error) {
	rows, err := db.db.QueryContext(ctx, "SELECT id, path FROM sources WHERE model_id = ?", modelID)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	m := make(map[int64]string)
	for rows.Next() {
		var id int64
		var p string
		if err := rows.Scan(&id, &p); err != nil {
			return nil, err
		}
		m[id] = p
	}
	return m, rows.Err()
}

// Observations returns the model's observations in ascending id order,
// after q.AfterID, at most q.Limit (<= 0: all), of one file when q.Path is
// set. An unknown model or path gives an empty result.
func (db *DB) Observations(ctx context.Context, model string, q store.ObsQuery) ([]store.Observation, error) {
	out, err := db.observations(ctx, model, q)
	if err != nil {
		return nil, fmt.Errorf("store: observations %s: %w", model, err)
	}
	return out, nil
}

func (db *DB) observations(ctx context.Context, model string, q store.ObsQuery) ([]store.Observation, error) {
	mid, ok, err := db.lookupModel(ctx, db.db, model)
	if err != nil || !ok {
		return nil, err
	}
	paths, err := db.sourcePaths(ctx, mid)
	if err != nil {
		return nil, err
	}
	limit := int64(q.Limit)
	if limit <= 0 {
		limit = -1
	}
	var rows *sql.Rows
	if q.Path == "" {
		rows, err = db.db.QueryContext(ctx, obsSelect+"WHERE model_id = ? AND id > ? ORDER BY id LIMIT ?", mid, q.AfterID, limit)
	} else {
		sid := int64(-1)
		for id, p := range paths {
			if p == q.Path {
				sid = id
			}
		}
		if sid < 0 {
			return nil, nil
		}
		rows, err = db.db.QueryContext(ctx, obsSelect+"WHERE model_id = ? AND id > ? AND source_id = ? ORDER BY id LIMIT ?",
			mid, q.AfterID, sid, limit)
	}
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []store.Observation
	for rows.Next() {
		o := store.Observation{Model: model}
		var sid int64
		if err := scanObs(rows, &o, &sid); err != nil {
			return nil, err
		}
		o.Path = paths[sid]
		out = append(out, o)
	}
	return out, rows.Err()
}

// ObservationAt returns the observation at the file's line in its newest
// generation holding that line, or an error wrapping store.ErrNotFound.
func (db *DB) ObservationAt(ctx context.Context, model, path string, line int) (store.Observation, error) {
	fail := func(err error) (store.Observation, error) {
		return store.Observation{}, fmt.Errorf("store: observation %s/%s:%d: %w", model, path, line, err)
	}
	// Query, not QueryRow: scanObs reads the blobs as sql.RawBytes.
	rows, err := db.db.QueryContext(ctx, obsSelect+`WHERE source_id = (SELECT s.id FROM sources s JOIN models m ON m.id = s.model_id
		WHERE m.name = ? AND s.path = ?) AND line = ? ORDER BY generation DESC LIMIT 1`, model, path, line)
	if err != nil {
		return fail(err)
	}
	defer rows.Close()
	if !rows.Next() {
		if err := rows.Err(); err != nil {
			return fail(err)
		}
		return fail(store.ErrNotFound)
	}
	o := store.Observation{Model: model, Path: path}
	var sid int64
	if err := scanObs(rows, &o, &sid); err != nil {
		return fail(err)
	}
	return o, nil
}

// CountObservations returns how many observations the model holds (0 for
// an unknown model).
func (db *DB) CountObservations(ctx context.Context, model string) (int64, error) {
	var n int64
	err := db.db.QueryRowContext(ctx, `SELECT COALESCE(SUM(s.rows_total), 0) FROM sources s JOIN models m ON m.id = s.model_id
		WHERE m.name = ?`, model).Scan(&n)
	if err != nil {
		return 0, fmt.Errorf("store: count observations %s: %w", model, err)
	}
	return n, nil
}
