// Package postgres is the PostgreSQL backend of plumb's history, on
// github.com/jackc/pgx/v5 and its connection pool (pure Go). Several
// daemons, one per production line or bench, can share one database:
//
//	db, err := postgres.Open(ctx, "postgres://plumb@db.example:5432/plumb?sslmode=verify-full")
//	if err != nil { ... }
//	defer db.Close()
//
// # Connecting
//
// The URL is pgx's: postgres://user@host:port/database?param=value, or
// the keyword form "host=... dbname=...". The password never needs to be
// in it: pgx reads PGPASSWORD and the passfile (PGPASSFILE, default
// ~/.pgpass) as libpq does, and the other PG* variables (PGHOST,
// PGSSLMODE, ...) fill what the URL leaves out. Redact gives a URL fit for
// logs and errors; every error of this package shows the URL redacted.
//
// # Schema
//
// The schema is versioned like the SQLite backend's: migrations/NNNN_name.sql
// are embedded in the binary and applied in order in one transaction, each
// recorded in the table schema_version. The transaction first takes a
// transaction-level advisory lock, so several daemons starting at once
// migrate one after the other (the later ones find nothing to do). A
// database migrated by a newer plumb is refused with ErrSchemaTooNew.
// The tables live in the connection's current schema (search_path); the
// option WithSchema chooses (and creates) another.
//
// The role that runs the daemon needs CONNECT on the database and, for
// the first start and upgrades, CREATE on the schema; after that, SELECT,
// INSERT, UPDATE on the tables and USAGE on the sequences are enough
// (README: "Scaling beyond one machine").
//
// # Exactly once
//
// Ingest commits a batch's observations, its quarantined rows and the
// source's new read position in one transaction, as the SQLite backend
// does. The transaction locks the model's row (FOR NO KEY UPDATE) before it
// reads the stored position, so batches of one model commit one at a time
// in every process that shares the database, and the ids of one model's
// observations increase in commit order. Rows are written with COPY.
//
// Times are UTC unix nanoseconds, like the SQLite backend's, so a history
// copied from one to the other is the same to the nanosecond.
//
// # Several daemons
//
// Beyond store.Store, a DB offers what a fleet sharing the database needs:
// Acquire makes the calling daemon the owner of a model (a session-level
// advisory lock; a standby waits and takes over when the owner's session
// ends, see own.go), Owners and Fleet show every model of every daemon
// with its owner and whether that owner is alive, ClaimDeliveries hands
// each due outbox entry to one daemon (FOR UPDATE SKIP LOCKED), Models
// lists every model, and Ping tells a readiness probe whether the server
// answers.
//
// # Decisions and the audit trail
//
// A DB is also a store.Decisions (decide.go, migration 0004): the same
// tables, refusals and hash chain as the SQLite backend's (store.Seal
// seals every record), the trail, decisions and re-baselines refusing
// UPDATE, DELETE and TRUNCATE and quiet periods DELETE by trigger. Every
// transaction that appends to the trail first takes the schema's
// transaction-level advisory lock, so the daemons and command lines that
// share the database append one after the other and no two records get
// the same number. None of this needs DELETE. ExportDecisions and
// ImportDecisions let store/transfer copy the trail verbatim.
//
// # Encoding
//
// A verdict word and the crossed cutoffs are encoded in codec.go only
// (encVerdict, encFlags and their inverses), TEXT columns today.
package postgres

import (
	"context"
	"embed"
	"errors"
	"fmt"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"

	"plumb/store"
	migrate "plumb/store/internal/migrations"
)

//go:embed migrations/*.sql
var migrationFS embed.FS

// ErrSchemaTooNew is returned (wrapped) by Open when the database was
// migrated by a newer version of plumb than this binary.
var ErrSchemaTooNew = errors.New("database schema is newer than this binary supports")

// migrateLockKey is the advisory lock (bigint form) that serialises
// migrations of every plumb schema in one database. Advisory locks are
// per database, so another application's key could only collide by
// choosing the same number.
const migrateLockKey int64 = 0x706c756d62_0001 // "plumb", 1

var _ store.Store = (*DB)(nil)

// DB is a plumb history in a PostgreSQL database. It is safe for use by
// multiple goroutines, and several processes may share the database.
type DB struct {
	pool *pgxpool.Pool
	// where is the redacted URL, for errors.
	where string
	now   func() time.Time
	// connConfig makes the lease connections (outside the pool); schema
	// is the current schema, part of the model lock keys.
	connConfig *pgx.ConnConfig
	schema     string

	// models caches committed model name -> id (models are never deleted).
	mmu    sync.RWMutex
	models map[string]int64
}

// Option configures Open.
type Option func(*config)

type config struct {
	now      func() time.Time
	schema   string
	maxConns int32
}

// WithClock sets the clock used for timestamps the caller left zero (for
// instance Source.UpdatedAt or Delivery.UpdatedAt). The default is time.Now.
func WithClock(now func() time.Time) Option {
	return func(c *config) { c.now = now }
}

