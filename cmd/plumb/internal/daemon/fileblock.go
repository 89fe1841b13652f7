package daemon

import (
	"context"

	"plumb/alerts"
	"plumb/watcher"
)

// refuseFile records a file the watcher refuses alone (it has given the
// model no rows: another header, an unreadable encoding, not a regular
// file) and raises a blocked alert naming it. The model is not blocked.
func (m *modelRT) refuseFile(ctx context.Context, n watcher.Notice) {
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
func (m *modelRT) clearFileBlock(ctx context.Context, path, detail string) {
	m.mu.Lock()
	_, refused := m.refused[path]
	delete(m.refused, path)
	_, header := m.headerBlocked[path]
	delete(m.headerBlocked, path)
	modelFree := header && len(m.headerBlocked) == 0
	if header {
		m.dirty = true
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
