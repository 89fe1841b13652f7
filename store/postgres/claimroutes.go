package postgres

import (
	"context"
	"fmt"
	"slices"
	"time"

	"github.com/jackc/pgx/v5"

	"plumb/store"
)

// ClaimRouteDeliveries is ClaimDeliveries limited to the named routes: a
// daemon claims only deliveries it has a route for, so a route one
// daemon of a fleet configures is never dead-lettered by another that
// lacks it. Routes of the same name on several daemons are taken for the
// same route: each delivery goes once, from whichever of them claims it.
// A nil or empty routes claims nothing.
func (db *DB) ClaimRouteDeliveries(ctx context.Context, now time.Time, limit int, hold time.Duration, routes []string) ([]store.Delivery, error) {
	fail := func(err error) ([]store.Delivery, error) { return nil, fmt.Errorf("store: claim deliveries: %w", err) }
	if len(routes) == 0 {
		return nil, nil
	}
	t, err := encTime(now)
	if err != nil {
		return fail(err)
	}
	until, err := encTime(now.Add(hold))
	if err != nil {
		return fail(err)
	}
	rows, err := db.pool.Query(ctx, `WITH c AS (
			SELECT id, next_attempt FROM deliveries WHERE state = $1 AND next_attempt <= $2 AND route = ANY($5)
			ORDER BY next_attempt, id LIMIT $3 FOR UPDATE SKIP LOCKED)
		UPDATE deliveries d SET next_attempt = $4 FROM c WHERE d.id = c.id
		RETURNING d.id, d.alert_id, d.route, d.event_id, d.payload, d.state, d.attempts, c.next_attempt, d.last_error,
			d.created_at, d.updated_at`,
		string(store.DeliveryPending), t, sqlLimit(limit), until, routes)
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
