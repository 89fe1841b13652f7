package daemon

import (
	"context"
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"strings"

	"plumb/alerts"
	"plumb/store"
	"plumb/watcher"
)

// refuseFile records a file the watcher refuses alone (it has given the
// model no rows: another header, an unreadable encoding, not a regular
// file) and raises a blocked alert naming it. The model is not blocked.
func (m *watchedModel) refuseFile(ctx context.Context, n watcher.Notice) {
	m.mu.Lock()
	if m.refused == nil {
		m.refused = map[string]string{}
	}
	m.refused[n.Path] = n.Detail
	m.mu.Unlock()
	m.log.Warn("file refused", "file", n.Path, "reason", n.Detail)
	if err := m.d.blocked(ctx, alerts.BlockedCondition{Model: m.cfg.Name, Blocked: true,
		Cause: alerts.CauseFileRefused, File: n.Path, Reason: n.Detail}); err != nil {
		m.log.Error("alert", "err", err)
	}
}

// clearFileBlock lifts what a file's block recorded, when the watcher says
// its cause went (removed, replaced, fixed): a refused file's alert
// resolves; a file whose header changed under its rows no longer blocks
// the model, which is refitted at once (a refit that fails blocks it again
// with that cause).
func (m *watchedModel) clearFileBlock(ctx context.Context, path, detail string) {
	m.mu.Lock()
	_, refused := m.refused[path]
	delete(m.refused, path)
	_, header := m.headerBlocked[path]
	delete(m.headerBlocked, path)
	modelFree := header && len(m.headerBlocked) == 0
	if header {
		m.ref.dirty = true
	}
	m.mu.Unlock()
	if refused {
		m.log.Info("file no longer refused", "file", path, "detail", detail)
		if err := m.d.blocked(ctx, alerts.BlockedCondition{Model: m.cfg.Name, Blocked: false, File: path}); err != nil {
			m.log.Error("alert", "err", err)
		}
	}
	if modelFree {
		m.log.Info("file no longer blocks the model", "file", path, "detail", detail)
		if err := m.d.blocked(ctx, alerts.BlockedCondition{Model: m.cfg.Name, Blocked: false}); err != nil {
			m.log.Error("alert", "err", err)
		}
		select {
		case m.d.kick <- struct{}{}:
		default:
		}
	}
}

// fileReadable is called after a batch of path was stored: a file refused
// in an earlier run (its alert still open) that is now read fits again.
func (m *watchedModel) fileReadable(ctx context.Context, path string) {
	m.mu.Lock()
	_, refused := m.refused[path]
	m.mu.Unlock()
	if refused {
		m.clearFileBlock(ctx, path, "the file is read")
	}
}

// sweepRefused looks at the model's open file alerts at start: the alert
// of a file that is gone resolves now (no notice will come for it); the
// others are remembered, so that the file's first stored batch resolves
// its alert if it was fixed while plumb was stopped (a file still refused
// is reported again by the watcher).
func (m *watchedModel) sweepRefused(ctx context.Context, folder string) {
	if m.d.opts.ReadOnly {
		return
	}
	prefix := alerts.FileSubject(m.cfg.Name, "")
	for _, state := range []string{"open", "acknowledged"} {
		as, err := m.d.store.Alerts(ctx, store.AlertQuery{State: state, Model: m.cfg.Name, Kind: string(alerts.KindBlocked)})
		if err != nil {
			m.log.Error("alerts", "err", err)
			return
		}
		for _, a := range as {
			path, ok := strings.CutPrefix(a.Subject, prefix)
			if !ok || path == "" {
				continue
			}
			if _, err := os.Lstat(filepath.Join(folder, filepath.FromSlash(path))); errors.Is(err, fs.ErrNotExist) {
				m.log.Info("refused file removed while plumb was stopped", "file", path)
				if err := m.d.blocked(ctx, alerts.BlockedCondition{Model: m.cfg.Name, Blocked: false, File: path}); err != nil {
					m.log.Error("alert", "err", err)
				}
				continue
			}
			m.mu.Lock()
			if m.refused == nil {
				m.refused = map[string]string{}
			}
			if _, known := m.refused[path]; !known {
				m.refused[path] = "refused in an earlier run"
			}
			m.mu.Unlock()
		}
	}
}
