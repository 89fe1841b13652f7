package store

import (
	"encoding/json"
	"fmt"
	"strconv"
	"strings"
	"time"
)

// This file builds the audit records of decisions, the same way for every
// backend, so that two backends given the same decisions write the same
// trail.

// readingState is the JSON document of a reading's decision state.
type readingState struct {
	ObsID      int64  `json:"obs_id"`
	Path       string `json:"path"`
	Generation int    `json:"generation"`
	Line       int    `json:"line"`
	State      string `json:"state"` // "included" or "excluded"
	By         string `json:"by,omitempty"`
	At         string `json:"at,omitempty"`
	Reason     string `json:"reason,omitempty"`
	Alert      string `json:"alert,omitempty"`
}

func docTime(t time.Time) string { return t.UTC().Format(time.RFC3339Nano) }

func mustJSON(v any) string {
	b, err := json.Marshal(v)
	if err != nil {
		panic("store: encode audit document: " + err.Error()) // plain structs of strings and ints
	}
	return string(b)
}

// RowRef names a reading as "path:line", with the generation when it is
// not the first ("path:line@2").
func RowRef(path string, generation, line int) string {
	ref := path + ":" + strconv.Itoa(line)
	if generation > 0 {
		ref += "@" + strconv.Itoa(generation)
	}
	return ref
}

// CheckDecision validates d before a backend looks anything up: the
// action, the model, the observation id, the actor and the reason are
// required. Errors wrap ErrInvalid.
func CheckDecision(d Decision) error {
	var miss []string
	if d.Action != ActionExclude && d.Action != ActionReinstate {
		return fmt.Errorf("%w: action must be %q or %q, got %q", ErrInvalid, ActionExclude, ActionReinstate, d.Action)
	}
	if d.Model == "" {
		miss = append(miss, "model")
	}
	if d.ObsID <= 0 {
		miss = append(miss, "reading")
	}
	if strings.TrimSpace(d.Actor) == "" {
		miss = append(miss, "actor")
	}
	if strings.TrimSpace(d.Reason) == "" {
		miss = append(miss, "reason")
	}
	if len(miss) > 0 {
		return fmt.Errorf("%w: %s needs a %s", ErrInvalid, d.Action, strings.Join(miss, ", a "))
	}
	return nil
}

// DecisionAudit returns the audit record (unsealed) of the decision d on
// the reading o, whose latest decision before d is prior (nil: none). It
// checks the transition: excluding an excluded reading or reinstating an
// included one is ErrConflict (wrapped).
func DecisionAudit(d Decision, o Observation, prior *Decision) (AuditRecord, error) {
	before := readingState{ObsID: o.ID, Path: o.Path, Generation: o.Generation, Line: o.Line, State: "included"}
	if prior != nil && prior.Action == ActionExclude {
		before.State, before.By, before.At, before.Reason, before.Alert = "excluded", prior.Actor, docTime(prior.At), prior.Reason, prior.Subject
	}
	ref := RowRef(o.Path, o.Generation, o.Line)
	switch {
	case d.Action == ActionExclude && before.State == "excluded":
		return AuditRecord{}, fmt.Errorf("%w: reading %s of %s is already set aside (by %s)", ErrConflict, ref, d.Model, prior.Actor)
	case d.Action == ActionReinstate && before.State == "included":
		return AuditRecord{}, fmt.Errorf("%w: reading %s of %s is not set aside", ErrConflict, ref, d.Model)
	}
	after := readingState{ObsID: o.ID, Path: o.Path, Generation: o.Generation, Line: o.Line, State: "included"}
	if d.Action == ActionExclude {
		after.State, after.By, after.At, after.Reason, after.Alert = "excluded", d.Actor, docTime(d.At), d.Reason, d.Subject
	}
	return AuditRecord{At: d.At, Actor: d.Actor, Action: d.Action, Model: d.Model, Subject: ref,
		Reason: d.Reason, Before: mustJSON(before), After: mustJSON(after)}, nil
}

// CheckRebaseline validates r (model, From, actor and reason required).
func CheckRebaseline(r Rebaseline) error {
	var miss []string
	if r.Model == "" {
		miss = append(miss, "model")
	}
	if r.From.IsZero() {
		miss = append(miss, "start time")
	}
	if strings.TrimSpace(r.Actor) == "" {
		miss = append(miss, "actor")
	}
	if strings.TrimSpace(r.Reason) == "" {
		miss = append(miss, "reason")
	}
	if len(miss) > 0 {
		return fmt.Errorf("%w: a re-baseline needs a %s", ErrInvalid, strings.Join(miss, ", a "))
	}
	return nil
}

