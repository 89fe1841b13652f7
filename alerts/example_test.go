package alerts_test

import (
	"fmt"
	"time"

	"plumb/alerts"
)

// A receiver checks the Plumb-Signature header against the raw body before
// it trusts an event, and dedupes by the event id.
func ExampleVerifySignature() {
	secret := []byte("shared-with-the-receiver")
	body := []byte(`{"id":"sp-0b45c711a175d0ec-1","specversion":"1.0"}`)
	sent := time.Unix(1796025600, 0)
	header := alerts.Sign(alerts.NewSecret(secret), sent, body)
	fmt.Println(header[:13])

	fmt.Println(alerts.VerifySignature(secret, header, body, sent.Add(30*time.Second), 5*time.Minute))
	fmt.Println(alerts.VerifySignature([]byte("guess"), header, body, sent, 0))
	fmt.Println(alerts.VerifySignature(secret, header, body, sent.Add(time.Hour), 5*time.Minute))
	// Output:
	// t=1796025600,
	// <nil>
	// alerts: signature does not match
	// alerts: signature timestamp outside tolerance
}

func ExampleID() {
	fmt.Println(alerts.ID("bench-b", alerts.KindSuspectPoint, alerts.PointSubject("bench-b", "feed.csv", 212)))
	fmt.Println(alerts.EventID("sp-0b45c711a175d0ec", 3))
	fmt.Println(alerts.EventType(alerts.KindDrift, alerts.Reopened))
	// Output:
	// sp-0b45c711a175d0ec
	// sp-0b45c711a175d0ec-3
	// org.plumb.alert.drift.reopened
}
