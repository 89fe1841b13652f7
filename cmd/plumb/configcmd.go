package main

import (
	"context"
	"errors"
	"fmt"
	"strings"

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
		return usageErr("config", `want "plumb config check --config FILE"`)
	}
	c, notes, err := config.LoadChecked(*path, checkTerms)
	for _, n := range notes {
		fmt.Fprintln(e.stdout, "note:", n)
	}
	if err != nil {
		return &exitError{code: 1, err: err}
	}
	if errs := textTermProblems(*path, c); len(errs) > 0 {
		return &exitError{code: 1, err: errors.Join(errs...)}
	}
	fmt.Fprintf(e.stdout, "%s: valid: %d model(s), %d route(s), state %s\n", *path, len(c.Models), len(c.Routes), backend.Describe(c.Resolve(c.State)))
	return nil
}

// checkTerms parses a model's terms with the engine, for the config's
// own checks (config cannot import the engine).
func checkTerms(m *config.Model) (int, error) {
	spec, err := engine.NewModel(m.Response, m.Terms, *m.Intercept)
	if err == nil {
		// Calibration answers and units are checked against the terms.
		if cerr := daemon.CheckCalibration(spec, *m); cerr != nil {
			key := "calibration"
			if strings.HasPrefix(cerr.Error(), "units:") {
				key = "units"
			}
			return spec.P(), &config.ModelKeyError{Key: []string{key}, Err: cerr}
		}
		return spec.P(), nil
	}
	// The engine stops at the first bad term; try each alone so that
	// every bad term is reported.
	var errs []error
	for _, t := range m.Terms {
		if _, terr := engine.NewModel(m.Response, []string{t}, *m.Intercept); terr != nil {
			errs = append(errs, terr)
		}
	}
	if len(errs) == 0 {
		return 0, err // the terms are fine alone, not together (e.g. a repeated term)
	}
	return 0, errors.Join(errs...)
}

// loadConfig loads and validates a config file, including each model's
// terms, which only the engine can parse: every problem in one error.
func loadConfig(path string) (*config.Config, error) {
	c, _, err := config.LoadChecked(path, checkTerms)
	return c, err
}
