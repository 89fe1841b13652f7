package alerts

import (
	_ "embed"
	"encoding/json"
	"net/url"
	"strconv"
	"time"
)

// CloudEvents constants for the structured JSON mode.
const (
	// ContentType is the HTTP Content-Type of a structured-mode event.
	ContentType = "application/cloudevents+json; charset=UTF-8"
	// SpecVersion is the CloudEvents version the events follow.
	SpecVersion = "1.0"
	// TypePrefix starts every event type: TypePrefix + kind + "." + transition,
	// e.g. "org.plumb.alert.suspect_point.opened".
	TypePrefix = "org.plumb.alert."
	// SchemaID is the $id of the alert payload schema and the default
	// dataschema attribute.
	SchemaID = "urn:plumb:schema:alert:1"
)

// SchemaJSON is the JSON Schema (2020-12) of the alert document (Alert),
// the data of every event.
//
//go:embed schema/alert.schema.json
var SchemaJSON []byte

// Event is a CloudEvents 1.0 event in structured JSON mode, as stored in a
// delivery's Payload and sent by every route. Extension attributes:
// plumbalertid (the alert id, shared by all events of one alert),
// plumbseverity and plumbstate.
type Event struct {
	ID              string          `json:"id"`
	Source          string          `json:"source"`
	SpecVersion     string          `json:"specversion"`
	Type            string          `json:"type"`
	Time            time.Time       `json:"time"`
	Subject         string          `json:"subject"`
	DataContentType string          `json:"datacontenttype"`
	DataSchema      string          `json:"dataschema"`
	AlertID         string          `json:"plumbalertid"`
	Severity        string          `json:"plumbseverity"`
	State           string          `json:"plumbstate"`
	Data            json.RawMessage `json:"data"`
}

// EventID returns the CloudEvents id of an alert's seq-th event.
func EventID(alertID string, seq int) string {
	return alertID + "-" + strconv.Itoa(seq)
}

// EventType returns the CloudEvents type for a kind and transition.
func EventType(k Kind, t Transition) string {
	return TypePrefix + string(k) + "." + string(t)
}

// Source returns the CloudEvents source of a model's events:
// "/plumb/<model>" without a host, "plumb://<host>/<model>" with one (the
// model name path-escaped).
func Source(host, model string) string {
	if host == "" {
		return "/plumb/" + url.PathEscape(model)
	}
	return "plumb://" + host + "/" + url.PathEscape(model)
}

// newEvent builds the event for the alert's latest transition.
func newEvent(a *Alert, host, schema string) ([]byte, error) {
	doc, err := json.Marshal(a)
	if err != nil {
		return nil, err
	}
	e := Event{
		ID:              EventID(a.ID, a.Sequence),
		Source:          Source(host, a.Model),
		SpecVersion:     SpecVersion,
		Type:            EventType(a.Kind, a.Event),
		Time:            a.NotifiedAt.UTC(),
		Subject:         a.Subject,
		DataContentType: "application/json",
		DataSchema:      schema,
		AlertID:         a.ID,
		Severity:        string(a.Severity),
		State:           string(a.State),
		Data:            doc,
	}
	return json.Marshal(e)
}

// DecodeEvent parses a structured-mode event (a delivery's Payload).
func DecodeEvent(b []byte) (*Event, error) {
	var e Event
	if err := json.Unmarshal(b, &e); err != nil {
		return nil, err
	}
	return &e, nil
}

// DecodeAlert parses an alert document (AlertRecord.Doc or Event.Data).
func DecodeAlert(doc []byte) (*Alert, error) {
	var a Alert
	if err := json.Unmarshal(doc, &a); err != nil {
		return nil, err
	}
	return &a, nil
}
