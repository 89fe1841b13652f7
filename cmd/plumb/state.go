package main

import (
	"context"
	"fmt"
	"os"

	"plumb/store/backend"
	"plumb/store/transfer"
)

func init() {
	register(command{
		name:    "state",
		summary: "move a history between state databases (state copy --from A --to B)",
		run:     runState,
	})
}

// stateReady checks that a command reading the state has something to
// read: a SQLite file must exist (a URL is checked when it is opened).
func stateReady(state string) error {
	if backend.IsPostgres(state) {
		return nil
	}
	if _, err := os.Stat(state); err != nil {
		return fmt.Errorf("state database %s: %w (has plumb run started yet?)", state, err)
	}
	return nil
}

func runState(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "state", "copy --from STATE --to STATE",
		"state copy copies every model's history (observations, quarantined rows, fits,\n"+
			"verdict changes, read positions, model states, alerts and their outbox, decisions\n"+
			"and the audit trail, record for record) from one state database to another: a\n"+
			"SQLite file or a PostgreSQL URL on either side. It is safe to run again: what is\n"+
			"already there is checked, not copied twice. A target holding a different audit\n"+
			"trail is refused. It prints the counts it verified and the trail's head. Stop the\n"+
			"daemon writing the source first.")
	from := fs.String("from", "", "the state to copy from (SQLite path or PostgreSQL URL)")
	to := fs.String("to", "", "the state to copy to (SQLite path or PostgreSQL URL)")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 || pos[0] != "copy" {
		fs.Usage()
		return fmt.Errorf("state: %w: want \"plumb state copy --from STATE --to STATE\"", errUsage)
	}
	if *from == "" || *to == "" {
		fs.Usage()
		return fmt.Errorf("state copy: %w: both --from and --to are needed", errUsage)
	}
	for _, s := range []string{*from, *to} {
		if err := backend.CheckState(s); err != nil {
			return fmt.Errorf("state copy: a password on the command line shows in the process list: %w", err)
		}
	}
	rep, err := backend.Copy(ctx, *from, *to, transfer.Options{})
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "copied %s to %s\n%s", backend.Describe(*from), backend.Describe(*to), rep.String())
	return nil
}
