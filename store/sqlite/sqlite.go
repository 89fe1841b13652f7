// Package sqlite is the SQLite backend of plumb's history, built on the
// pure-Go modernc.org/sqlite driver (no cgo).
//
// Open creates or opens a database file, applies the embedded schema
// migrations and returns a *DB that satisfies store.Store:
//
//	db, err := sqlite.Open(ctx, "/var/lib/plumb/history.db")
//	if err != nil { ... }
//	defer db.Close()
//
// # Connections
//
// Every pooled connection runs in WAL mode with synchronous=NORMAL, a busy
// timeout of five seconds and foreign keys on. Write transactions begin
// IMMEDIATE and are also serialised inside the process, so readers never
// block a writer and a writer never fails on a stale snapshot. A DB is safe
// for use by multiple goroutines.
//
// In WAL mode with synchronous=NORMAL a committed transaction survives a
// crash of the process; a power loss may lose the last transactions before
// a checkpoint, but never leaves a transaction half applied.
//
// # Schema
//
// The schema is versioned: migrations/NNNN_name.sql are embedded in the
// binary and applied in order inside one transaction, each recorded in the
// schema_version table. Opening an up-to-date database applies nothing.
// Opening a database written by a newer plumb fails with ErrSchemaTooNew
// rather than guess at a schema it does not know.
//
// Observation values and vector diagnostics are stored as BLOBs of
// little-endian float64s; scalar diagnostics as REAL columns with NaN
// stored as NULL. Times are UTC unix nanoseconds, so they round-trip
// exactly between the years 1678 and 2261; a time outside that range is an
// error. The zero time is stored as NULL.
//
// # Backups
//
// DB.Backup writes a consistent copy of the live database to a new file
// with VACUUM INTO while the daemon keeps running; a command wired in cmd
// (or a timer) calls it. From outside the process the same statement,
// VACUUM INTO '/path/to/copy.db', run on the live file by any SQLite shell,
// is equally safe. Copying the database file with cp is not safe while
// the daemon writes: the -wal file beside it holds committed transactions
// that a copy of the main file misses. To restore, stop the daemon, put the
// backup in place of the database file and remove any -wal and -shm files
// left beside it.
//
// # Storage
//
// An observation is written once. A refit writes its summary and one row
// per verdict that changed, never the observations again, so the file
// grows with rows ingested, not rows x fits. TestBytesPerObservation
// measures about 230 bytes per p = 3 observation with arrival diagnostics
// and a 33-byte source line, indexes included.
package sqlite

import (
	"context"
	"database/sql"
	"embed"
	"errors"
	"fmt"
	"strings"
	"sync"
	"time"

	"plumb/store"
	migrate "plumb/store/internal/migrations"

	_ "modernc.org/sqlite" // registers the "sqlite" driver (the only package that imports it)
)

//go:embed migrations/*.sql
var migrationFS embed.FS

// ErrSchemaTooNew is returned (wrapped) by Open when the database was
// migrated by a newer version of plumb than this binary.
var ErrSchemaTooNew = errors.New("database schema is newer than this binary supports")

// DSN parameters applied to every pooled connection.
const dsnParams = "_pragma=busy_timeout(5000)&_pragma=journal_mode(WAL)" +
	"&_pragma=synchronous(NORMAL)&_pragma=foreign_keys(1)&_txlock=immediate"

var _ store.Store = (*DB)(nil)

// DB is a plumb history kept in one SQLite file. It is safe for use by
// multiple goroutines.
type DB struct {
	db   *sql.DB
	path string
	now  func() time.Time

	// wsem (capacity 1) serialises write transactions within the
	// process; waiting for it respects the caller's context.
	wsem chan struct{}

	// models caches committed model name -> id (models are never deleted).
	mmu    sync.RWMutex
	models map[string]int64

	stmtMu sync.Mutex
	stmts  *ingestStmts
}

// Option configures Open.
type Option func(*config)

