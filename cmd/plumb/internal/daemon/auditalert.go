package daemon

import (
	"encoding/json"

	"plumb/alerts"
	"plumb/store"
)

// AlertActor names plumb itself in the audit trail, for the alerts it
// raises and the ones it resolves when their condition clears.
const AlertActor = "plumb"

// alertState is the JSON document of an alert's state in the audit trail.
type alertState struct {
	State string `json:"state"`
	By    string `json:"by,omitempty"`
	Note  string `json:"note,omitempty"`
	Auto  bool   `json:"auto,omitempty"`
	// DocError says why the alert's document could not be read, so a
	// record that lacks who acted and the note says so rather than
	// passing for an unnamed change.
	DocError string `json:"doc_error,omitempty"`
}

func stateOf(r *store.AlertRecord) (alertState, *alerts.Alert) {
	s := alertState{State: r.State}
	a, err := alerts.DecodeAlert([]byte(r.Doc))
	if err != nil {
		s.DocError = err.Error()
		return s, nil
	}
	switch {
	case a.State == alerts.StateAcknowledged && a.Ack != nil:
		s.By, s.Note = a.Ack.By, a.Ack.Note
	case a.State == alerts.StateResolved && a.Resolution != nil:
		s.By, s.Note, s.Auto = a.Resolution.By, a.Resolution.Note, a.Resolution.Auto
	}
	return s, a
}

// AlertAudit is the store.AlertAudit the ledger adapter passes to
// store.Decisions.PutAlertAudited, so that every change of an alert's
// state is in the audit trail in the same transaction as the change:
// opened and reopened (by plumb), acknowledged (by the acknowledging
// user, with the note; a new acknowledgement of an acknowledged alert
// too) and resolved (by plumb when the condition cleared, with the note
// naming a decision when one caused it). A write that only moves
// LastSeen or the count gives no record.
//
// A resolution names its user when the Manager's ResolveBy was given one
// (the API's caller, or the author of the decision that resolved it);
// otherwise its actor is "unnamed".
func AlertAudit(before *store.AlertRecord, after store.AlertRecord) (store.AuditRecord, bool) {
	to, a := stateOf(&after)
	rec := store.AuditRecord{Model: after.Model, Subject: after.ID}
	if before != nil {
		from, _ := stateOf(before)
		if from == to {
			return store.AuditRecord{}, false
		}
		b, _ := json.Marshal(from)
		rec.Before = string(b)
	}
	b, _ := json.Marshal(to)
	rec.After = string(b)
	switch {
	case after.State == string(alerts.StateOpen) && before != nil && before.State == string(alerts.StateResolved):
		rec.Action, rec.Actor = store.ActionReopen, AlertActor
	case after.State == string(alerts.StateOpen):
		if before != nil {
			return store.AuditRecord{}, false // an open alert seen again
		}
		rec.Action, rec.Actor = store.ActionOpen, AlertActor
	case after.State == string(alerts.StateAcknowledged):
		rec.Action, rec.Actor, rec.Reason = store.ActionAcknowledge, to.By, to.Note
		if rec.Actor == "" {
			rec.Actor = "unnamed"
		}
	case after.State == string(alerts.StateResolved):
		rec.Action, rec.Reason = store.ActionResolve, to.Note
		switch {
		case to.By != "":
			rec.Actor = to.By
		case to.Auto:
			rec.Actor = AlertActor
		default:
			rec.Actor = "unnamed"
		}
	default:
		rec.Action, rec.Actor = after.State, AlertActor
	}
	if a != nil && a.Summary != "" && rec.Reason == "" && (rec.Action == store.ActionOpen || rec.Action == store.ActionReopen) {
		rec.Reason = a.Summary
	}
	return rec, true
}
