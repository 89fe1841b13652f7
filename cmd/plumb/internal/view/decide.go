package view

import (
	"context"
	"errors"
	"time"
)

// Decider is an optional interface of a Source that records decisions
// after an alert: a reading set aside (excluded, with a reason) or
// reinstated, a re-baseline of the drift check, a quiet period. Each call
// returns only after the decision and its audit record are committed.
// Who may call what is the web server's business (package access); by is
// the identified user.
//
// Errors wrap ErrNotFound (no such model, reading or period), ErrInvalid
// (a reason missing, a quiet period longer than allowed) or ErrState (the
// decision contradicts the current state: excluding a reading set aside
// already, reinstating one that is not, ending a period that is over).
type Decider interface {
	// Exclude sets a reading aside: from the next refresh on it is left
	// out of the fit, the drift check, fragility and suggestions, and its
	// suspect-point alert resolves with the decision's note. The reading
	// stays stored and listed. alert optionally names the alert the
	// decision answers.
	Exclude(ctx context.Context, model string, row RowKey, by, reason, alert string) (DecisionView, error)
	// Reinstate takes a reading set aside back into the fits.
	Reinstate(ctx context.Context, model string, row RowKey, by, reason string) (DecisionView, error)
	// Rebaseline restarts the model's drift baseline from the time from.
	Rebaseline(ctx context.Context, model string, from time.Time, by, reason string) (RebaselineView, error)
	// SetQuiet records a quiet period (Model "" for all models).
	SetQuiet(ctx context.Context, q QuietView) (QuietView, error)
	// EndQuiet ends a quiet period now.
	EndQuiet(ctx context.Context, id int64, by, reason string) (QuietView, error)
	// QuietPeriods lists the quiet periods not yet over (and those that
	// ended in the last day), oldest first.
	QuietPeriods(ctx context.Context) ([]QuietView, error)
}

// ErrInvalid is wrapped by Decider errors for a request missing a
// required field or asking for what the configuration does not allow.
var ErrInvalid = errors.New("view: invalid request")

// RowKey names one reading: by its observation id, or by its file:line
// ("feed.csv:212", as every view labels a row).
type RowKey struct {
	ID   int64
	Line string
}

// DecisionView is a recorded exclusion or reinstatement.
type DecisionView struct {
	ID     int64     `json:"id"`
	Model  string    `json:"model"`
	ObsID  int64     `json:"obs_id"`
	Action string    `json:"action"` // exclude or reinstate
	By     string    `json:"by"`
	Reason string    `json:"reason"`
	At     time.Time `json:"at"`
	// Note is the words every view shows: "set aside by X on date: reason".
	Note     string `json:"note"`
	AuditSeq int64  `json:"audit_seq"`
}

// SetAside marks a reading set aside.
type SetAside struct {
	By     string    `json:"by"`
	At     time.Time `json:"at"`
	Reason string    `json:"reason"`
	// Note is "set aside by X on date: reason".
	Note string `json:"note"`
}

// SetAsidePoint is a reading of the model set aside: not in the fit, but
// shown (hollow) with the mark, its values and its provenance.
type SetAsidePoint struct {
	ID   int64            `json:"id"`
	File string           `json:"file"`
	Line int              `json:"line"`
	X    map[string]Float `json:"x"`
	Y    Float            `json:"y"`
	SetAside
}

// RebaselineView is a recorded re-baseline event.
type RebaselineView struct {
	ID       int64     `json:"id"`
	Model    string    `json:"model"`
	From     time.Time `json:"from"`
	By       string    `json:"by"`
	Reason   string    `json:"reason"`
	Recorded time.Time `json:"recorded"`
	Note     string    `json:"note"`
	AuditSeq int64     `json:"audit_seq"`
}

// QuietView is a quiet period.
type QuietView struct {
	ID        int64     `json:"id"`
	Model     string    `json:"model"` // "" for all models
	Start     time.Time `json:"start"`
	End       time.Time `json:"end"`
	Owner     string    `json:"owner"`
	Reason    string    `json:"reason"`
	EndedBy   string    `json:"ended_by,omitempty"`
	EndReason string    `json:"end_reason,omitempty"`
	AuditSeq  int64     `json:"audit_seq,omitempty"`
}

// ResolverBy is an optional interface of a Source whose Resolve can name
// who resolved the alert (for the audit trail).
type ResolverBy interface {
	ResolveBy(ctx context.Context, id, note, who string) error
}

// DecisionLister is an optional interface of a Source that lists every
// exclusion and reinstatement recorded on a model's readings, oldest
// first (the report's decisions section).
type DecisionLister interface {
	Decisions(ctx context.Context, model string) ([]DecisionView, error)
}
