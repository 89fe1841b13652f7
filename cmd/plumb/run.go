package main

import (
	"context"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"syscall"

	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/daemon"
	"plumb/store/backend"
)

func init() {
	register(command{
		name:    "run",
		summary: "run the daemon: watch the folders, judge, store, alert",
		run:     runRun,
	})
}

func runRun(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "run", "--config FILE",
		"Run watches every model's folder, judges each arriving row, keeps the history in the\n"+
			"state database and sends alerts. SIGTERM or SIGINT finishes the batch in hand and\n"+
			"stops; SIGHUP reloads the configuration (added, removed and changed models) without\n"+
			"losing state.")
	path := fs.String("config", "plumb.toml", "the configuration `file`")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	cfg, err := loadConfig(*path)
	if err != nil {
		return &exitError{code: 1, err: err}
	}
	log := newLogger(e.stderr, cfg)
	opts := daemon.Options{Logger: log}
	d, err := daemon.New(ctx, cfg, opts)
	if err != nil {
		return err
	}
	defer d.Close()
	srv, err := serve(d, cfg, log)
	if err != nil {
		return err
	}
	defer srv.Close()

	reload := make(chan *config.Config, 1)
	hup := make(chan os.Signal, 1)
	signal.Notify(hup, syscall.SIGHUP)
	defer signal.Stop(hup)
	go func() {
		for {
			select {
			case <-ctx.Done():
				return
			case <-hup:
				c, err := loadConfig(*path)
				if err != nil {
					log.Error("reload: configuration invalid; keeping the running one", "err", err)
					continue
				}
				reload <- c
			}
		}
	}()
	log.Info("plumb running", "config", *path, "models", len(cfg.Models), "state", backend.Describe(cfg.Resolve(cfg.State)))
	err = d.Run(ctx, reload)
	log.Info("plumb stopped")
	return err
}

// newLogger makes the daemon's structured logger from the config.
func newLogger(w io.Writer, cfg *config.Config) *slog.Logger {
	var lvl slog.Level
	_ = lvl.UnmarshalText([]byte(cfg.LogLevel))
	o := &slog.HandlerOptions{Level: lvl}
	if cfg.LogFormat == "json" {
		return slog.New(slog.NewJSONHandler(w, o))
	}
	return slog.New(slog.NewTextHandler(w, o))
}