// WithSchema keeps the tables in the named schema (created if missing,
// which needs CREATE on the database) instead of the connection's current
// schema. Tests use it to give each test an empty history.
func WithSchema(name string) Option {
	return func(c *config) { c.schema = name }
}

// WithMaxConns limits the connection pool (default: pgxpool's, the larger
// of 4 and the number of CPUs, unless the URL sets pool_max_conns).
func WithMaxConns(n int) Option {
	return func(c *config) { c.maxConns = int32(n) }
}

// Open connects to the database at url, applies any pending migrations and
// returns the history. It fails if the server cannot be reached (after the
// context's deadline, or pgx's connect_timeout).
func Open(ctx context.Context, url string, opts ...Option) (*DB, error) {
	cfg := config{now: time.Now}
	for _, o := range opts {
		o(&cfg)
	}
	where := Redact(url)
	pcfg, err := pgxpool.ParseConfig(url)
	if err != nil {
		// pgx's parse errors may quote the URL; do not pass them on.
		return nil, fmt.Errorf("store: open %s: %s", where, parseProblem(err))
	}
	if _, ok := pcfg.ConnConfig.RuntimeParams["application_name"]; !ok {
		pcfg.ConnConfig.RuntimeParams["application_name"] = "plumb"
	}
	// plumb's statements are short lookups: compiling one (JIT, on by
	// default from PostgreSQL 12 when the planner's estimate is high, as
	// it is on tables not yet analysed) costs more than running it.
	if _, ok := pcfg.ConnConfig.RuntimeParams["jit"]; !ok {
		pcfg.ConnConfig.RuntimeParams["jit"] = "off"
	}
	if cfg.schema != "" {
		pcfg.ConnConfig.RuntimeParams["search_path"] = cfg.schema
	}
	if cfg.maxConns > 0 {
		pcfg.MaxConns = cfg.maxConns
	}
	pool, err := pgxpool.NewWithConfig(ctx, pcfg)
	if err != nil {
		return nil, fmt.Errorf("store: open %s: %w", where, err)
	}
	db := &DB{pool: pool, where: where, now: cfg.now, models: make(map[string]int64), connConfig: pcfg.ConnConfig}
	if err := db.migrate(ctx, cfg.schema); err != nil {
		pool.Close()
		return nil, fmt.Errorf("store: open %s: %w", where, err)
	}
	if err := pool.QueryRow(ctx, "SELECT current_schema()").Scan(&db.schema); err != nil {
		pool.Close()
		return nil, fmt.Errorf("store: open %s: %w", where, err)
	}
	return db, nil
}

// parseProblem says what is wrong with a URL pgx could not parse. pgx's
// own message quotes the URL with a best-effort mask, so it is not passed on.
func parseProblem(error) string {
	return "cannot parse the connection URL (the form is postgres://user@host:port/database?sslmode=...)"
}

// Close releases the pool's connections. Callers stop using the DB first.
func (db *DB) Close() error {
	db.pool.Close()
	return nil
}

// Pool returns the connection pool, for read-only queries by operators'
// tools and tests. Writing through it bypasses the store's invariants.
func (db *DB) Pool() *pgxpool.Pool { return db.pool }

// String returns the database's redacted URL.
func (db *DB) String() string { return db.where }

// migrations returns the embedded migrations in version order.
func migrations() ([]migrate.Migration, error) { return migrate.Load(migrationFS, "migrations") }

// LatestSchemaVersion is the schema version this binary migrates to.
func LatestSchemaVersion() int {
	ms, err := migrations()
	if err != nil {
		return 0
	}
	return migrate.Latest(ms)
}

// SchemaVersion returns the highest migration applied to the database.
func (db *DB) SchemaVersion(ctx context.Context) (int, error) {
	var v int
	if err := db.pool.QueryRow(ctx, "SELECT COALESCE(MAX(version), 0) FROM schema_version").Scan(&v); err != nil {
		return 0, fmt.Errorf("store: schema version: %w", err)
	}
	return v, nil
}