type baselineState struct {
	From   string `json:"from"`
	By     string `json:"by,omitempty"`
	Reason string `json:"reason,omitempty"`
}

// RebaselineAudit returns the audit record (unsealed) of r, where prior is
// the re-baseline in force before it (nil: the model's first rows).
func RebaselineAudit(r Rebaseline, prior *Rebaseline) AuditRecord {
	before := baselineState{From: "first rows"}
	if prior != nil {
		before = baselineState{From: docTime(prior.From), By: prior.Actor, Reason: prior.Reason}
	}
	after := baselineState{From: docTime(r.From), By: r.Actor, Reason: r.Reason}
	return AuditRecord{At: r.Recorded, Actor: r.Actor, Action: ActionRebaseline, Model: r.Model,
		Subject: "baseline", Reason: r.Reason, Before: mustJSON(before), After: mustJSON(after)}
}

// CheckQuiet validates a new quiet period: start and end required, end
// after start, owner and reason required.
func CheckQuiet(q QuietPeriod) error {
	var miss []string
	if q.Start.IsZero() {
		miss = append(miss, "start")
	}
	if q.End.IsZero() {
		miss = append(miss, "end")
	}
	if strings.TrimSpace(q.Owner) == "" {
		miss = append(miss, "owner")
	}
	if strings.TrimSpace(q.Reason) == "" {
		miss = append(miss, "reason")
	}
	if len(miss) > 0 {
		return fmt.Errorf("%w: a quiet period needs a %s", ErrInvalid, strings.Join(miss, ", a "))
	}
	if !q.End.After(q.Start) {
		return fmt.Errorf("%w: a quiet period must end after it starts (%s to %s)", ErrInvalid, docTime(q.Start), docTime(q.End))
	}
	return nil
}

type quietState struct {
	ID     int64  `json:"id"`
	Model  string `json:"model"` // "" for all models
	Start  string `json:"start"`
	End    string `json:"end"`
	Owner  string `json:"owner"`
	Reason string `json:"reason"`
}

func quietDoc(q QuietPeriod) string {
	return mustJSON(quietState{ID: q.ID, Model: q.Model, Start: docTime(q.Start), End: docTime(q.End), Owner: q.Owner, Reason: q.Reason})
}

// QuietRef names a quiet period in the audit trail: "quiet:ID".
func QuietRef(id int64) string { return "quiet:" + strconv.FormatInt(id, 10) }

// QuietSetAudit returns the audit record (unsealed) of the new period q
// (its ID assigned).
func QuietSetAudit(q QuietPeriod) AuditRecord {
	return AuditRecord{At: q.Created, Actor: q.Owner, Action: ActionQuietSet, Model: q.Model,
		Subject: QuietRef(q.ID), Reason: q.Reason, After: quietDoc(q)}
}

// EndQuietAt checks and applies an early end of q at the time at by
// actor, and returns the updated period and its audit record (unsealed).
// A period whose end is at or before at is over: ErrConflict (wrapped).
// at before the start ends the period at its start.
func EndQuietAt(q QuietPeriod, at time.Time, actor, reason string) (QuietPeriod, AuditRecord, error) {
	var miss []string
	if strings.TrimSpace(actor) == "" {
		miss = append(miss, "actor")
	}
	if strings.TrimSpace(reason) == "" {
		miss = append(miss, "reason")
	}
	if len(miss) > 0 {
		return q, AuditRecord{}, fmt.Errorf("%w: ending a quiet period needs a %s", ErrInvalid, strings.Join(miss, ", a "))
	}
	if !q.End.After(at) {
		return q, AuditRecord{}, fmt.Errorf("%w: quiet period %d ended at %s", ErrConflict, q.ID, docTime(q.End))
	}
	before := quietDoc(q)
	end := at
	if end.Before(q.Start) {
		end = q.Start
	}
	q.End, q.EndedBy, q.EndReason = end, actor, reason
	rec := AuditRecord{At: at, Actor: actor, Action: ActionQuietEnd, Model: q.Model,
		Subject: QuietRef(q.ID), Reason: reason, Before: before, After: quietDoc(q)}
	return q, rec, nil
}

// CheckAudit validates a record given to AppendAudit: the actor and the
// action are required (an automatic
// resolution names "plumb" as its actor).
func CheckAudit(r AuditRecord) error {
	if strings.TrimSpace(r.Actor) == "" || strings.TrimSpace(r.Action) == "" {
		return fmt.Errorf("%w: an audit record needs an actor and an action", ErrInvalid)
	}
	return nil
}
