package alerts

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"slices"
	"sort"
	"sync"
	"testing"
	"time"
)

var errFakeNotFound = errors.New("fake ledger: not found")

// memLedger is an in-memory Ledger with the store's documented semantics.
type memLedger struct {
	mu     sync.Mutex
	alerts map[string]AlertRecord
	ds     []Delivery
	nextID int64
	// failPut, when set, makes PutAlert fail.
	failPut error
}

var _ Ledger = (*memLedger)(nil)

func newMemLedger() *memLedger { return &memLedger{alerts: make(map[string]AlertRecord)} }

func (l *memLedger) PutAlert(ctx context.Context, a AlertRecord, ds []Delivery) error {
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.failPut != nil {
		return l.failPut
	}
	old := l.alerts[a.ID]
	if a.Revision > 0 && old.Revision != a.Revision-1 {
		return fmt.Errorf("alert %s: revision %d stored, %d written: %w", a.ID, old.Revision, a.Revision, ErrChanged)
	}
	a.Revision = old.Revision + 1
	l.alerts[a.ID] = a
	for _, d := range ds {
		// As the store: an event is enqueued once per route.
		if d.EventID != "" && slices.ContainsFunc(l.ds, func(x Delivery) bool { return x.Route == d.Route && x.EventID == d.EventID }) {
			continue
		}
		l.nextID++
		d.ID = l.nextID
		d.Payload = append([]byte(nil), d.Payload...)
		l.ds = append(l.ds, d)
	}
	return nil
}

func (l *memLedger) Alert(ctx context.Context, id string) (AlertRecord, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	a, ok := l.alerts[id]
	if !ok {
		return AlertRecord{}, fmt.Errorf("alert %s: %w", id, errFakeNotFound)
	}
	return a, nil
}

func (l *memLedger) Alerts(ctx context.Context, q AlertQuery) ([]AlertRecord, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	var out []AlertRecord
	for _, a := range l.alerts {
		if (q.State == "" || a.State == q.State) && (q.Model == "" || a.Model == q.Model) &&
			(q.Kind == "" || a.Kind == q.Kind) && (q.Subject == "" || a.Subject == q.Subject) {
			out = append(out, a)
		}
	}
	sort.Slice(out, func(i, j int) bool {
		if !out[i].LastSeen.Equal(out[j].LastSeen) {
			return out[i].LastSeen.After(out[j].LastSeen)
		}
		return out[i].ID < out[j].ID
	})
	if q.Offset > 0 {
		if q.Offset >= len(out) {
			return nil, nil
		}
		out = out[q.Offset:]
	}
	if q.Limit > 0 && len(out) > q.Limit {
		out = out[:q.Limit]
	}
	return out, nil
}

func (l *memLedger) DueDeliveries(ctx context.Context, now time.Time, limit int) ([]Delivery, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	var out []Delivery
	for _, d := range l.ds {
		if d.State == DeliveryPending && !d.NextAttempt.After(now) {
			out = append(out, d)
		}
	}
	// As the store: ORDER BY next_attempt, id.
	sort.SliceStable(out, func(i, j int) bool {
		if !out[i].NextAttempt.Equal(out[j].NextAttempt) {
			return out[i].NextAttempt.Before(out[j].NextAttempt)
		}
		return out[i].ID < out[j].ID
	})
	if limit > 0 && len(out) > limit {
		out = out[:limit]
	}
	return out, nil
}

func (l *memLedger) UpdateDelivery(ctx context.Context, d Delivery) error {
	l.mu.Lock()
	defer l.mu.Unlock()
	for i := range l.ds {
		if l.ds[i].ID == d.ID {
			l.ds[i] = d
			return nil
		}
	}
	return fmt.Errorf("delivery %d: %w", d.ID, errFakeNotFound)
}

func (l *memLedger) Deliveries(ctx context.Context, state DeliveryState, limit int) ([]Delivery, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	var out []Delivery
	for i := len(l.ds) - 1; i >= 0; i-- {
		if state == "" || l.ds[i].State == state {
			out = append(out, l.ds[i])
			if limit > 0 && len(out) == limit {
				break
			}
		}
	}
	return out, nil
}

// all returns every delivery, oldest first.
func (l *memLedger) all() []Delivery {
	l.mu.Lock()
	defer l.mu.Unlock()
	return append([]Delivery(nil), l.ds...)
}

// fakeClock is a settable clock.
type fakeClock struct {
	mu sync.Mutex
	t  time.Time
}

func newClock() *fakeClock {
	return &fakeClock{t: time.Date(2026, 11, 30, 8, 0, 0, 0, time.UTC)}
}

func (c *fakeClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

func (c *fakeClock) Add(d time.Duration) time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.t = c.t.Add(d)
	return c.t
}

// eventsOf decodes the ledger's deliveries for one route, oldest first.
func eventsOf(tb testing.TB, l *memLedger, route string) []*Event {
	tb.Helper()
	var out []*Event
	for _, d := range l.all() {
		if d.Route != route {
			continue
		}
		e, err := DecodeEvent(d.Payload)
		if err != nil {
			tb.Fatalf("delivery %d: %v", d.ID, err)
		}
		if e.ID != d.EventID {
			tb.Fatalf("delivery %d: event id %q, delivery says %q", d.ID, e.ID, d.EventID)
		}
		out = append(out, e)
	}
	return out
}

func eventTypes(es []*Event) []string {
	var out []string
	for _, e := range es {
		out = append(out, e.Type)
	}
	return out
}

func discardLogger() *slog.Logger { return slog.New(slog.DiscardHandler) }

func nan() float64 { return math.NaN() }
