package report

import (
	"context"
	"fmt"
	"slices"

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
}

// Bounds of what Collect reads from a Source.
const (
	// collectAlerts is the most alerts Collect reads.
	collectAlerts = 1000
	// collectPage is the page size Collect uses with a Source that lacks
	// the optional latest-n reads (the largest page the web API serves).
	collectPage = 1000
)

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
	if c.Fits, err = latestFits(ctx, src, model, opts.HistoryKeep); err != nil {
		return Contents{}, fmt.Errorf("report: fits of %s: %w", model, err)
	}
	if c.Alerts, err = src.Alerts(ctx, view.AlertFilter{Model: model, Limit: collectAlerts}); err != nil {
		return Contents{}, fmt.Errorf("report: alerts of %s: %w", model, err)
	}
	if c.Quarantine, err = latestQuarantine(ctx, src, model, opts.MaxQuarantine); err != nil {
		return Contents{}, fmt.Errorf("report: quarantine of %s: %w", model, err)
	}
	return c, nil
}

// latestFits returns the model's latest n fits (n > 0), oldest first.
func latestFits(ctx context.Context, src view.Source, model string, n int) ([]view.FitView, error) {
	if rf, ok := src.(view.RecentFitter); ok {
		return rf.RecentFits(ctx, model, n)
	}
	return tailPages(n, func(after int64) ([]view.FitView, error) {
		return src.Fits(ctx, model, after, collectPage)
	}, func(f view.FitView) int64 { return f.ID })
}

// latestQuarantine returns the model's latest n quarantined rows (n > 0),
// oldest first.
func latestQuarantine(ctx context.Context, src view.Source, model string, n int) ([]view.QuarantineView, error) {
	if rq, ok := src.(view.RecentQuarantiner); ok {
		return rq.RecentQuarantine(ctx, model, n)
	}
	return tailPages(n, func(after int64) ([]view.QuarantineView, error) {
		return src.Quarantine(ctx, model, after, collectPage)
	}, func(q view.QuarantineView) int64 { return q.ID })
}

// tailPages reads pages in ascending id order until a short page and
// keeps the last n items. A page that does not advance the id (a Source
// that ignores after) ends the reading rather than loop.
func tailPages[T any](n int, page func(after int64) ([]T, error), id func(T) int64) ([]T, error) {
	var keep []T
	var after int64
	for {
		items, err := page(after)
		if err != nil {
			return nil, err
		}
		keep = append(keep, items...)
		if len(keep) > n {
			keep = slices.Delete(keep, 0, len(keep)-n)
		}
		if len(items) < collectPage {
			return keep, nil
		}
		last := id(items[len(items)-1])
		if last <= after {
			return keep, nil
		}
		after = last
	}
}
