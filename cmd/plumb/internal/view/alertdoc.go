package view

import (
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"time"

	"plumb/engine"
)

// AlertDetail is what an alert's document says beyond its ledger line:
// the explanation, every measure with its value and cutoff, the
// suggestion, the reading behind it, and the history of the alert. It is
// read from AlertView.Doc, the alert document whose JSON form the alerts
// package publishes (alerts/schema/alert.schema.json); fields the document
// lacks stay zero.
type AlertDetail struct {
	Explanation string
	Measures    []Flag
	Suggestion  *AlertSuggestion
	// Point is the reading of a suspect-point alert.
	Point *AlertPoint
	// Fragility, Drift and Blocked carry the other kinds' detail.
	Fragility *AlertFragility
	Drift     []AlertDrift
	Blocked   *AlertBlocked
	Ack       *AlertAck
	History   []AlertEvent
	// Count is how many times the condition was reported.
	Count int
	// URL is the alert's page as the config's public_url names it.
	URL     string
	Caution string
}

// AlertSuggestion is the alert's suggestion: what to do, and where.
type AlertSuggestion struct {
	Text string
	At   map[string]Float
}

// AlertPoint is the reading behind a suspect-point alert. Label is the
// row's id-column text ("" when the model has none).
type AlertPoint struct {
	File   string
	Line   int
	Label  string
	Values map[string]Float
}

// AlertFragility is the detail of a fragile-fit alert.
type AlertFragility struct {
	Index, Limit  int
	Removed       []string
	Conclusion    string
	Before, After string
}

// AlertDrift is one quantity a drift alert compares with its baseline.
type AlertDrift struct {
	Name, Kind                  string
	Baseline, Current, StdError Float
	Difference, Band            Float
	InBand                      bool
}

// AlertBlocked is the detail of a blocked alert.
type AlertBlocked struct{ Cause, Reason string }

// AlertAck is the latest acknowledgement.
type AlertAck struct {
	By, Note string
	At       time.Time
}

// AlertEvent is one step of the alert's history: opened, reopened,
// reminder (Count of them in a row, the last at Last), acknowledged (By,
// Note) or resolved (Note; Auto when the condition cleared).
type AlertEvent struct {
	Event    string
	At       time.Time
	By, Note string
	Auto     bool
	Count    int
	Last     time.Time
}

type alertDocJSON struct {
	Explanation string `json:"explanation"`
	Measures    []struct {
		Name   string `json:"name"`
		Family string `json:"family"`
		Term   string `json:"term"`
		Value  Float  `json:"value"`
		Cutoff Float  `json:"cutoff"`
	} `json:"measures"`
	Suggestion *struct {
		Text string           `json:"text"`
		At   map[string]Float `json:"at"`
	} `json:"suggestion"`
	Point *struct {
		File   string           `json:"file"`
		Line   int              `json:"line"`
		Label  string           `json:"label"`
		Values map[string]Float `json:"values"`
	} `json:"point"`
	Fragility *struct {
		Index      int      `json:"index"`
		Limit      int      `json:"limit"`
		Removed    []string `json:"removed"`
		Conclusion string   `json:"conclusion"`
		Before     string   `json:"before"`
		After      string   `json:"after"`
	} `json:"fragility"`
	Drift *struct {
		Measures []struct {
			Name       string `json:"name"`
			Kind       string `json:"kind"`
			Baseline   Float  `json:"baseline"`
			Current    Float  `json:"current"`
			StdError   Float  `json:"std_error"`
			Difference Float  `json:"difference"`
			Band       Float  `json:"band"`
			InBand     bool   `json:"in_band"`
		} `json:"measures"`
	} `json:"drift"`
	Blocked *struct {
		Cause  string `json:"cause"`
		Reason string `json:"reason"`
	} `json:"blocked"`
	Ack *struct {
		By   string    `json:"by"`
		Note string    `json:"note"`
		At   time.Time `json:"at"`
	} `json:"acknowledgement"`
	History []struct {
		Event string     `json:"event"`
		At    time.Time  `json:"at"`
		By    string     `json:"by"`
		Note  string     `json:"note"`
		Auto  bool       `json:"auto"`
		Count int        `json:"count"`
		Last  *time.Time `json:"last"`
	} `json:"history"`
	Count   int    `json:"count"`
	URL     string `json:"url"`
	Caution string `json:"caution"`
}

