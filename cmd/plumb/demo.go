package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"sync"
	"time"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/daemon"
	"plumb/cmd/plumb/internal/demo"
	"plumb/cmd/plumb/internal/view"
	"plumb/store/backend"
)

func init() {
	register(command{
		name:    "demo",
		summary: "run the real daemon on an embedded calibration-bench scenario",
		run:     runDemo,
	})
}

func runDemo(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "demo", "[--duration 90s] [--speed N] [--keep DIR] [--summary-json FILE]",
		"Demo runs the real plumb daemon on an invented end-of-line calibration bench ("+demo.Company+",\n"+
			demo.Bench+"): a simulated instrument appends readings to a CSV file, plumb judges each one,\n"+
			"raises alerts where a reading is both an outlier and influential, where the fit turns\n"+
			"fragile and where the calibration drifts, and resolves them when the condition clears.\n"+
			"The terminal narrates; the dashboard is served on the address printed. It ends by itself\n"+
			"after --duration with a summary.")
	duration := fs.Duration("duration", 90*time.Second, "how long the demo runs")
	speed := fs.Float64("speed", 0, "readings arrive this many times faster than the bench's 2 s pace (0: fit the scenario into 80% of --duration)")
	keep := fs.String("keep", "", "keep the folder, config and database in `DIR` (default: a temporary folder, removed at the end)")
	summaryJSON := fs.String("summary-json", "", "also write the summary as JSON to `FILE`")
	listen := fs.String("listen", "127.0.0.1:0", "dashboard address (\"\" for none)")
	quiet := fs.Bool("quiet", false, "print only the alerts and the summary")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	if *duration <= 0 {
		return usageErr("demo", "--duration must be positive")
	}
	readings := demo.Scenario()
	if *speed == 0 {
		total := time.Duration(len(readings)) * demo.DefaultInterval
		*speed = total.Seconds() / (0.8 * duration.Seconds())
	}
	if *speed < 0 {
		return usageErr("demo", "--speed must be positive")
	}

	dir := *keep
	if dir == "" {
		d, err := os.MkdirTemp("", "plumb-demo-")
		if err != nil {
			return err
		}
		defer os.RemoveAll(d)
		dir = d
	} else {
		if err := os.MkdirAll(dir, 0o755); err != nil {
			return err
		}
		if _, err := os.Stat(filepath.Join(dir, demo.FeedPath)); err == nil {
			return fmt.Errorf("demo: %s already holds a demo run; choose an empty --keep folder", dir)
		}
	}
	if err := os.MkdirAll(filepath.Join(dir, demo.Folder), 0o755); err != nil {
		return err
	}
	cfgPath, err := demo.Config(dir, *listen)
	if err != nil {
		return err
	}
	cfg, err := config.Load(cfgPath)
	if err != nil {
		return err
	}

	out := &demoOut{w: e.stdout}
	logf, err := os.Create(filepath.Join(dir, "plumb.log"))
	if err != nil {
		return err
	}
	defer logf.Close()
	log := slog.New(slog.NewTextHandler(logf, &slog.HandlerOptions{Level: slog.LevelInfo}))
	d, err := daemon.New(ctx, cfg, daemon.Options{Logger: log, OnAlert: out.alert})
	if err != nil {
		return err
	}
	defer d.Close()
	srv, err := serve(d, cfg, log)
	if err != nil {
		return err
	}
	defer srv.Close()

	runCtx, stop := context.WithTimeout(ctx, *duration)
	defer stop()
	done := make(chan error, 1)
	go func() { done <- d.Run(runCtx, nil) }()

	out.printf("plumb demo: %s, %s — thermocouple sensors calibrated against a reference thermometer.\n", demo.Company, demo.Bench)
	out.printf("  model %q: %s ~ %v, fitted on the last %d readings\n", demo.ModelName, demo.Response, demo.Terms, demo.WindowRows)
	out.printf("  folder    %s\n", dir)
	if a := srv.Addr(); a != "" {
		out.printf("  dashboard http://%s/\n", a)
	}
	out.printf("  %d readings at %.3gx the bench's pace, for at most %s\n\n", len(readings), *speed, *duration)

	werr := demo.Run(runCtx, dir, *speed, func(l demo.Line) {
		if l.Reading == nil || *quiet {
			return // --quiet: no readings, scripted ones included
		}
		if l.Reading.Phase == demo.PhaseOrdinary {
			out.printf("  %s:%-3d %-8s %s\n", demo.FeedName, l.Number, "reading", l.Text)
			return
		}
		out.printf("  %s:%-3d %-8s %s   (%s)\n", demo.FeedName, l.Number, string(l.Reading.Phase), l.Text, l.Reading.Note)
	})
	if werr != nil && !errors.Is(werr, context.DeadlineExceeded) && !errors.Is(werr, context.Canceled) {
		stop()
		<-done
		return werr
	}
	if werr == nil && !*quiet {
		out.printf("\n  all readings written; letting plumb settle until the demo's time is up\n")
	}
	<-runCtx.Done()
	if err := <-done; err != nil && !errors.Is(err, context.Canceled) {
		return err
	}

	sum, err := d.Summary(context.WithoutCancel(ctx))
	if err != nil {
		return err
	}
	raised, resolved := 0, 0
	for _, a := range sum.Alerts {
		raised++
		if a.State == "resolved" {
			resolved++
		}
	}
	out.printf("\nsummary: %d rows accepted, %d quarantined, %d fits, %d alerts raised, %d resolved\n", sum.Rows, sum.Quarantined, sum.Fits, raised, resolved)
	for _, a := range sum.Alerts {
		out.printf("  %-20s %-13s %-8s %-13s %s\n", a.ID, a.State, a.Severity, a.Kind, a.Subject)
	}
	out.printf("\n%s\n", view.Caution)
	if *keep != "" {
		out.printf("kept: %s (config %s, database %s)\n", dir, cfgPath, backend.Describe(cfg.Resolve(cfg.State)))
	}
	if *summaryJSON != "" {
		b, err := json.MarshalIndent(sum, "", "  ")
		if err != nil {
			return err
		}
		if err := os.WriteFile(*summaryJSON, append(b, '\n'), 0o644); err != nil {
			return err
		}
	}
	return nil
}

// demoOut serialises the demo's narration (the writer and the pipeline
// print from different goroutines).
type demoOut struct {
	mu   sync.Mutex
	w    io.Writer
	seen map[string]int // alert id -> last event sequence narrated
}

func (o *demoOut) printf(format string, args ...any) {
	o.mu.Lock()
	defer o.mu.Unlock()
	fmt.Fprintf(o.w, format, args...)
}

func (o *demoOut) alert(a *alerts.Alert) {
	o.mu.Lock()
	if o.seen == nil {
		o.seen = map[string]int{}
	}
	news := a.Sequence > o.seen[a.ID]
	o.seen[a.ID] = a.Sequence
	o.mu.Unlock()
	if !news {
		return // an update of an alert already told, with no new event
	}
	verb := string(a.Event)
	if verb == "" {
		verb = string(a.State)
	}
	o.printf("\n  >> ALERT %s: %s [%s, %s] %s\n", verb, a.Kind, a.Severity, a.Subject, a.Summary)
	for _, m := range a.Measures {
		o.printf("       - %s\n", view.MeasureText(view.Flag(m)))
	}
	if a.Suggestion != nil && (a.State != alerts.StateResolved) {
		o.printf("       next: %s\n", a.Suggestion.Text)
	}
	o.printf("\n")
}