type config struct {
	now          func() time.Time
	maxOpenConns int
}

// WithClock sets the clock used for timestamps the caller left zero (for
// instance Source.UpdatedAt or Delivery.UpdatedAt). The default is time.Now.
func WithClock(now func() time.Time) Option {
	return func(c *config) { c.now = now }
}

// WithMaxOpenConns limits the connection pool (default 4). Readers use the
// pool concurrently; writers take turns.
func WithMaxOpenConns(n int) Option {
	return func(c *config) { c.maxOpenConns = n }
}

// Open opens (creating if needed) the SQLite database at path and applies
// any pending migrations.
func Open(ctx context.Context, path string, opts ...Option) (*DB, error) {
	cfg := config{now: time.Now, maxOpenConns: 4}
	for _, o := range opts {
		o(&cfg)
	}
	if path == "" || strings.ContainsRune(path, '?') || strings.HasPrefix(path, "file:") || path == ":memory:" {
		return nil, fmt.Errorf("store: open %q: need a plain file path (no '?', no URI, no :memory:)", path)
	}
	sdb, err := sql.Open("sqlite", path+"?"+dsnParams)
	if err != nil {
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	if cfg.maxOpenConns > 0 {
		sdb.SetMaxOpenConns(cfg.maxOpenConns)
		sdb.SetMaxIdleConns(cfg.maxOpenConns)
	}
	db := &DB{db: sdb, path: path, now: cfg.now, wsem: make(chan struct{}, 1), models: make(map[string]int64)}
	if err := db.migrate(ctx); err != nil {
		sdb.Close()
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	return db, nil
}

// Close releases the database. It does not wait for calls in progress to
// be cancelled; callers stop using the DB first.
func (db *DB) Close() error {
	db.stmtMu.Lock()
	if db.stmts != nil {
		db.stmts.close()
		db.stmts = nil
	}
	db.stmtMu.Unlock()
	if err := db.db.Close(); err != nil {
		return fmt.Errorf("store: close %s: %w", db.path, err)
	}
	return nil
}

// Backup writes a consistent snapshot of the database to the new file dst
// (which must not exist, or be empty) with VACUUM INTO. It runs online: the
// copy is one read transaction, so in WAL mode readers and writers carry
// on, and the backup holds exactly the transactions committed when it
// began. The copy is compacted and is itself a complete database.
func (db *DB) Backup(ctx context.Context, dst string) error {
	if _, err := db.db.ExecContext(ctx, "VACUUM INTO ?", dst); err != nil {
		return fmt.Errorf("store: backup %s to %s: %w", db.path, dst, err)
	}
	return nil
}

// SchemaVersion returns the highest migration applied to the database.
func (db *DB) SchemaVersion(ctx context.Context) (int, error) {
	var v int
	err := db.db.QueryRowContext(ctx, "SELECT COALESCE(MAX(version), 0) FROM schema_version").Scan(&v)
	if err != nil {
		return 0, fmt.Errorf("store: schema version: %w", err)
	}
	return v, nil
}

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

func (db *DB) migrate(ctx context.Context) error {
	ms, err := migrations()
	if err != nil {
		return err
	}
	if err := db.lockWrite(ctx); err != nil {
		return fmt.Errorf("migrate: %w", err)
	}
	defer db.unlockWrite()
	tx, err := db.db.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("migrate: %w", err)
	}
	defer tx.Rollback()
	if _, err := tx.ExecContext(ctx, `CREATE TABLE IF NOT EXISTS schema_version (
		version    INTEGER PRIMARY KEY,
		name       TEXT    NOT NULL,
		applied_at INTEGER NOT NULL)`); err != nil {
		return fmt.Errorf("migrate: %w", err)
	}
	var cur int
	if err := tx.QueryRowContext(ctx, "SELECT COALESCE(MAX(version), 0) FROM schema_version").Scan(&cur); err != nil {
		return fmt.Errorf("migrate: %w", err)
	}
	latest := migrate.Latest(ms)
	if cur > latest {
		return fmt.Errorf("migrate: database is at schema version %d, this binary knows up to %d (upgrade plumb or open a backup): %w",
			cur, latest, ErrSchemaTooNew)
	}
	// Every migration not yet recorded is applied, in version order, also
	// one below the highest recorded: numbers are handed out to changes
	// made side by side and branches merge in any order, so a database may
	// hold 0006 before 0005 arrives; each step stands on its own.
	applied := map[int]bool{}
	rows, err := tx.QueryContext(ctx, "SELECT version FROM schema_version")
	if err != nil {
		return fmt.Errorf("migrate: %w", err)
	}
	for rows.Next() {
		var v int
		if err := rows.Scan(&v); err != nil {
			rows.Close()
			return fmt.Errorf("migrate: %w", err)
		}
		applied[v] = true
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return fmt.Errorf("migrate: %w", err)
	}
	for _, m := range ms {
		if applied[m.Version] {
			continue
		}
		if _, err := tx.ExecContext(ctx, m.SQL); err != nil {
			return fmt.Errorf("migrate: apply %s: %w", m.Name, err)
		}
		if _, err := tx.ExecContext(ctx, "INSERT INTO schema_version (version, name, applied_at) VALUES (?, ?, ?)",
			m.Version, m.Name, db.now().UTC().UnixNano()); err != nil {
			return fmt.Errorf("migrate: record %s: %w", m.Name, err)
		}
	}
	if err := tx.Commit(); err != nil {
		return fmt.Errorf("migrate: commit: %w", err)
	}
	return nil
}

// write runs fn in an IMMEDIATE transaction, serialised with the other
// writers of this process, and commits it when fn returns nil.
func (db *DB) write(ctx context.Context, fn func(tx *sql.Tx) error) error {
	if err := db.lockWrite(ctx); err != nil {
		return err
	}
	defer db.unlockWrite()
	tx, err := db.db.BeginTx(ctx, nil)
	if err != nil {
		return err
	}
	if err := fn(tx); err != nil {
		tx.Rollback()
		return err
	}
	return tx.Commit()
}

func (db *DB) lockWrite(ctx context.Context) error {
	select {
	case db.wsem <- struct{}{}:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

func (db *DB) unlockWrite() { <-db.wsem }

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

// lookupModel returns the id of an existing model; ok is false if the model
// is unknown.
func (db *DB) lookupModel(ctx context.Context, q queryer, name string) (id int64, ok bool, err error) {
	if id, ok := db.cachedModelID(name); ok {
		return id, true, nil
	}
	err = q.QueryRowContext(ctx, "SELECT id FROM models WHERE name = ?", name).Scan(&id)
	if errors.Is(err, sql.ErrNoRows) {
		return 0, false, nil
	}
	if err != nil {
		return 0, false, err
	}
	db.cacheModelID(name, id)
	return id, true, nil
}

// ensureModel returns the model's id, creating the model within tx if
// needed. The second result reports whether the id is newly created (and so
// may only be cached once tx commits).
func (db *DB) ensureModel(ctx context.Context, tx *sql.Tx, name string) (int64, bool, error) {
	id, ok, err := db.lookupModel(ctx, tx, name)
	if err != nil || ok {
		return id, false, err
	}
	res, err := tx.ExecContext(ctx, "INSERT INTO models (name) VALUES (?)", name)
	if err != nil {
		return 0, false, err
	}
	id, err = res.LastInsertId()
	return id, true, err
}

// queryer is what *sql.DB and *sql.Tx have in common for reads.
type queryer interface {
	QueryRowContext(ctx context.Context, query string, args ...any) *sql.Row
	QueryContext(ctx context.Context, query string, args ...any) (*sql.Rows, error)
}

// DB returns the underlying *sql.DB for read-only queries by operators'
// tools and tests. Writing through it bypasses the store's invariants.
func (db *DB) DB() *sql.DB { return db.db }
