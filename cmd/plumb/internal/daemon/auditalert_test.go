package daemon

import (
	"encoding/json"
	"testing"
	"time"

	"plumb/alerts"
	"plumb/store"
)

func alertRec(t *testing.T, a alerts.Alert) store.AlertRecord {
	t.Helper()
	doc, err := json.Marshal(a)
	if err != nil {
		t.Fatal(err)
	}
	return store.AlertRecord{ID: a.ID, Model: a.Model, State: string(a.State), Doc: string(doc)}
}

func TestAlertAudit(t *testing.T) {
	now := time.Date(2026, 5, 4, 10, 0, 0, 0, time.UTC)
	base := alerts.Alert{ID: "al-1", Model: "cal", State: alerts.StateOpen, Summary: "reading a.csv:9 is suspect"}
	open := alertRec(t, base)
	seenAgain := base
	seenAgain.Count = 2
	acked := base
	acked.State, acked.Ack = alerts.StateAcknowledged, &alerts.AckInfo{By: "l.hart", Note: "checking the valve", At: now}
	reacked := acked
	reacked.Ack = &alerts.AckInfo{By: "r.okafor", Note: "taking over", At: now}
	auto := base
	auto.State, auto.Resolution = alerts.StateResolved, &alerts.ResolutionInfo{At: now, Auto: true, Note: "reading set aside by r.okafor: mis-set"}
	byHand := base
	byHand.State, byHand.Resolution = alerts.StateResolved, &alerts.ResolutionInfo{At: now, Note: "duplicate"}

	tests := []struct {
		name          string
		before        *store.AlertRecord
		after         store.AlertRecord
		ok            bool
		action, actor string
		reason        string
	}{
		{"opened", nil, open, true, store.ActionOpen, "plumb", "reading a.csv:9 is suspect"},
		{"seen again", &open, alertRec(t, seenAgain), false, "", "", ""},
		{"acknowledged", &open, alertRec(t, acked), true, store.ActionAcknowledge, "l.hart", "checking the valve"},
		{"acknowledged again by another", ptrTo(alertRec(t, acked)), alertRec(t, reacked), true, store.ActionAcknowledge, "r.okafor", "taking over"},
		{"resolved by a decision", ptrTo(alertRec(t, acked)), alertRec(t, auto), true, store.ActionResolve, "plumb", "reading set aside by r.okafor: mis-set"},
		{"resolved by hand", &open, alertRec(t, byHand), true, store.ActionResolve, "unnamed", "duplicate"},
		{"reopened", ptrTo(alertRec(t, auto)), open, true, store.ActionReopen, "plumb", "reading a.csv:9 is suspect"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			rec, ok := AlertAudit(tt.before, tt.after)
			if ok != tt.ok {
				t.Fatalf("ok = %v, want %v (%+v)", ok, tt.ok, rec)
			}
			if !ok {
				return
			}
			if rec.Action != tt.action || rec.Actor != tt.actor || rec.Reason != tt.reason || rec.Subject != "al-1" || rec.Model != "cal" {
				t.Errorf("record = %+v, want %s by %s: %q", rec, tt.action, tt.actor, tt.reason)
			}
			if (tt.before == nil) != (rec.Before == "") || rec.After == "" {
				t.Errorf("before %q, after %q", rec.Before, rec.After)
			}
			if err := store.CheckAudit(rec); err != nil {
				t.Error(err)
			}
		})
	}
}

func ptrTo[T any](v T) *T { return &v }

// An alert whose document cannot be read still gets its record, and the
// record says why it names nobody.
func TestAlertAuditUnreadableDocument(t *testing.T) {
	after := store.AlertRecord{ID: "al-2", Model: "cal", State: string(alerts.StateAcknowledged), Doc: "{not json"}
	rec, ok := AlertAudit(nil, after)
	if !ok {
		t.Fatal("no audit record for an acknowledgement with an unreadable document")
	}
	var st alertState
	if err := json.Unmarshal([]byte(rec.After), &st); err != nil {
		t.Fatal(err)
	}
	if st.State != string(alerts.StateAcknowledged) || st.DocError == "" || rec.Actor != "unnamed" {
		t.Errorf("record %+v, state %+v: want the acknowledged state, the document's error and actor unnamed", rec, st)
	}
}