// Detail reads the alert's document. An alert without one gives a zero
// AlertDetail; a document that is not the alert JSON is an error.
func (a AlertView) Detail() (AlertDetail, error) {
	var d AlertDetail
	if len(a.Doc) == 0 {
		return d, nil
	}
	var j alertDocJSON
	if err := json.Unmarshal(a.Doc, &j); err != nil {
		return d, fmt.Errorf("alert %s: its document: %w", a.ID, err)
	}
	d.Explanation, d.Count, d.URL, d.Caution = j.Explanation, j.Count, j.URL, j.Caution
	for _, m := range j.Measures {
		d.Measures = append(d.Measures, Flag{m.Name, m.Family, m.Term, float64(m.Value), float64(m.Cutoff)})
	}
	if s := j.Suggestion; s != nil {
		d.Suggestion = &AlertSuggestion{Text: s.Text, At: s.At}
	}
	if p := j.Point; p != nil {
		d.Point = &AlertPoint{File: p.File, Line: p.Line, Label: p.Label, Values: p.Values}
	}
	if f := j.Fragility; f != nil {
		d.Fragility = &AlertFragility{Index: f.Index, Limit: f.Limit, Removed: f.Removed, Conclusion: f.Conclusion,
			Before: f.Before, After: f.After}
	}
	if j.Drift != nil {
		for _, m := range j.Drift.Measures {
			d.Drift = append(d.Drift, AlertDrift{Name: m.Name, Kind: m.Kind, Baseline: m.Baseline, Current: m.Current,
				StdError: m.StdError, Difference: m.Difference, Band: m.Band, InBand: m.InBand})
		}
	}
	if b := j.Blocked; b != nil {
		d.Blocked = &AlertBlocked{Cause: b.Cause, Reason: b.Reason}
	}
	if k := j.Ack; k != nil {
		d.Ack = &AlertAck{By: k.By, Note: k.Note, At: k.At}
	}
	for _, h := range j.History {
		e := AlertEvent{Event: h.Event, At: h.At, By: h.By, Note: h.Note, Auto: h.Auto, Count: h.Count}
		if h.Last != nil {
			e.Last = *h.Last
		}
		d.History = append(d.History, e)
	}
	return d, nil
}

// MeasureText says one measure of an alert in words: an engine measure as
// the engine words its flags (engine.Flag.Text), and the alert kinds' own
// measures (fragility_index, drift_coefficient, drift_prediction,
// silence_seconds) in theirs.
func MeasureText(f Flag) string {
	n := func(x float64) string {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return "undefined"
		}
		return strconv.FormatFloat(x, 'g', 4, 64)
	}
	switch f.Measure {
	case "fragility_index":
		return "fragility index " + n(f.Value) + ": removing that many rows changes a conclusion; at or below the limit " + n(f.Cutoff)
	case "drift_coefficient":
		return "coefficient " + f.Term + " moved " + n(f.Value) + " from its baseline, more than the band " + n(f.Cutoff)
	case "drift_prediction":
		name := f.Term
		if name == "" {
			name = "a checkpoint"
		}
		return "prediction at " + name + " moved " + n(f.Value) + " from its baseline, more than the band " + n(f.Cutoff)
	case "silence_seconds":
		return "no new row for " + (time.Duration(f.Value) * time.Second).String() + ", longer than " + (time.Duration(f.Cutoff) * time.Second).String()
	}
	return engine.Flag(f).Text()
}
