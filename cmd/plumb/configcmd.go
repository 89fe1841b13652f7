package main

import (
	"context"
	"errors"
	"fmt"

	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/daemon"
	"plumb/engine"
	"plumb/store/backend"
)

func init() {
	register(command{
		name:    "config",
		summary: "check a configuration file (plumb config check --config F)",
		run:     runConfig,
	})
}

func runConfig(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "config", "check --config FILE",
		"Check validates a configuration file: unknown keys, wrong types and bad values are\n"+
			"reported with the key and the line they stand on, and every model's terms are parsed.\n"+
			"The first rows of each model's first file, when there is one, are read to find a\n"+
			"text column used as a plain term (write group(column) for labels).\n"+
			"It exits 0 when the file is valid and 1 when it is not.")
	path := fs.String("config", "plumb.toml", "the configuration `file`")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 || pos[0] != "check" {
		fs.Usage()
		return fmt.Errorf("config: %w: want \"plumb config check --config FILE\"", errUsage)
	}
	c, err := loadConfig(*path)
	if err != nil {
		return &exitError{code: 1, err: err}
	}
	if errs := textTermProblems(*path, c); len(errs) > 0 {
		return &exitError{code: 1, err: errors.Join(errs...)}
	}
	fmt.Fprintf(e.stdout, "%s: valid: %d model(s), %d route(s), state %s\n", *path, len(c.Models), len(c.Routes), backend.Describe(c.Resolve(c.State)))
	return nil
}

// loadConfig loads and validates a config file, including each model's
// terms, which only the engine can parse.
func loadConfig(path string) (*config.Config, error) {
	c, err := config.Load(path)
	if err != nil {
		return nil, err
	}
	var errs []error
	for i, m := range c.Models {
		spec, err := engine.NewModel(m.Response, m.Terms, *m.Intercept)
		if err != nil {
			errs = append(errs, fmt.Errorf("%s: model[%d].terms (model %q): %w", path, i+1, m.Name, err))
			continue
		}
		if err := daemon.CheckCalibration(spec, m); err != nil {
			errs = append(errs, fmt.Errorf("%s: model[%d] (model %q): %w", path, i+1, m.Name, err))
		}
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return c, nil
}
