package view

import (
	"encoding/json"
	"math"
	"reflect"
	"testing"
	"time"

	"plumb/alerts"
)

// TestAlertDetailReadsTheAlertDocument: what the alerts package writes,
// the read model reads back, field by field, so the alert page shows
// what the webhook sent.
func TestAlertDetailReadsTheAlertDocument(t *testing.T) {
	t0 := time.Date(2026, 12, 4, 3, 0, 0, 0, time.UTC)
	last := t0.Add(3 * time.Hour)
	a := alerts.Alert{
		ID: "sp-0b45c711a175d0ec", Model: "bench-b", Kind: alerts.KindSuspectPoint, Count: 4,
		Explanation: "The row newly read from feed.csv, line 212, lies far from the rest.",
		Measures: []alerts.Measure{
			{Measure: "outlier_p_bonferroni", Family: "test", Value: 0.0008027, Cutoff: 0.05},
			{Measure: "dfbetas", Family: "absolute", Term: "emf_mv", Value: -2.5, Cutoff: 1},
			{Measure: "covratio", Family: "size_adjusted", Value: math.NaN(), Cutoff: 0.3},
		},
		Suggestion: &alerts.Suggestion{Text: "re-measure near emf_mv = 30", At: alerts.Values{"emf_mv": 30}},
		Point:      &alerts.PointDetail{File: "feed.csv", Line: 212, Label: "S-0212", Values: alerts.Values{"emf_mv": 30, "temp_c": 48.2}},
		Ack:        &alerts.AckInfo{By: "night shift", Note: "re-measuring", At: t0.Add(4 * time.Hour)},
		History: []alerts.HistoryEntry{
			{Event: alerts.Opened, At: t0},
			{Event: alerts.Reminder, At: t0.Add(time.Hour), Count: 3, Last: &last},
			{Event: alerts.Acknowledged, At: t0.Add(4 * time.Hour), By: "night shift", Note: "re-measuring"},
		},
		URL: "https://plumb.lab.example/alerts/sp-0b45c711a175d0ec", Caution: alerts.Caution,
	}
	doc, err := json.Marshal(a)
	if err != nil {
		t.Fatal(err)
	}
	got, err := AlertView{ID: a.ID, Doc: doc}.Detail()
	if err != nil {
		t.Fatal(err)
	}
	want := AlertDetail{
		Explanation: a.Explanation, Count: 4, URL: a.URL, Caution: alerts.Caution,
		Measures: []Flag{
			{"outlier_p_bonferroni", "test", "", 0.0008027, 0.05},
			{"dfbetas", "absolute", "emf_mv", -2.5, 1},
			{"covratio", "size_adjusted", "", math.NaN(), 0.3},
		},
		Suggestion: &AlertSuggestion{Text: "re-measure near emf_mv = 30", At: map[string]Float{"emf_mv": 30}},
		Point:      &AlertPoint{File: "feed.csv", Line: 212, Label: "S-0212", Values: map[string]Float{"emf_mv": 30, "temp_c": 48.2}},
		Ack:        &AlertAck{By: "night shift", Note: "re-measuring", At: t0.Add(4 * time.Hour)},
		History: []AlertEvent{
			{Event: "opened", At: t0},
			{Event: "reminder", At: t0.Add(time.Hour), Count: 3, Last: last},
			{Event: "acknowledged", At: t0.Add(4 * time.Hour), By: "night shift", Note: "re-measuring"},
		},
	}
	if !math.IsNaN(got.Measures[2].Value) {
		t.Errorf("undefined COVRATIO read as %v, want NaN", got.Measures[2].Value)
	}
	got.Measures[2].Value, want.Measures[2].Value = 0, 0
	if !reflect.DeepEqual(got, want) {
		t.Errorf("Detail\n got %+v\nwant %+v", got, want)
	}
	if s := MeasureText(got.Measures[0]); s != "Bonferroni outlier test: p = 0.0008, below the 0.05 level" {
		t.Errorf("MeasureText = %q", s)
	}
	if d, err := (AlertView{ID: "x"}).Detail(); err != nil || d.Explanation != "" {
		t.Errorf("no document: %+v, %v", d, err)
	}
	if _, err := (AlertView{ID: "x", Doc: json.RawMessage(`[1]`)}).Detail(); err == nil {
		t.Error("a document that is not an alert read without error")
	}
}

// TestMeasureTextAlertKinds words the alert kinds' own measures.
func TestMeasureTextAlertKinds(t *testing.T) {
	for _, tc := range []struct {
		f    Flag
		want string
	}{
		{Flag{"fragility_index", "", "", 1, 2}, "fragility index 1: removing that many rows changes a conclusion; at or below the limit 2"},
		{Flag{"drift_coefficient", "", "emf_mv", 0.214, 0.15}, "coefficient emf_mv moved 0.214 from its baseline, more than the band 0.15"},
		{Flag{"drift_prediction", "", "upper spec limit", 0.9, 0.5}, "prediction at upper spec limit moved 0.9 from its baseline, more than the band 0.5"},
		{Flag{"silence_seconds", "", "", 7260, 3600}, "no new row for 2h1m0s, longer than 1h0m0s"},
		{Flag{"leverage", "size_adjusted", "", 0.41, 0.2}, "leverage 0.41, above the size-adjusted cutoff 0.2"},
	} {
		if got := MeasureText(tc.f); got != tc.want {
			t.Errorf("MeasureText(%v) = %q, want %q", tc.f, got, tc.want)
		}
	}
}
