package daemon

import (
	"reflect"
	"testing"

	"plumb/alerts"
	"plumb/store"
)

// TestLedgerMirrors checks that the alert ledger's types in alerts and in
// store have the same fields, so the adapter's conversions copy every one.
// AlertRecord and AlertQuery convert directly (a missing field does not
// compile); Delivery differs only in its named state type, so this test
// holds it to the same rule.
func TestLedgerMirrors(t *testing.T) {
	for _, pair := range [][2]any{
		{alerts.AlertRecord{}, store.AlertRecord{}},
		{alerts.AlertQuery{}, store.AlertQuery{}},
		{alerts.Delivery{}, store.Delivery{}},
	} {
		a, s := reflect.TypeOf(pair[0]), reflect.TypeOf(pair[1])
		if a.NumField() != s.NumField() {
			t.Errorf("%v has %d fields, %v %d", a, a.NumField(), s, s.NumField())
			continue
		}
		for i := range a.NumField() {
			fa, fs := a.Field(i), s.Field(i)
			if fa.Name != fs.Name || fa.Type.Kind() != fs.Type.Kind() || !fa.Type.ConvertibleTo(fs.Type) {
				t.Errorf("%v field %d is %s %v, %v has %s %v", a, i, fa.Name, fa.Type, s, fs.Name, fs.Type)
			}
		}
	}
	// The adapter's copies lose nothing.
	d := alerts.Delivery{ID: 1, AlertID: "a", Route: "r", EventID: "e", Payload: []byte("p"), State: alerts.DeliveryDead,
		Attempts: 3, LastError: "x"}
	if back := fromStoreDeliveries([]store.Delivery{toStoreDelivery(d)})[0]; !reflect.DeepEqual(back, d) {
		t.Errorf("delivery round trip = %+v, want %+v", back, d)
	}
}
