package store

import (
	"fmt"
	"slices"
)

// copyConflict is a difference between a target's decisions and those
// copied into it. It is ErrConflict (errors.Is) without repeating
// ErrConflict's text, which speaks of a decision rather than a copy.
type copyConflict struct{ msg string }

func (e *copyConflict) Error() string        { return e.msg }
func (e *copyConflict) Is(target error) bool { return target == ErrConflict }

func conflictf(format string, a ...any) error { return &copyConflict{fmt.Sprintf(format, a...)} }

// DecisionHistory is everything a Decisions store holds: the audit trail
// exactly as stored and the decisions, re-baselines and quiet periods, as
// a copy of the history from one backend to another (store/transfer)
// reads it from the source and writes it into the target. Each list is in
// ascending order (Seq, ID).
type DecisionHistory struct {
	Audit       []AuditRecord
	Decisions   []Decision
	Rebaselines []Rebaseline
	Quiet       []QuietPeriod
}

// Empty reports whether h holds nothing.
func (h DecisionHistory) Empty() bool {
	return len(h.Audit) == 0 && len(h.Decisions) == 0 && len(h.Rebaselines) == 0 && len(h.Quiet) == 0
}

// ImportPlan is what a target lacks of a copied DecisionHistory: the
// audit records after its own (appended verbatim, never sealed again),
// the rows it does not have, and the quiet periods the source ended
// since an earlier copy (whose end, EndedBy, EndReason and AuditSeq the
// target takes).
type ImportPlan struct {
	Audit       []AuditRecord
	Decisions   []Decision
	Rebaselines []Rebaseline
	Quiet       []QuietPeriod
	QuietEnded  []QuietPeriod
}

// Empty reports whether the plan writes nothing: the target holds the
// whole history already.
func (p ImportPlan) Empty() bool {
	return len(p.Audit) == 0 && len(p.Decisions) == 0 && len(p.Rebaselines) == 0 && len(p.Quiet) == 0 && len(p.QuietEnded) == 0
}

// SameAuditRecord reports whether a and b are the same record, field for
// field (times to the nanosecond).
func SameAuditRecord(a, b AuditRecord) bool {
	return a.Seq == b.Seq && a.At.Equal(b.At) && a.Actor == b.Actor && a.Action == b.Action && a.Model == b.Model &&
		a.Subject == b.Subject && a.Reason == b.Reason && a.Before == b.Before && a.After == b.After &&
		a.Prev == b.Prev && a.Hash == b.Hash
}

// CheckTrailPrefix checks that the trail have (a target's) is the start
// of the trail want (a source's): the same records, field for field, so
// that appending the rest of want verbatim gives want. Otherwise it
// returns an error that is ErrConflict (errors.Is) and names the first difference.
func CheckTrailPrefix(have, want []AuditRecord) error {
	for i, h := range have {
		if i >= len(want) {
			return conflictf("the target already has a different audit trail: %d records, the source's only %d",
				len(have), len(want))
		}
		if !SameAuditRecord(h, want[i]) {
			return conflictf("the target already has a different audit trail: its record %d (%s by %s, hash %.12s) is not the source's record %d (%s by %s, hash %.12s)",
				h.Seq, h.Action, h.Actor, h.Hash, want[i].Seq, want[i].Action, want[i].Actor, want[i].Hash)
		}
	}
	return nil
}

func sameDecision(a, b Decision) bool {
	return a.ID == b.ID && a.Model == b.Model && a.ObsID == b.ObsID && a.Action == b.Action && a.Actor == b.Actor &&
		a.Reason == b.Reason && a.At.Equal(b.At) && a.Subject == b.Subject && a.AuditSeq == b.AuditSeq
}

func sameRebaseline(a, b Rebaseline) bool {
	return a.ID == b.ID && a.Model == b.Model && a.From.Equal(b.From) && a.Actor == b.Actor && a.Reason == b.Reason &&
		a.Recorded.Equal(b.Recorded) && a.AuditSeq == b.AuditSeq
}

// sameQuietSet compares what a quiet period was set with; sameQuiet also
// how it ended.
func sameQuietSet(a, b QuietPeriod) bool {
	return a.ID == b.ID && a.Model == b.Model && a.Start.Equal(b.Start) && a.Owner == b.Owner && a.Reason == b.Reason &&
		a.Created.Equal(b.Created)
}

func sameQuiet(a, b QuietPeriod) bool {
	return sameQuietSet(a, b) && a.End.Equal(b.End) && a.EndedBy == b.EndedBy && a.EndReason == b.EndReason && a.AuditSeq == b.AuditSeq
}

// PlanImport compares the history a target holds (have) with the one
// copied into it (want, whose observation ids are already the target's)
// and returns what the target lacks. The target must hold a start of
// want and nothing else: its trail the first records of want's
// (CheckTrailPrefix), each of its rows the row of want with the same id.
// A quiet period that want has ended and have has not is to be ended. Any
// other difference is an error that is ErrConflict (errors.Is): the target has a
// history of its own, which a copy must not mix with another.
func PlanImport(have, want DecisionHistory) (ImportPlan, error) {
	var p ImportPlan
	if err := CheckTrailPrefix(have.Audit, want.Audit); err != nil {
		return p, err
	}
	p.Audit = want.Audit[len(have.Audit):]
	var err error
	if p.Decisions, err = planRows("decision", have.Decisions, want.Decisions,
		func(d Decision) int64 { return d.ID }, sameDecision); err != nil {
		return p, err
	}
	if p.Rebaselines, err = planRows("re-baseline", have.Rebaselines, want.Rebaselines,
		func(r Rebaseline) int64 { return r.ID }, sameRebaseline); err != nil {
		return p, err
	}
	// A quiet period ended in the source after an earlier copy is ended
	// in the target too; a period ended differently is a conflict.
	mine := map[int64]QuietPeriod{}
	for _, q := range have.Quiet {
		mine[q.ID] = q
	}
	for _, q := range want.Quiet {
		h, ok := mine[q.ID]
		delete(mine, q.ID)
		switch {
		case !ok:
			p.Quiet = append(p.Quiet, q)
		case sameQuiet(h, q):
		case sameQuietSet(h, q) && h.EndedBy == "" && q.EndedBy != "" && q.AuditSeq > h.AuditSeq:
			p.QuietEnded = append(p.QuietEnded, q)
		default:
			return p, conflictf("the target's quiet period %d differs from the source's", q.ID)
		}
	}
	if len(mine) > 0 {
		ids := make([]int64, 0, len(mine))
		for id := range mine {
			ids = append(ids, id)
		}
		slices.Sort(ids)
		return p, conflictf("the target has quiet period %d, which the source does not", ids[0])
	}
	return p, nil
}

// planRows returns the rows of want that have lacks, by id; a row of
// have that want lacks or holds differently is a conflict.
func planRows[T any](what string, have, want []T, id func(T) int64, same func(a, b T) bool) ([]T, error) {
	mine := make(map[int64]T, len(have))
	for _, r := range have {
		mine[id(r)] = r
	}
	var out []T
	for _, r := range want {
		h, ok := mine[id(r)]
		if !ok {
			out = append(out, r)
			continue
		}
		delete(mine, id(r))
		if !same(h, r) {
			return nil, conflictf("the target's %s %d differs from the source's", what, id(r))
		}
	}
	if len(mine) > 0 {
		ids := make([]int64, 0, len(mine))
		for k := range mine {
			ids = append(ids, k)
		}
		slices.Sort(ids)
		return nil, conflictf("the target has %s %d, which the source does not", what, ids[0])
	}
	return out, nil
}
