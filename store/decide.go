package store

import (
	"context"
	"errors"
	"time"
)

// Decisions is the record of what people decided after an alert: a
// reading set aside (excluded, with a reason) or reinstated, a re-baseline
// of the drift check, a quiet period for deliveries, and the append-only
// audit trail that records each of them and every change of an alert's
// state. It is a separate interface from Store so that the daemon, the web
// API and the CLI ask only for what they use; both backends implement both.
//
// A decision never deletes or alters a measurement: the observation stays
// stored with its values, provenance and history. Each write below commits
// the decision and its audit record in one transaction, so a decision is
// acknowledged to its caller only once both are durable.
//
// Every write takes an Actor (a named user, or the operating-system user
// for the command line) and a Reason; both are required. An At left zero
// takes the store's clock.
//
// A Decisions is safe for use by multiple goroutines.
type Decisions interface {
	// Decide records the exclusion or reinstatement of one observation of
	// d.Model (d.Action ActionExclude or ActionReinstate) and its audit
	// record, and returns the stored decision (ID, At and AuditSeq set).
	// An unknown observation, or one of another model, gives ErrNotFound
	// (wrapped); excluding an excluded reading or reinstating one that is
	// not excluded gives ErrConflict (wrapped) and stores nothing.
	Decide(ctx context.Context, d Decision) (Decision, error)
	// Decisions returns every decision on the model's readings, oldest
	// first (by ID). ExcludedAt (in this package) folds them.
	Decisions(ctx context.Context, model string) ([]Decision, error)

	// Rebaseline records a re-baseline event of r.Model and its audit
	// record, and returns it with ID, Recorded and AuditSeq set. r.From is
	// the time from which the drift baseline restarts (required; it may be
	// earlier than the recording, for a swap noted after the fact).
	Rebaseline(ctx context.Context, r Rebaseline) (Rebaseline, error)
	// Rebaselines returns the model's re-baseline events, oldest first (by
	// ID).
	Rebaselines(ctx context.Context, model string) ([]Rebaseline, error)

	// SetQuiet records a quiet period (q.Model "" for all models) and its
	// audit record, and returns it with ID, Created and AuditSeq set.
	// Start and End are required, End after Start; Owner and Reason are
	// required. A period may lie in the future.
	SetQuiet(ctx context.Context, q QuietPeriod) (QuietPeriod, error)
	// EndQuiet ends the quiet period id at the time at (zero: now), before
	// its planned end, and records who and why in the audit trail. at
	// before the period's start ends it at its start (it never was quiet);
	// a period already over gives ErrConflict (wrapped); an unknown id
	// ErrNotFound (wrapped).
	EndQuiet(ctx context.Context, id int64, at time.Time, actor, reason string) (QuietPeriod, error)
	// QuietPeriods returns the quiet periods that apply to model (those of
	// the model and those of all models; model "" for every period) and
	// end after the time after (zero: all), oldest first (by ID).
	QuietPeriods(ctx context.Context, model string, after time.Time) ([]QuietPeriod, error)

	// PutAlertAudited is Store.PutAlert that, in the same transaction,
	// appends the audit record that audit derives from the stored alert
	// (nil when there is none) and the record written, if audit returns
	// ok. A write that fails (ErrChanged included) stores neither. The
	// record's Seq, Prev and Hash are set by the store; its At, when zero,
	// by the store's clock.
	PutAlertAudited(ctx context.Context, a AlertRecord, deliveries []Delivery, audit AlertAudit) error

	// AppendAudit appends a record of an action taken elsewhere (an alert
	// acknowledged or resolved, a summary sent) and returns it with Seq,
	// At (when zero), Prev and Hash set. Seq, Prev and Hash given are
	// ignored.
	AppendAudit(ctx context.Context, r AuditRecord) (AuditRecord, error)
	// Audit returns audit records in chain order (ascending Seq) after the
	// sequence number q.AfterSeq, at most q.Limit (<= 0: all), optionally
	// only those with At in [q.From, q.To) (a zero bound is open). It
	// returns the records exactly as stored, for VerifyAudit.
	Audit(ctx context.Context, q AuditQuery) ([]AuditRecord, error)
}

// AlertAudit derives the audit record of an alert write from the stored
// alert before it (nil for a new alert) and the alert written; ok false
// means the write needs no record (for instance only LastSeen moved). It
// runs inside the store's transaction: it must not call the store.
type AlertAudit func(before *AlertRecord, after AlertRecord) (rec AuditRecord, ok bool)

// ErrConflict is returned (wrapped) for a decision that contradicts the
// current state: excluding an excluded reading, reinstating one that is
// not excluded, ending a quiet period that is already over.
var ErrConflict = errors.New("store: the decision contradicts the current state")

// ErrInvalid is returned (wrapped) for a decision missing a required field
// (actor, reason, model, a time) or with an impossible value.
var ErrInvalid = errors.New("store: invalid decision")

// Actions recorded in the audit trail.
const (
	ActionExclude     = "exclude"
	ActionReinstate   = "reinstate"
	ActionRebaseline  = "rebaseline"
	ActionQuietSet    = "quiet_set"
	ActionQuietEnd    = "quiet_end"
	ActionAcknowledge = "acknowledge"
	ActionResolve     = "resolve"
	ActionOpen        = "open"   // an alert raised (by plumb)
	ActionReopen      = "reopen" // a resolved alert raised again
)

// Decision is the exclusion or reinstatement of one reading.
type Decision struct {
	ID     int64
	Model  string
	ObsID  int64
	Action string // ActionExclude or ActionReinstate
	Actor  string
	Reason string
	At     time.Time
	// Subject optionally names what the decision answers (an alert id);
	// it is copied into the audit record.
	Subject string
	// AuditSeq is the sequence number of the audit record written with
	// the decision.
	AuditSeq int64
}

// Rebaseline is a recorded event after which the drift baseline restarts:
// the first baseline rows after From form the new baseline.
type Rebaseline struct {
	ID       int64
	Model    string
	From     time.Time
	Actor    string
	Reason   string
	Recorded time.Time
	AuditSeq int64
}

// QuietPeriod holds deliveries of a model's alerts (Model "" for all
// models) from Start to End. Alerts are still raised and stored.
type QuietPeriod struct {
	ID     int64
	Model  string
	Start  time.Time
	End    time.Time
	Owner  string
	Reason string
	// Created is when the period was recorded.
	Created time.Time
	// EndedBy and EndReason are set when the period was ended early (End
	// then holds the early end).
	EndedBy   string
	EndReason string
	AuditSeq  int64
}

// Covers reports whether the period is in force at t (Start <= t < End)
// for model (a period of all models covers every model).
func (q QuietPeriod) Covers(model string, t time.Time) bool {
	return (q.Model == "" || q.Model == model) && !t.Before(q.Start) && t.Before(q.End)
}

// AuditQuery selects audit records.
type AuditQuery struct {
	AfterSeq int64
	Limit    int
	From, To time.Time
}
