package main

import (
	"context"
	"fmt"

	"plumb/cmd/plumb/internal/config"
	"plumb/store"
	"plumb/store/postgres"
)

// The fleet view of the commands: with a shared PostgreSQL store,
// status, alerts and report show every model of the history, not only
// the config's, each with the daemon that owns it.

// ownerOut is a model's owner as status shows it.
type ownerOut struct {
	Host  string `json:"host"`
	PID   int    `json:"pid"`
	Label string `json:"label,omitempty"`
	Alive bool   `json:"alive"`
}

func (o *ownerOut) String() string {
	if o == nil {
		return "-"
	}
	s := fmt.Sprintf("%s pid %d", o.Host, o.PID)
	if !o.Alive {
		s += " (gone)"
	}
	return s
}

// fleetNames returns the config's models followed by every other model
// of a shared history (sorted by name), and each model's owner. With
// SQLite it returns the config's models and no owners.
func fleetNames(ctx context.Context, cfg *config.Config, db store.Store) ([]string, map[string]*ownerOut, error) {
	var names []string
	seen := map[string]bool{}
	for _, m := range cfg.Models {
		names = append(names, m.Name)
		seen[m.Name] = true
	}
	pg, ok := db.(*postgres.DB)
	if !ok {
		return names, nil, nil
	}
	fleet, err := pg.Fleet(ctx)
	if err != nil {
		return nil, nil, err
	}
	owners := map[string]*ownerOut{}
	for _, fm := range fleet {
		if !seen[fm.Model] {
			names = append(names, fm.Model)
			seen[fm.Model] = true
		}
		if o := fm.Owner; o != nil {
			owners[fm.Model] = &ownerOut{Host: o.Host, PID: o.PID, Label: o.Label, Alive: o.Alive}
		}
	}
	return names, owners, nil
}
