package postgres

import (
	"context"
	"errors"
	"fmt"
	"hash/fnv"
	"os"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
)

// Ownership of a model among daemons sharing one database.
//
// Each model is owned by one daemon at a time. The owner holds a
// session-level advisory lock keyed by the model's name (and the schema)
// on a connection of its own, outside the pool. A second daemon
// configured with the same model (a standby on another host) waits in
// Acquire, trying the lock every poll interval. The lock goes when the
// owner's session ends:
//
//   - the owner process exits or is killed: its connection closes and the
//     server ends the session at once, so the standby takes over within
//     one poll interval (DefaultPoll, 1 s);
//   - the owner's host dies or is cut off: the server notices the silent
//     connection by TCP keepalive, which the lease connection sets to
//     probe after 10 s idle, every 5 s, 3 times: the standby takes over
//     within about 25 s plus one poll interval.
//
// The new owner continues from the committed read positions. Ownership
// avoids two daemons doing the same work (and raising the same alerts);
// it is not what keeps rows from being stored twice: Ingest's read
// position check does that under any interleaving, even if two daemons
// briefly both believe they own a model (a lost lease is reported on
// Lease.Lost, which the daemon must watch and stop the model's pipeline).

// DefaultPoll is how often a waiting Acquire tries the lock.
const DefaultPoll = time.Second

// Owner says who a daemon is, for the fleet view.
type Owner struct {
	Host  string
	PID   int
	Label string // free text, for instance the config file's path
}

// ThisProcess returns the Owner of the calling process: the host name and
// process id, with the given label.
func ThisProcess(label string) Owner {
	h, _ := os.Hostname()
	return Owner{Host: h, PID: os.Getpid(), Label: label}
}

// Ownership is one model's owner as recorded, and whether the owner's
// session still holds the model's lock.
type Ownership struct {
	Model string
	Owner
	Since time.Time
	Alive bool
}

// Lease is a model owned by this process. Release it when the model is
// dropped; Lost is closed if the lease connection fails (the server
// restarted, the network went), after which another daemon may own the
// model: stop its pipeline, then Acquire again.
type Lease struct {
	db    *DB
	model string
	key   int64
	conn  *pgx.Conn
	lost  chan struct{}
	stop  chan struct{}
	done  chan struct{}
	once  sync.Once
	mu    sync.Mutex // guards conn use between the watchdog and Release
}

// lockKey is the 64-bit advisory lock key of a model: FNV-1a of the
// schema and the name.
func (db *DB) lockKey(model string) int64 {
	h := fnv.New64a()
	h.Write([]byte("plumb model\x00" + db.schema + "\x00" + model))
	return int64(h.Sum64())
}

// AcquireOptions tunes Acquire.
type AcquireOptions struct {
	// Poll is how often to try the lock while another daemon owns the
	// model (DefaultPoll when zero).
	Poll time.Duration
	// Waiting, when set, is called once when the model turns out to be
	// owned by another daemon, with that owner as recorded.
	Waiting func(Ownership)
	// Check is how often the lease connection is checked (5 s when zero).
	Check time.Duration
}

// Acquire makes this process the owner of model, waiting while another
// daemon owns it, until ctx ends (then it returns ctx's error).
func (db *DB) Acquire(ctx context.Context, model string, who Owner, opt AcquireOptions) (*Lease, error) {
	fail := func(err error) (*Lease, error) { return nil, fmt.Errorf("store: own model %s: %w", model, err) }
	if opt.Poll <= 0 {
		opt.Poll = DefaultPoll
	}
	if opt.Check <= 0 {
		opt.Check = 5 * time.Second
	}
	cfg := db.connConfig.Copy()
	// Let the server find a vanished client within about 25 s.
	cfg.RuntimeParams["tcp_keepalives_idle"] = "10"
	cfg.RuntimeParams["tcp_keepalives_interval"] = "5"
	cfg.RuntimeParams["tcp_keepalives_count"] = "3"
	cfg.RuntimeParams["application_name"] = "plumb owner of " + model
	conn, err := pgx.ConnectConfig(ctx, cfg)
	if err != nil {
		return fail(err)
	}
	key := db.lockKey(model)
	told := false
	for {
		var ok bool
		if err := conn.QueryRow(ctx, "SELECT pg_try_advisory_lock($1)", key).Scan(&ok); err != nil {
			conn.Close(context.Background())
			return fail(err)
		}
		if ok {
			break
		}
		if !told && opt.Waiting != nil {
			told = true
			if o, err := db.owner(ctx, model); err == nil {
				opt.Waiting(o)
			}
		}
		select {
		case <-ctx.Done():
			conn.Close(context.Background())
			return fail(ctx.Err())
		case <-time.After(opt.Poll):
		}
	}
	_, err = conn.Exec(ctx, `INSERT INTO model_owners (model, lock_key, host, pid, label, backend_pid, since)
		VALUES ($1, $2, $3, $4, $5, pg_backend_pid(), $6)
		ON CONFLICT (model) DO UPDATE SET lock_key = excluded.lock_key, host = excluded.host, pid = excluded.pid,
			label = excluded.label, backend_pid = excluded.backend_pid, since = excluded.since`,
		model, key, who.Host, who.PID, who.Label, db.now().UTC().UnixNano())
	if err != nil {
		conn.Close(context.Background())
		return fail(err)
	}
	l := &Lease{db: db, model: model, key: key, conn: conn,
		lost: make(chan struct{}), stop: make(chan struct{}), done: make(chan struct{})}
	go l.watch(opt.Check)
	return l, nil
}

