package daemon

import (
	"context"

	"plumb/alerts"
	"plumb/store"
)

// restoreHeldSuspects finds, after restore, the rows judged suspect at
// arrival whose alert was never raised (they arrived while the model was
// blocked, or the daemon stopped before the next refresh) and holds them
// for the next refresh that has a fit, as if judging had never stopped. A
// row whose alert exists in any state (open, acknowledged, resolved) is
// not raised again.
func (m *modelRT) restoreHeldSuspects(ctx context.Context) error {
	if m.d.opts.ReadOnly || !*m.cfg.Alerts.SuspectPoint.Enabled {
		return nil // nothing would be raised: do not look
	}
	m.mu.Lock()
	var cand []int
	for r, a := range m.arrival {
		if a == "suspect" {
			cand = append(cand, r)
		}
	}
	m.mu.Unlock()
	if len(cand) == 0 {
		return nil
	}
	as, err := m.d.store.Alerts(ctx, store.AlertQuery{Model: m.cfg.Name, Kind: string(alerts.KindSuspectPoint)})
	if err != nil {
		return err
	}
	alerted := make(map[string]bool, len(as))
	for _, a := range as {
		alerted[a.Subject] = true
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	for _, r := range cand {
		if !alerted[alerts.PointSubject(m.cfg.Name, m.pathNames[m.paths[r]], int(m.lines[r]))] {
			m.pendingSuspects = append(m.pendingSuspects, r)
		}
	}
	return nil
}
