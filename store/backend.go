package store

import (
	"fmt"
	"time"
)

// Rules every backend applies the same way. They live here so that each
// backend (sqlite, memstore, a PostgreSQL one) calls them instead of
// writing them again.

// ValidDeliveryState reports whether s is a known delivery state.
func ValidDeliveryState(s DeliveryState) bool {
	return s == DeliveryPending || s == DeliveryDelivered || s == DeliveryDead
}

// CheckProvenance checks an observation's or quarantined row's model,
// path and generation against its batch's source: each may be zero
// (meaning the source's) or equal to it.
func CheckProvenance(src Source, model, path string, gen int) error {
	if model != "" && model != src.Model {
		return fmt.Errorf("model %q differs from the batch's %q", model, src.Model)
	}
	if path != "" && path != src.Path {
		return fmt.Errorf("path %q differs from the batch's %q", path, src.Path)
	}
	if gen != 0 && gen != src.Generation {
		return fmt.Errorf("generation %d differs from the batch's %d", gen, src.Generation)
	}
	return nil
}

// DeliveryDefaults fills what PutAlert leaves to the store in a delivery
// of alert id (see Store.PutAlert): the alert id, the pending state, and
// the times (CreatedAt now, NextAttempt and UpdatedAt CreatedAt). A
// delivery of another alert or in an unknown state is an error.
func DeliveryDefaults(d Delivery, id string, now time.Time) (Delivery, error) {
	if d.AlertID == "" {
		d.AlertID = id
	}
	if d.AlertID != id {
		return d, fmt.Errorf("delivery for alert %q in PutAlert of %q", d.AlertID, id)
	}
	if d.State == "" {
		d.State = DeliveryPending
	}
	if !ValidDeliveryState(d.State) {
		return d, fmt.Errorf("delivery state %q unknown", d.State)
	}
	if d.CreatedAt.IsZero() {
		d.CreatedAt = now
	}
	if d.NextAttempt.IsZero() {
		d.NextAttempt = d.CreatedAt
	}
	if d.UpdatedAt.IsZero() {
		d.UpdatedAt = d.CreatedAt
	}
	return d, nil
}
