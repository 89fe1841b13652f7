package view

import (
	"context"
	"slices"
)

// latestPage is the page size LatestFits and LatestQuarantine use with a
// Source that lacks the optional latest-n reads (the largest page the web
// API serves).
const latestPage = 1000

// LatestFits returns the model's latest n fits (n > 0), oldest first:
// from RecentFitter when src has it, so that only those are read,
// otherwise by paging through Fits (bounded by ctx).
func LatestFits(ctx context.Context, src Source, model string, n int) ([]FitView, error) {
	if rf, ok := src.(RecentFitter); ok {
		return rf.RecentFits(ctx, model, n)
	}
	return tailPages(n, func(after int64) ([]FitView, error) {
		return src.Fits(ctx, model, after, latestPage)
	}, func(f FitView) int64 { return f.ID })
}

// LatestQuarantine returns the model's latest n quarantined rows (n > 0;
// model "" for all), oldest first: from RecentQuarantiner when src has
// it, otherwise by paging through Quarantine (bounded by ctx).
func LatestQuarantine(ctx context.Context, src Source, model string, n int) ([]QuarantineView, error) {
	if rq, ok := src.(RecentQuarantiner); ok {
		return rq.RecentQuarantine(ctx, model, n)
	}
	return tailPages(n, func(after int64) ([]QuarantineView, error) {
		return src.Quarantine(ctx, model, after, latestPage)
	}, func(q QuarantineView) int64 { return q.ID })
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
		if len(items) < latestPage {
			return keep, nil
		}
		last := id(items[len(items)-1])
		if last <= after {
			return keep, nil
		}
		after = last
	}
}
