package transfer

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"time"

	"plumb/store"
)

// ErrDecisions is returned (wrapped) by Copy, before anything is written,
// when the source holds recorded decisions (readings set aside or
// reinstated, re-baselines, quiet periods). A decision names an
// observation by the source's id and is chained into the audit trail;
// copying it through the store's interface would either change its
// reading's id or add audit records the source does not have, and a
// lab's record must not change on its way. Keep the source file (its
// trail verifies with "plumb audit verify"), or copy before recording
// decisions.
var ErrDecisions = errors.New("transfer: the source holds recorded decisions, which are not copied")

// ErrTrail is returned (wrapped) by Copy, before anything is written,
// when the source holds an audit trail that the target cannot keep (a
// target without store.Decisions), or when the target's trail is not a
// prefix of the source's.
var ErrTrail = errors.New("transfer: the audit trail cannot be copied")

// checkDecisions refuses a source with decisions, and a source trail the
// target cannot take. It returns the source's trail (nil when there is
// none) for copyTrail.
func checkDecisions(ctx context.Context, src, dst store.Store, models []string) ([]store.AuditRecord, error) {
	sd, ok := src.(store.Decisions)
	if !ok {
		return nil, nil
	}
	var found []string
	for _, m := range models {
		ds, err := sd.Decisions(ctx, m)
		if err != nil {
			return nil, err
		}
		rs, err := sd.Rebaselines(ctx, m)
		if err != nil {
			return nil, err
		}
		if len(ds) > 0 || len(rs) > 0 {
			found = append(found, fmt.Sprintf("model %s: %d decision(s) on readings, %d re-baseline(s)", m, len(ds), len(rs)))
		}
	}
	qs, err := sd.QuietPeriods(ctx, "", time.Time{})
	if err != nil {
		return nil, err
	}
	if len(qs) > 0 {
		found = append(found, fmt.Sprintf("%d quiet period(s)", len(qs)))
	}
	if len(found) > 0 {
		return nil, fmt.Errorf("%w (%s): they name the source's observation ids and are chained into its audit trail; "+
			"keep the source as the record (\"plumb audit verify\" checks it), or copy before decisions are recorded", ErrDecisions, strings.Join(found, "; "))
	}
	trail, err := sd.Audit(ctx, store.AuditQuery{})
	if err != nil {
		return nil, err
	}
	if len(trail) == 0 {
		return nil, nil
	}
	dd, ok := dst.(store.Decisions)
	if !ok {
		return nil, fmt.Errorf("%w: the source holds %d audit record(s) and the target (%T) keeps no trail", ErrTrail, len(trail), dst)
	}
	have, err := dd.Audit(ctx, store.AuditQuery{})
	if err != nil {
		return nil, err
	}
	if len(have) > len(trail) {
		return nil, fmt.Errorf("%w: the target's trail has %d records, the source's %d", ErrTrail, len(have), len(trail))
	}
	for i, r := range have {
		if r.Hash != trail[i].Hash {
			return nil, fmt.Errorf("%w: record %d differs between the target's trail and the source's", ErrTrail, r.Seq)
		}
	}
	return trail, nil
}

// copyTrail appends the source's audit records the target lacks, in
// order, and checks that each is sealed with the source's hash: the
// records, their times and their chain arrive unchanged.
func copyTrail(ctx context.Context, dst store.Store, trail []store.AuditRecord, rep *Report) error {
	if len(trail) == 0 {
		return nil
	}
	dd := dst.(store.Decisions)
	have, err := dd.Audit(ctx, store.AuditQuery{})
	if err != nil {
		return err
	}
	for _, r := range trail[len(have):] {
		got, err := dd.AppendAudit(ctx, r)
		if err != nil {
			return fmt.Errorf("audit record %d: %w", r.Seq, err)
		}
		if got.Seq != r.Seq || got.Hash != r.Hash {
			return fmt.Errorf("%w: record %d copied as %d with hash %s, the source's is %s", ErrTrail, r.Seq, got.Seq, got.Hash, r.Hash)
		}
		rep.CopiedAudit++
	}
	rep.Audit = int64(len(trail))
	return nil
}
