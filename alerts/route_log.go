package alerts

import (
	"context"
	"encoding/json"
	"fmt"
	"log/slog"
)

// logSender writes one structured slog record per event.
type logSender struct {
	name string
	log  *slog.Logger
}

func (s *logSender) Send(ctx context.Context, d Delivery) error {
	e, err := DecodeEvent(d.Payload)
	if err != nil {
		return Permanent(fmt.Errorf("decode event %s: %w", d.EventID, err))
	}
	if e.Type == SummaryType {
		var q QuietSummaryDoc
		if err := json.Unmarshal(e.Data, &q); err != nil {
			return Permanent(fmt.Errorf("decode summary of event %s: %w", d.EventID, err))
		}
		s.log.LogAttrs(ctx, slog.LevelWarn, q.Summary, slog.String("route", s.name), slog.String("event_id", e.ID),
			slog.String("event_type", e.Type), slog.Int("open", len(q.Open)), slog.String("caution", q.Caution))
		return nil
	}
	var a Alert
	if err := json.Unmarshal(e.Data, &a); err != nil {
		return Permanent(fmt.Errorf("decode alert of event %s: %w", d.EventID, err))
	}
	level := logLevel(a)
	attrs := []slog.Attr{
		slog.String("route", s.name),
		slog.String("event_id", e.ID),
		slog.String("event_type", e.Type),
		slog.String("alert_id", a.ID),
		slog.String("model", a.Model),
		slog.String("kind", string(a.Kind)),
		slog.String("severity", string(a.Severity)),
		slog.String("state", string(a.State)),
		slog.String("subject", a.Subject),
		slog.Int("count", a.Count),
		slog.Time("first_seen", a.FirstSeen),
		slog.Time("last_seen", a.LastSeen),
		slog.String("explanation", a.Explanation),
	}
	if a.Suggestion != nil && a.Suggestion.Text != "" {
		attrs = append(attrs, slog.String("suggestion", a.Suggestion.Text))
	}
	attrs = append(attrs, slog.String("caution", a.Caution))
	s.log.LogAttrs(ctx, level, a.Summary, attrs...)
	return nil
}

// logLevel is the level of an event's record: it follows the event, not
// only the alert's severity. Opening, reopening and reminding of an alert
// are logged at its severity (info, warning: WARN, critical: ERROR); an
// acknowledgement or a resolution is news that the condition is in hand
// or gone, logged at INFO whatever the severity.
func logLevel(a Alert) slog.Level {
	switch a.Event {
	case Acknowledged, Resolved:
		return slog.LevelInfo
	}
	switch a.Severity {
	case SeverityWarning:
		return slog.LevelWarn
	case SeverityCritical:
		return slog.LevelError
	}
	return slog.LevelInfo
}
