package alerts

import (
	"context"
	"encoding/json"
	"strings"
	"testing"
	"time"
)

// TestHistory follows one alert through its life: opened, three
// reminders (one entry), acknowledged with who and the note, resolved by
// hand, reopened. The dashboard's alert page reads this history.
func TestHistory(t *testing.T) {
	h := newHarness(t, func(c *Config) {
		c.Rules.SuspectPoint.Renotify = time.Hour
		c.DashboardURL = "https://plumb.lab.example/"
	})
	ctx := context.Background()
	opened := h.clock.Now()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if want := "https://plumb.lab.example/alerts/" + a.ID; a.URL != want {
		t.Errorf("URL %q, want %q", a.URL, want)
	}
	var last time.Time
	for range 3 {
		last = h.clock.Add(time.Hour)
		if err := h.m.Tick(ctx, last); err != nil {
			t.Fatal(err)
		}
	}
	ackAt := h.clock.Add(time.Minute)
	if _, err := h.m.Ack(ctx, a.ID, "re-measuring the standard", "duty analyst"); err != nil {
		t.Fatal(err)
	}
	resAt := h.clock.Add(time.Minute)
	res, err := h.m.Resolve(ctx, a.ID, "standard was mislabelled")
	if err != nil {
		t.Fatal(err)
	}
	want := []HistoryEntry{
		{Event: Opened, At: opened},
		{Event: Reminder, At: opened.Add(time.Hour), Count: 3, Last: &last},
		{Event: Acknowledged, At: ackAt, By: "duty analyst", Note: "re-measuring the standard"},
		{Event: Resolved, At: resAt, Note: "standard was mislabelled"},
	}
	got, _ := json.Marshal(res.History)
	w, _ := json.Marshal(want)
	if string(got) != string(w) {
		t.Errorf("history\n got %s\nwant %s", got, w)
	}
	// The stored document and every event carry the history and the URL.
	es := eventsOf(t, h.l, "oncall")
	if n := len(es); n != 6 {
		t.Fatalf("%d events, want 6 (opened, 3 reminders, acknowledged, resolved)", n)
	}
	data := string(es[len(es)-1].Data)
	if !strings.Contains(data, `"history":[`) || !strings.Contains(data, `"url":"https://plumb.lab.example/alerts/`+a.ID+`"`) {
		t.Errorf("last event's data lacks history or url: %s", data)
	}
	re := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if n := len(re.History); n != 5 || re.History[4].Event != Reopened {
		t.Errorf("after reopening: %+v", re.History)
	}
	if _, err := h.m.Resolve(ctx, a.ID, ""); err != nil {
		t.Fatal(err)
	}
	_, err = h.m.Ack(ctx, a.ID, "", "x")
	if err == nil || strings.Count(err.Error(), "resolved") != 1 {
		t.Errorf("ack of a resolved alert: %v, want it said once", err)
	}
}

// TestHistoryBounded keeps the first entry and the latest ones.
func TestHistoryBounded(t *testing.T) {
	a := &Alert{}
	now := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	a.record(Opened, now)
	for i := range 2 * maxHistory {
		t := Acknowledged
		if i%2 == 1 {
			t = Reopened
		}
		a.record(t, now.Add(time.Duration(i+1)*time.Minute))
	}
	if len(a.History) != maxHistory || a.History[0].Event != Opened {
		t.Fatalf("%d entries, first %v", len(a.History), a.History[0].Event)
	}
	if got := a.History[maxHistory-1].At; !got.Equal(now.Add(2 * maxHistory * time.Minute)) {
		t.Errorf("last entry at %v", got)
	}
}
