package alerts

import (
	"log/slog"
	"testing"
)

// TestLogLevelFollowsEvent: the log route's level follows the event. An
// alert that opens, reopens or reminds is logged at its severity; its
// acknowledgement and its resolution are logged at INFO, so that a
// resolved critical alert does not look like a new error in the journal.
func TestLogLevelFollowsEvent(t *testing.T) {
	want := map[Transition]map[Severity]slog.Level{
		Opened:       {SeverityInfo: slog.LevelInfo, SeverityWarning: slog.LevelWarn, SeverityCritical: slog.LevelError},
		Reopened:     {SeverityInfo: slog.LevelInfo, SeverityWarning: slog.LevelWarn, SeverityCritical: slog.LevelError},
		Reminder:     {SeverityInfo: slog.LevelInfo, SeverityWarning: slog.LevelWarn, SeverityCritical: slog.LevelError},
		Acknowledged: {SeverityInfo: slog.LevelInfo, SeverityWarning: slog.LevelInfo, SeverityCritical: slog.LevelInfo},
		Resolved:     {SeverityInfo: slog.LevelInfo, SeverityWarning: slog.LevelInfo, SeverityCritical: slog.LevelInfo},
	}
	for ev, bySev := range want {
		for sev, lv := range bySev {
			t.Run(string(ev)+"/"+string(sev), func(t *testing.T) {
				if got := logLevel(Alert{Event: ev, Severity: sev}); got != lv {
					t.Errorf("level %v, want %v", got, lv)
				}
			})
		}
	}
}
