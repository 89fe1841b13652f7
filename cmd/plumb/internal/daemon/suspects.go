package daemon

import (
	"context"

	"plumb/alerts"
	"plumb/engine"
	"plumb/store"
)

// restoreHeldSuspects finds, after restore, the rows judged suspect at
// arrival whose alert was never raised (they arrived while the model was
// blocked, or the daemon stopped before the next refresh) and holds them
// for the next refresh that has a fit, as if judging had never stopped. A
// row whose alert exists in any state (open, acknowledged, resolved) is
// not raised again. Their crossed cutoffs are read from the stored
// arrival diagnostics: the pipeline no longer holds them after a restart.
func (m *watchedModel) restoreHeldSuspects(ctx context.Context) error {
	if m.d.opts.ReadOnly || !*m.cfg.Alerts.SuspectPoint.Enabled {
		return nil // nothing would be raised: do not look
	}
	m.mu.Lock()
	var cand []int
	for r, a := range m.rows.arrival {
		if a == engine.WordSuspect {
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
	var held []suspect
	for _, r := range cand {
		m.mu.Lock()
		path, line, label := m.rows.path(r), m.rows.line(r), m.rows.name(r)
		m.mu.Unlock()
		if alerted[alerts.LabeledPointSubject(m.cfg.Name, path, line, label)] {
			continue
		}
		o, err := m.d.store.ObservationAt(ctx, m.cfg.Name, path, line)
		if err != nil {
			return err
		}
		sp := suspect{row: r}
		if o.Arrival != nil {
			sp.flags = o.Arrival.Flags
		}
		held = append(held, sp)
	}
	m.mu.Lock()
	m.ref.pendingSuspects = append(m.ref.pendingSuspects, held...)
	m.mu.Unlock()
	return nil
}
