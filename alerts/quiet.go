package alerts

import (
	"context"
	"encoding/json"
	"fmt"
	"sort"
	"strings"
	"time"
)

// SummaryType is the CloudEvents type of the summary sent when a quiet
// period ends; its data is a QuietSummaryDoc (not an Alert).
const SummaryType = "org.plumb.quiet.summary"

// SummarySchemaID is the dataschema of a quiet period's summary.
const SummarySchemaID = "urn:plumb:schema:quiet-summary:1"

// QuietPeriod is the period a summary closes, as the caller recorded it.
type QuietPeriod struct {
	// Key identifies the period for good (the store's id): the summary's
	// event id is derived from it, so it is enqueued once per route however
	// often QuietSummary is called for the same period.
	Key    string    `json:"key"`
	Model  string    `json:"model,omitempty"` // "" for all models
	Start  time.Time `json:"start"`
	End    time.Time `json:"end"`
	Owner  string    `json:"owner"`
	Reason string    `json:"reason"`
}

// QuietSummaryDoc is the data of a summary event: the alerts still open
// (open or acknowledged) of the models the period covered, as stored.
type QuietSummaryDoc struct {
	Period  QuietPeriod `json:"period"`
	Summary string      `json:"summary"`
	Open    []Alert     `json:"open"`
	Caution string      `json:"caution"`
}

// SummaryEventID is the event id of the summary of the period with key.
func SummaryEventID(key string) string { return "quiet-" + key + "-summary" }

// QuietSummary sends, once, the summary of a quiet period that has ended:
// one event per route that takes any of the alerts still open among the
// models p covered (covered reports whether a model is one of them, and
// whether it is still quiet at now: those wait for their own end). With
// nothing open it sends nothing and returns 0.
//
// The events are enqueued through the ledger with the first open alert's
// write (unchanged, conditional on its revision), so they are in the same
// outbox as every event; their event id is SummaryEventID(p.Key), which
// the ledger enqueues at most once per route, so a call repeated after a
// crash or a restart sends nothing more.
func (m *Manager) QuietSummary(ctx context.Context, p QuietPeriod, covered func(model string) bool, now time.Time) (int, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	return retry(func(bool) (int, error) {
		var open []AlertRecord
		for _, st := range []State{StateOpen, StateAcknowledged} {
			rs, err := m.ledger.Alerts(ctx, AlertQuery{State: string(st), Model: p.Model})
			if err != nil {
				return 0, fmt.Errorf("alerts: quiet summary: %w", err)
			}
			for _, r := range rs {
				if covered(r.Model) {
					open = append(open, r)
				}
			}
		}
		if len(open) == 0 {
			return 0, nil
		}
		sort.Slice(open, func(i, j int) bool { return open[i].ID < open[j].ID })
		doc := QuietSummaryDoc{Period: p, Caution: Caution}
		routes := map[string]bool{}
		var lines []string
		for _, r := range open {
			a, err := decodeDoc(r.ID, r.Doc)
			if err != nil {
				return 0, err
			}
			doc.Open = append(doc.Open, *a)
			for _, name := range m.routesFor(a) {
				routes[name] = true
			}
			lines = append(lines, a.Summary)
		}
		who := "all models"
		if p.Model != "" {
			who = p.Model
		}
		doc.Summary = fmt.Sprintf("quiet period for %s ended (%s, set by %s: %s); %d alert(s) still open: %s",
			who, p.End.UTC().Format("2006-01-02 15:04 UTC"), p.Owner, p.Reason, len(open), strings.Join(lines, "; "))
		data, err := json.Marshal(doc)
		if err != nil {
			return 0, err
		}
		eid := SummaryEventID(p.Key)
		e := Event{ID: eid, Source: Source(m.cfg.Host, p.Model), SpecVersion: SpecVersion, Type: SummaryType,
			Time: now.UTC(), Subject: "quiet/" + p.Key, DataContentType: "application/json", DataSchema: SummarySchemaID,
			AlertID: open[0].ID, Severity: string(highest(doc.Open)), State: "summary", Data: data}
		payload, err := json.Marshal(e)
		if err != nil {
			return 0, err
		}
		names := make([]string, 0, len(routes))
		for n := range routes {
			names = append(names, n)
		}
		sort.Strings(names)
		var ds []Delivery
		for _, n := range names {
			ds = append(ds, Delivery{AlertID: open[0].ID, Route: n, EventID: eid, Payload: payload,
				State: DeliveryPending, NextAttempt: now, CreatedAt: now, UpdatedAt: now})
		}
		carrier := open[0]
		carrier.Revision++
		if err := m.ledger.PutAlert(ctx, carrier, ds); err != nil {
			return 0, fmt.Errorf("alerts: quiet summary: %w", err)
		}
		if len(ds) > 0 && m.cfg.OnEnqueue != nil {
			m.cfg.OnEnqueue()
		}
		m.open[carrier.ID] = cached{carrier.Doc, carrier.Revision}
		return len(open), nil
	})
}

func highest(as []Alert) Severity {
	s := SeverityInfo
	for _, a := range as {
		if a.Severity.Rank() > s.Rank() {
			s = a.Severity
		}
	}
	return s
}
