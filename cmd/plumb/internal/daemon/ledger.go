package daemon

import (
	"context"
	"errors"
	"fmt"
	"time"

	"plumb/alerts"
	"plumb/store"
	"plumb/store/backend"
)

// ledger adapts a store.Store to alerts.Ledger. The two packages never
// import each other; their alert types (AlertRecord, AlertQuery,
// Delivery) mirror each other field for field, so the adapter is plain
// type conversions and a field missing on one side does not compile.
type ledger struct {
	s store.Store
	// claim, when set, replaces DueDeliveries: several daemons share the
	// outbox and each delivery is claimed by one (PostgreSQL).
	claim func(ctx context.Context, now time.Time, limit int) ([]store.Delivery, error)
}

var _ alerts.Ledger = ledger{}

func (l ledger) PutAlert(ctx context.Context, a alerts.AlertRecord, ds []alerts.Delivery) error {
	out := make([]store.Delivery, len(ds))
	for i, d := range ds {
		out[i] = store.Delivery(d)
	}
	var err error
	if ds, ok := l.s.(store.Decisions); ok {
		// Every change of an alert's state goes into the audit trail in
		// the same transaction (AlertAudit).
		err = ds.PutAlertAudited(ctx, store.AlertRecord(a), out, AlertAudit)
	} else {
		err = l.s.PutAlert(ctx, store.AlertRecord(a), out)
	}
	if errors.Is(err, store.ErrChanged) {
		return fmt.Errorf("%w: %w", alerts.ErrChanged, err)
	}
	return err
}

func (l ledger) Alert(ctx context.Context, id string) (alerts.AlertRecord, error) {
	r, err := l.s.Alert(ctx, id)
	return alerts.AlertRecord(r), err
}

func (l ledger) Alerts(ctx context.Context, q alerts.AlertQuery) ([]alerts.AlertRecord, error) {
	rs, err := l.s.Alerts(ctx, store.AlertQuery(q))
	out := make([]alerts.AlertRecord, len(rs))
	for i, r := range rs {
		out[i] = alerts.AlertRecord(r)
	}
	return out, err
}

func (l ledger) DueDeliveries(ctx context.Context, now time.Time, limit int) ([]alerts.Delivery, error) {
	if l.claim != nil {
		ds, err := l.claim(ctx, now, limit)
		return fromStoreDeliveries(ds), err
	}
	ds, err := l.s.DueDeliveries(ctx, now, limit)
	return fromStoreDeliveries(ds), err
}

func (l ledger) UpdateDelivery(ctx context.Context, d alerts.Delivery) error {
	return l.s.UpdateDelivery(ctx, store.Delivery(d))
}

func (l ledger) Deliveries(ctx context.Context, state alerts.DeliveryState, limit int) ([]alerts.Delivery, error) {
	ds, err := l.s.Deliveries(ctx, state, limit)
	return fromStoreDeliveries(ds), err
}

func fromStoreDeliveries(ds []store.Delivery) []alerts.Delivery {
	out := make([]alerts.Delivery, len(ds))
	for i, d := range ds {
		out[i] = alerts.Delivery(d)
	}
	return out
}

// OpenLedger opens the config's state database and an alert manager over
// it, for commands that act on alerts while no daemon is running.
func OpenLedger(ctx context.Context, path string, rules alerts.Config) (*alerts.Manager, store.Store, error) {
	db, err := backend.Open(ctx, path)
	if err != nil {
		return nil, nil, err
	}
	m, err := alerts.NewManager(ledger{s: db}, rules)
	if err != nil {
		db.Close()
		return nil, nil, err
	}
	return m, db, nil
}
