package alerts

import (
	"context"
	"time"
)

// Ledger stores alerts and their delivery outbox. It mirrors the alert
// methods and types of plumb's store one-to-one (AlertRecord, AlertQuery,
// Delivery and DeliveryState have the same fields), so the daemon adapts
// the store with field copies:
//
//	func (a adapter) PutAlert(ctx context.Context, r alerts.AlertRecord, ds []alerts.Delivery) error {
//		return a.s.PutAlert(ctx, store.AlertRecord(r), toStore(ds))
//	}
//
// A Ledger must be safe for use by multiple goroutines (the Manager and the
// Dispatcher use it at once). Errors are returned wrapped, unchanged in
// kind: errors.Is(err, store.ErrNotFound) still works on a Manager error.
type Ledger interface {
	// PutAlert inserts or updates the alert with a.ID and, in the same
	// transaction, enqueues the deliveries (their ID is assigned by the
	// ledger); a delivery whose non-empty EventID is already enqueued for
	// the same Route is skipped (the store's rule). With a.Revision n >= 1 it writes only when the stored
	// alert is at revision n-1 (n = 1: none stored, or one at revision 0)
	// and otherwise writes nothing and returns an error wrapping
	// ErrChanged; 0 writes unconditionally. The stored revision becomes
	// one more than before. The Manager always writes conditionally.
	PutAlert(ctx context.Context, a AlertRecord, deliveries []Delivery) error
	// Alert returns one alert by id, or an error wrapping a not-found
	// sentinel of the ledger's own.
	Alert(ctx context.Context, id string) (AlertRecord, error)
	// Alerts lists alerts, newest first by LastSeen.
	Alerts(ctx context.Context, q AlertQuery) ([]AlertRecord, error)
	// DueDeliveries returns pending deliveries whose NextAttempt <= now,
	// oldest first, at most limit.
	DueDeliveries(ctx context.Context, now time.Time, limit int) ([]Delivery, error)
	// UpdateDelivery stores a delivery's new status after an attempt.
	UpdateDelivery(ctx context.Context, d Delivery) error
	// Deliveries lists deliveries in a state ("" for all), newest first, at
	// most limit.
	Deliveries(ctx context.Context, state DeliveryState, limit int) ([]Delivery, error)
}

// AlertRecord is one alert in the ledger (store.AlertRecord). Doc is the
// alert's JSON document (Alert).
type AlertRecord struct {
	ID        string
	Model     string
	Kind      string
	Subject   string
	Severity  string
	State     string // "open", "acknowledged", "resolved"
	FirstSeen time.Time
	LastSeen  time.Time
	Doc       string
	Revision  int64 // counts the alert's writes (see Ledger.PutAlert)
}

// AlertQuery selects alerts (store.AlertQuery).
type AlertQuery struct {
	State   string // "" for all
	Model   string // "" for all
	Kind    string
	Subject string
	Limit   int
	Offset  int
}

// DeliveryState is the state of one outbox entry (store.DeliveryState).
// It is a string, as the alert record's kind and state are, so that the
// ledger's types convert to the store's directly.
type DeliveryState = string

// The delivery states.
const (
	DeliveryPending   DeliveryState = "pending"
	DeliveryDelivered DeliveryState = "delivered"
	DeliveryDead      DeliveryState = "dead"
)

// Delivery is one outbox entry: one alert event for one route
// (store.Delivery). Payload is the CloudEvent in structured JSON mode;
// EventID is its id.
type Delivery struct {
	ID          int64
	AlertID     string
	Route       string
	EventID     string
	Payload     []byte
	State       DeliveryState
	Attempts    int
	NextAttempt time.Time
	LastError   string
	CreatedAt   time.Time
	UpdatedAt   time.Time
}
