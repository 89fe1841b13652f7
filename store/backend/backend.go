// Package backend opens plumb's history from the config's state setting:
// a postgres:// (or postgresql://) URL selects the PostgreSQL backend
// (store/postgres), anything else is the path of a SQLite file
// (store/sqlite), the embedded default that needs nothing.
//
//	db, err := backend.Open(ctx, cfg.State)
//
// The config file never holds a password: CheckState refuses a URL that
// carries one. The password comes from PGPASSWORD or the passfile
// (~/.pgpass, PGPASSFILE), which pgx reads as libpq does, or the whole URL
// comes from an environment variable (StateFromEnv). Describe gives the
// state for logs, status output and errors, with any password masked.
package backend

import (
	"context"
	"errors"
	"fmt"
	"os"

	"plumb/store"
	"plumb/store/postgres"
	"plumb/store/sqlite"
	"plumb/store/transfer"
)

// IsPostgres reports whether state names a PostgreSQL database rather
// than a SQLite file. A relative SQLite path is resolved against the
// config's folder by the caller; a URL is used as it is.
func IsPostgres(state string) bool { return postgres.IsURL(state) }

// Open opens (creating or migrating as needed) the history named by state:
// PostgreSQL for a postgres:// or postgresql:// URL, otherwise the SQLite
// file at that path.
func Open(ctx context.Context, state string) (store.Store, error) {
	if IsPostgres(state) {
		return postgres.Open(ctx, state)
	}
	return sqlite.Open(ctx, state)
}

// Describe returns state fit for logs, status and errors: a URL with
// every password masked, a path unchanged.
func Describe(state string) string {
	if IsPostgres(state) {
		return postgres.Redact(state)
	}
	return state
}

// ErrPasswordInConfig is returned (wrapped) by CheckState for a URL that
// carries a password.
var ErrPasswordInConfig = errors.New("the state URL carries a password; a config file must not")

// CheckState validates a state setting read from a config file: a URL
// must not carry a password (in its user part or a password parameter).
// The error names the ways to give one instead.
func CheckState(state string) error {
	if IsPostgres(state) && postgres.HasPassword(state) {
		return fmt.Errorf("state %s: %w: set PGPASSWORD or a passfile (~/.pgpass, PGPASSFILE) for the daemon's user, "+
			"or put the whole URL in an environment variable named by state_env", postgres.Redact(state), ErrPasswordInConfig)
	}
	return nil
}

// StateFromEnv returns the state named by the environment variable name
// (the config's state_env key): the whole URL, password included, kept
// out of the config file. An unset or empty variable is an error.
func StateFromEnv(name string) (string, error) {
	v, ok := os.LookupEnv(name)
	if !ok || v == "" {
		return "", fmt.Errorf("state_env names %s, but that environment variable is not set", name)
	}
	return v, nil
}

// Copy copies the history named by the state from into the one named by
// to (see transfer.Copy: idempotent, resumable, counts verified) and
// returns the report, whose String is what `plumb state copy` prints.
// A SQLite source must exist (it is not created); the target is created
// or migrated as Open does. Stop the daemons of both first.
func Copy(ctx context.Context, from, to string, opt transfer.Options) (transfer.Report, error) {
	if !IsPostgres(from) {
		if _, err := os.Stat(from); err != nil {
			return transfer.Report{}, fmt.Errorf("copy from %s: %w", from, err)
		}
	}
	if from == to {
		return transfer.Report{}, fmt.Errorf("copy from %s to itself", Describe(from))
	}
	src, err := Open(ctx, from)
	if err != nil {
		return transfer.Report{}, err
	}
	defer src.Close()
	dst, err := Open(ctx, to)
	if err != nil {
		return transfer.Report{}, err
	}
	defer dst.Close()
	rep, err := transfer.Copy(ctx, src, dst, opt)
	if err != nil {
		return rep, fmt.Errorf("copy %s to %s: %w", Describe(from), Describe(to), err)
	}
	return rep, nil
}
