package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"log/slog"
	"os"

	"plumb/cmd/plumb/internal/daemon"
	"plumb/cmd/plumb/internal/report"
)

func init() {
	register(command{
		name:    "report",
		summary: "write a self-contained HTML report of one model, or one chart as SVG or PNG",
		run:     runReport,
	})
}

func runReport(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "report", "--config FILE MODEL -o report.html [--format html|svg|png] [--chart fit|influence|cooks]",
		"Report refits the model from the state database (reading only: it changes nothing, and\n"+
			"may run beside the daemon) and writes one self-contained HTML file with the fit, the\n"+
			"influence table's notable rows, fragility, where to collect more data, the alert\n"+
			"history and the cautions. With --format svg or png it writes a single chart instead.")
	path := fs.String("config", "plumb.toml", "the configuration `file`")
	out := fs.String("o", "", "output `file` (default standard output)")
	format := fs.String("format", "html", "html, svg or png")
	chart := fs.String("chart", report.ChartFit, "with --format svg|png: which chart (fit, influence, cooks)")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return usageErr("report", "name one model")
	}
	if *format != "html" && *format != "svg" && *format != "png" {
		return usageErr("report", fmt.Sprintf("--format wants html, svg or png, got %q", *format))
	}
	name := pos[0]
	cfg, err := loadConfig(*path)
	if err != nil {
		return &exitError{code: 1, err: err}
	}
	if err := stateReady(cfg.Resolve(cfg.State)); err != nil {
		return err
	}
	d, err := daemon.New(ctx, cfg, daemon.Options{ReadOnly: true, Logger: slog.New(slog.NewTextHandler(e.stderr, &slog.HandlerOptions{Level: slog.LevelWarn}))})
	if err != nil {
		return err
	}
	defer d.Close()
	if err := d.RefreshAll(ctx); err != nil {
		return err
	}
	src := d.View()
	// Everything is read before the output file is made, so an unknown
	// model leaves no empty file behind.
	var c report.Contents
	if *format == "html" {
		c, err = report.Collect(ctx, src, name, report.Options{})
	} else {
		c.Detail, err = src.Model(ctx, name)
		if err != nil {
			err = fmt.Errorf("report: %w", err)
		}
	}
	if err != nil {
		return err
	}
	var w io.Writer = e.stdout
	if *out != "" {
		f, err := os.Create(*out)
		if err != nil {
			return err
		}
		defer f.Close()
		bw := bufio.NewWriter(f)
		defer bw.Flush()
		w = bw
	}
	if *format != "html" {
		return report.Chart(w, c.Detail, *chart, *format)
	}
	return report.Render(w, c, report.Options{})
}
