package postgres

import (
	"context"
	"fmt"
	"slices"
	"time"

	"github.com/jackc/pgx/v5"

	"plumb/store"
)

// ClaimDeliveries is DueDeliveries for several daemons sharing one
// outbox: it returns the pending deliveries due at now (most overdue
// first, at most limit, <= 0: all) and, in the same statement, claims
// them until now+hold by moving their NextAttempt there. Rows another
// daemon is claiming at the same moment are skipped (FOR UPDATE SKIP
// LOCKED), so each delivery goes to one daemon; the claimer attempts it
// and stores the outcome with UpdateDelivery as usual. If the claimer
// dies first, the delivery is due again at now+hold and another daemon
// claims it. The deliveries come back with their NextAttempt before the
// claim.
func (db *DB) ClaimDeliveries(ctx context.Context, now time.Time, limit int, hold time.Duration) ([]store.Delivery, error) {
	fail := func(err error) ([]store.Delivery, error) { return nil, fmt.Errorf("store: claim deliveries: %w", err) }
	t, err := encTime(now)
	if err != nil {
		return fail(err)
	}
	until, err := encTime(now.Add(hold))
	if err != nil {
		return fail(err)
	}
	rows, err := db.pool.Query(ctx, `WITH c AS (
			SELECT id, next_attempt FROM deliveries WHERE state = $1 AND next_attempt <= $2
			ORDER BY next_attempt, id LIMIT $3 FOR UPDATE SKIP LOCKED)
		UPDATE deliveries d SET next_attempt = $4 FROM c WHERE d.id = c.id
		RETURNING d.id, d.alert_id, d.route, d.event_id, d.payload, d.state, d.attempts, c.next_attempt, d.last_error,
			d.created_at, d.updated_at`,
		string(store.DeliveryPending), t, sqlLimit(limit), until)
	if err != nil {
		return fail(err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (store.Delivery, error) {
		var d store.Delivery
		err := scanDelivery(r, &d)
		return d, err
	})
	if err != nil {
		return fail(err)
	}
	slices.SortFunc(out, func(a, b store.Delivery) int {
		if c := a.NextAttempt.Compare(b.NextAttempt); c != 0 {
			return c
		}
		return int(min(max(a.ID-b.ID, -1), 1))
	})
	return out, nil
}