func (db *DB) migrate(ctx context.Context, schema string) error {
	ms, err := migrations()
	if err != nil {
		return err
	}
	return pgx.BeginFunc(ctx, db.pool, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, "SELECT pg_advisory_xact_lock($1)", migrateLockKey); err != nil {
			return fmt.Errorf("migrate: lock: %w", err)
		}
		// Create only what is missing: CREATE ... IF NOT EXISTS checks the
		// CREATE privilege before it looks, and a daemon's role may hold
		// none once the schema is in place.
		if schema != "" {
			var have bool
			if err := tx.QueryRow(ctx, "SELECT EXISTS (SELECT 1 FROM pg_namespace WHERE nspname = $1)", schema).Scan(&have); err != nil {
				return fmt.Errorf("migrate: schema %s: %w", schema, err)
			}
			if !have {
				if _, err := tx.Exec(ctx, "CREATE SCHEMA "+pgx.Identifier{schema}.Sanitize()); err != nil {
					return fmt.Errorf("migrate: schema %s: %w", schema, err)
				}
			}
		}
		var haveVersions bool
		if err := tx.QueryRow(ctx, "SELECT to_regclass('schema_version') IS NOT NULL").Scan(&haveVersions); err != nil {
			return fmt.Errorf("migrate: %w", err)
		}
		if !haveVersions {
			if _, err := tx.Exec(ctx, `CREATE TABLE schema_version (
				version    INTEGER PRIMARY KEY,
				name       TEXT    NOT NULL,
				applied_at BIGINT  NOT NULL)`); err != nil {
				return fmt.Errorf("migrate: %w", err)
			}
		}
		var cur int
		if err := tx.QueryRow(ctx, "SELECT COALESCE(MAX(version), 0) FROM schema_version").Scan(&cur); err != nil {
			return fmt.Errorf("migrate: %w", err)
		}
		latest := migrate.Latest(ms)
		if cur > latest {
			return fmt.Errorf("migrate: database is at schema version %d, this binary knows up to %d (upgrade plumb): %w",
				cur, latest, ErrSchemaTooNew)
		}
		// Every migration not yet recorded is applied, in version order,
		// also one below the highest recorded: numbers are handed out to
		// changes made side by side and branches merge in any order, so a
		// database may hold 0006 before 0005 arrives; each step stands alone.
		rows, err := tx.Query(ctx, "SELECT version FROM schema_version")
		if err != nil {
			return fmt.Errorf("migrate: %w", err)
		}
		vs, err := pgx.CollectRows(rows, pgx.RowTo[int32])
		if err != nil {
			return fmt.Errorf("migrate: %w", err)
		}
		applied := map[int]bool{}
		for _, v := range vs {
			applied[int(v)] = true
		}
		for _, m := range ms {
			if applied[m.Version] {
				continue
			}
			if _, err := tx.Exec(ctx, m.SQL); err != nil {
				return fmt.Errorf("migrate: apply %s: %w", m.Name, err)
			}
			if _, err := tx.Exec(ctx, "INSERT INTO schema_version (version, name, applied_at) VALUES ($1, $2, $3)",
				m.Version, m.Name, db.now().UTC().UnixNano()); err != nil {
				return fmt.Errorf("migrate: record %s: %w", m.Name, err)
			}
		}
		return nil
	})
}

// cachedModelID returns the id of a committed model, or 0, false.
func (db *DB) cachedModelID(name string) (int64, bool) {
	db.mmu.RLock()
	id, ok := db.models[name]
	db.mmu.RUnlock()
	return id, ok
}

func (db *DB) cacheModelID(name string, id int64) {
	db.mmu.Lock()
	db.models[name] = id
	db.mmu.Unlock()
}

// querier is what the pool and a transaction have in common.
type querier interface {
	Query(ctx context.Context, sql string, args ...any) (pgx.Rows, error)
	QueryRow(ctx context.Context, sql string, args ...any) pgx.Row
	Exec(ctx context.Context, sql string, args ...any) (pgconn.CommandTag, error)
}

// lookupModel returns the id of an existing model; ok is false if the
// model is unknown.
func (db *DB) lookupModel(ctx context.Context, q querier, name string) (id int64, ok bool, err error) {
	if id, ok := db.cachedModelID(name); ok {
		return id, true, nil
	}
	err = q.QueryRow(ctx, "SELECT id FROM models WHERE name = $1", name).Scan(&id)
	if errors.Is(err, pgx.ErrNoRows) {
		return 0, false, nil
	}
	if err != nil {
		return 0, false, err
	}
	db.cacheModelID(name, id)
	return id, true, nil
}

// ensureModel returns the model's id, creating the model within tx if
// needed (another process may create it at the same time: the insert then
// waits for it and does nothing). The second result reports whether the id
// may only be cached once tx commits.
func (db *DB) ensureModel(ctx context.Context, tx pgx.Tx, name string) (int64, bool, error) {
	id, ok, err := db.lookupModel(ctx, tx, name)
	if err != nil || ok {
		return id, false, err
	}
	err = tx.QueryRow(ctx, "INSERT INTO models (name) VALUES ($1) ON CONFLICT (name) DO NOTHING RETURNING id", name).Scan(&id)
	if errors.Is(err, pgx.ErrNoRows) {
		err = tx.QueryRow(ctx, "SELECT id FROM models WHERE name = $1", name).Scan(&id)
	}
	return id, true, err
}

// sqlLimit maps "<= 0: all" to LIMIT NULL.
func sqlLimit(n int) any {
	if n <= 0 {
		return nil
	}
	return int64(n)
}

// isUnique reports whether err is a unique violation (SQLSTATE 23505).
func isUnique(err error) bool {
	var pe *pgconn.PgError
	return errors.As(err, &pe) && pe.Code == "23505"
}

// Ping checks that the server answers, for a readiness probe: while the
// server is down or restarting it returns an error (naming the redacted
// URL), and the pool reconnects by itself once the server is back.
func (db *DB) Ping(ctx context.Context) error {
	if err := db.pool.Ping(ctx); err != nil {
		return fmt.Errorf("store: %s: %w", db.where, err)
	}
	return nil
}
