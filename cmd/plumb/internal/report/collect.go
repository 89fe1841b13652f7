package report

import (
	"context"
	"fmt"

	"plumb/cmd/plumb/internal/view"
)

// Contents is everything one report shows. Collect gathers it from a
// view.Source; Render lays it out.
type Contents struct {
	// Detail is the model's current picture; Detail.Quarantined is how
	// many of its rows are quarantined in all.
	Detail view.ModelDetail
	// Fits is the fit history, oldest first; the latest
	// Options.HistoryKeep are charted.
	Fits []view.FitView
	// Alerts are the model's alerts, in any order (shown newest first).
	Alerts []view.AlertView
	// Quarantine holds quarantined rows of the model, in any order: the
	// newest Options.MaxQuarantine of them are listed, newest first, and
	// the rest of Detail.Quarantined are counted.
	Quarantine []view.QuarantineView
	// Decisions are the exclusions and reinstatements recorded on the
	// model's readings, oldest first (from a view.DecisionLister; none
	// when the Source keeps no decisions).
	Decisions []view.DecisionView
}

// collectAlerts is the most alerts Collect reads from a Source.
const collectAlerts = 1000

// Collect gathers one model's report from src: its current picture, the
// latest opts.HistoryKeep fits, its alerts (at most 1000, newest first)
// and its newest opts.MaxQuarantine quarantined rows. It uses the optional
// view.RecentFitter and view.RecentQuarantiner when src has them, so that
// only the rows shown are read; otherwise it pages through the history
// (bounded by ctx). A model that does not exist is an error wrapping
// view.ErrNotFound.
func Collect(ctx context.Context, src view.Source, model string, opts Options) (Contents, error) {
	opts = opts.withDefaults()
	d, err := src.Model(ctx, model)
	if err != nil {
		return Contents{}, fmt.Errorf("report: %w", err)
	}
	c := Contents{Detail: d}
	if c.Fits, err = view.LatestFits(ctx, src, model, opts.HistoryKeep); err != nil {
		return Contents{}, fmt.Errorf("report: fits of %s: %w", model, err)
	}
	if c.Alerts, err = src.Alerts(ctx, view.AlertFilter{Model: model, Limit: collectAlerts}); err != nil {
		return Contents{}, fmt.Errorf("report: alerts of %s: %w", model, err)
	}
	if c.Quarantine, err = view.LatestQuarantine(ctx, src, model, opts.MaxQuarantine); err != nil {
		return Contents{}, fmt.Errorf("report: quarantine of %s: %w", model, err)
	}
	if dl, ok := src.(view.DecisionLister); ok {
		if c.Decisions, err = dl.Decisions(ctx, model); err != nil {
			return Contents{}, fmt.Errorf("report: decisions of %s: %w", model, err)
		}
	}
	return c, nil
}
