package store

import (
	"errors"
	"testing"
	"time"
)

func TestPlanImport(t *testing.T) {
	at := time.Date(2026, 7, 1, 9, 0, 0, 0, time.UTC)
	var trail []AuditRecord
	for i := range 4 {
		r := AuditRecord{At: at.Add(time.Duration(i) * time.Minute), Actor: "r.okafor", Action: ActionAcknowledge, Subject: "a"}
		var last AuditRecord
		if i > 0 {
			last = trail[i-1]
		}
		trail = append(trail, Seal(r, last))
	}
	q := QuietPeriod{ID: 1, Model: "cal", Start: at, End: at.Add(time.Hour), Owner: "o", Reason: "r", Created: at, AuditSeq: 2}
	ended := q
	ended.End, ended.EndedBy, ended.EndReason, ended.AuditSeq = at.Add(time.Minute), "o", "done", 4
	src := DecisionHistory{Audit: trail,
		Decisions:   []Decision{{ID: 1, Model: "cal", ObsID: 7, Action: ActionExclude, Actor: "a", Reason: "r", At: at, AuditSeq: 1}},
		Rebaselines: []Rebaseline{{ID: 1, Model: "cal", From: at, Actor: "a", Reason: "r", Recorded: at, AuditSeq: 3}},
		Quiet:       []QuietPeriod{ended}}

	// Into an empty target: everything.
	p, err := PlanImport(DecisionHistory{}, src)
	if err != nil || len(p.Audit) != 4 || len(p.Decisions) != 1 || len(p.Rebaselines) != 1 || len(p.Quiet) != 1 || len(p.QuietEnded) != 0 {
		t.Fatalf("into an empty target: %+v, %v", p, err)
	}
	// Into a target copied earlier (two records, the period not yet ended).
	earlier := DecisionHistory{Audit: trail[:2], Decisions: src.Decisions, Quiet: []QuietPeriod{q}}
	p, err = PlanImport(earlier, src)
	if err != nil || len(p.Audit) != 2 || p.Audit[0].Seq != 3 || len(p.Decisions) != 0 || len(p.Rebaselines) != 1 ||
		len(p.Quiet) != 0 || len(p.QuietEnded) != 1 {
		t.Fatalf("into an earlier copy: %+v, %v", p, err)
	}
	// Into a complete copy: nothing.
	if p, err := PlanImport(src, src); err != nil || !p.Empty() {
		t.Fatalf("into a complete copy: %+v, %v", p, err)
	}

	edited := append([]AuditRecord(nil), trail[:2]...)
	edited[1].Reason = "changed"
	otherObs := src
	otherObs.Decisions = []Decision{src.Decisions[0]}
	otherObs.Decisions[0].ObsID = 8
	extraQuiet := src
	extraQuiet.Quiet = append([]QuietPeriod{}, ended, QuietPeriod{ID: 2})
	for name, have := range map[string]DecisionHistory{
		"another trail":             {Audit: edited},
		"a longer trail":            {Audit: append(append([]AuditRecord(nil), trail...), trail[0])},
		"another decision":          otherObs,
		"a decision of its own":     {Decisions: []Decision{{ID: 2}}},
		"a quiet period of its own": extraQuiet,
	} {
		t.Run(name, func(t *testing.T) {
			if _, err := PlanImport(have, src); !errors.Is(err, ErrConflict) {
				t.Errorf("PlanImport: %v, want ErrConflict", err)
			} else {
				t.Log(err)
			}
		})
	}
}