// watch checks the lease connection every interval and closes lost when
// it fails.
func (l *Lease) watch(every time.Duration) {
	defer close(l.done)
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		select {
		case <-l.stop:
			return
		case <-t.C:
		}
		ctx, cancel := context.WithTimeout(context.Background(), every)
		l.mu.Lock()
		err := l.conn.Ping(ctx)
		l.mu.Unlock()
		cancel()
		if err != nil {
			close(l.lost)
			return
		}
	}
}

// Model returns the leased model's name.
func (l *Lease) Model() string { return l.model }

// Lost is closed when the lease connection fails: the lock may now be
// another daemon's.
func (l *Lease) Lost() <-chan struct{} { return l.lost }

// Release gives the model up: the lock is released and the lease
// connection closed (the owner row stays, marked not alive, until the
// next owner replaces it).
func (l *Lease) Release(ctx context.Context) error {
	var err error
	l.once.Do(func() {
		close(l.stop)
		<-l.done
		l.mu.Lock()
		defer l.mu.Unlock()
		select {
		case <-l.lost:
		default:
			_, err = l.conn.Exec(ctx, "SELECT pg_advisory_unlock($1)", l.key)
		}
		if cerr := l.conn.Close(ctx); err == nil {
			err = cerr
		}
	})
	if err != nil {
		return fmt.Errorf("store: release model %s: %w", l.model, err)
	}
	return nil
}

// ownersSelect reads the owner rows with whether the recorded session
// still holds the model's lock (a bigint advisory lock shows in pg_locks
// as classid = high 32 bits, objid = low 32 bits, objsubid = 1).
const ownersSelect = `SELECT o.model, o.host, o.pid, o.label, o.since,
	EXISTS (SELECT 1 FROM pg_locks l WHERE l.locktype = 'advisory' AND l.granted AND l.objsubid = 1
		AND l.pid = o.backend_pid
		AND l.database = (SELECT oid FROM pg_database WHERE datname = current_database())
		AND ((l.classid::bigint << 32) | l.objid::bigint) = o.lock_key) AS alive
	FROM model_owners o `

func scanOwnership(r pgx.Row) (Ownership, error) {
	var o Ownership
	var since pgtype.Int8
	err := r.Scan(&o.Model, &o.Host, &o.PID, &o.Label, &since, &o.Alive)
	o.Since = decTime(since)
	return o, err
}

// Owners returns the recorded owner of every model that has had one,
// sorted by model, each with whether it is alive (its session holds the
// model's lock now).
func (db *DB) Owners(ctx context.Context) ([]Ownership, error) {
	rows, err := db.pool.Query(ctx, ownersSelect+"ORDER BY o.model")
	if err != nil {
		return nil, fmt.Errorf("store: owners: %w", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Ownership, error) { return scanOwnership(r) })
	if err != nil {
		return nil, fmt.Errorf("store: owners: %w", err)
	}
	return out, nil
}

// owner returns one model's recorded owner.
func (db *DB) owner(ctx context.Context, model string) (Ownership, error) {
	o, err := scanOwnership(db.pool.QueryRow(ctx, ownersSelect+"WHERE o.model = $1", model))
	if errors.Is(err, pgx.ErrNoRows) {
		return Ownership{Model: model}, nil
	}
	return o, err
}
