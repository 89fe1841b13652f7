package alerts

import (
	"context"
	"errors"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"
)

// Scenario (invented): model "bench-b" calibrates a bench sensor's reading
// (response "signal") against a reference "dose"; rows arrive in feed.csv.

func testRoutes() []RouteConfig {
	return []RouteConfig{
		{Name: "oncall", Kind: RouteWebhook, URL: "http://127.0.0.1:9911/hook"},
		{Name: "journal", Kind: RouteLog},
	}
}

type harness struct {
	m     *Manager
	l     *memLedger
	clock *fakeClock
}

func newHarness(tb testing.TB, mutate func(*Config)) *harness {
	tb.Helper()
	h := &harness{l: newMemLedger(), clock: newClock()}
	c := Config{Rules: DefaultRules(), Routes: testRoutes(), Now: h.clock.Now}
	if mutate != nil {
		mutate(&c)
	}
	m, err := NewManager(h.l, c)
	if err != nil {
		tb.Fatalf("NewManager: %v", err)
	}
	h.m = m
	return h
}

func suspectRow(line int) PointCondition {
	return PointCondition{
		Model: "bench-b", File: "feed.csv", Line: line,
		Values:  Values{"signal": 48.2, "dose": 30},
		Outlier: true, Influential: true,
		Measures: []Measure{
			{Measure: "outlier_p_bonferroni", Family: "test", Value: 0.0077, Cutoff: 0.05},
			{Measure: "cooks_distance", Family: "absolute", Value: 3.42, Cutoff: 1},
			{Measure: "dffits", Family: "size_adjusted", Value: 4.30, Cutoff: 0.69},
		},
		Suggestion: &Suggestion{Text: "measure near dose 24", At: Values{"dose": 24}},
	}
}

// must returns a checker of (alert, error) results: mustAlert(t)(m.Point(...)).
func mustAlert(tb testing.TB) func(*Alert, error) *Alert {
	return func(a *Alert, err error) *Alert {
		tb.Helper()
		if err != nil {
			tb.Fatal(err)
		}
		if a == nil {
			tb.Fatal("no alert")
		}
		return a
	}
}

func TestPointDedupe(t *testing.T) {
	h := newHarness(t, nil)
	ctx := context.Background()
	first := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if first.ID != ID("bench-b", KindSuspectPoint, "bench-b/feed.csv:212") {
		t.Errorf("id %q is not derived from (model, kind, subject)", first.ID)
	}
	if !strings.HasPrefix(first.ID, "sp-") || len(first.ID) != 19 {
		t.Errorf("id %q: want sp- and 16 hex digits", first.ID)
	}
	if first.Subject != "bench-b/feed.csv:212" || first.State != StateOpen || first.Count != 1 {
		t.Errorf("first report: %v count %d", first, first.Count)
	}
	h.clock.Add(time.Minute)
	mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	h.clock.Add(time.Minute)
	last := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if last.ID != first.ID || last.Count != 3 {
		t.Errorf("after 3 reports: id %s count %d, want %s count 3", last.ID, last.Count, first.ID)
	}
	if !last.FirstSeen.Equal(first.FirstSeen) || !last.LastSeen.Equal(first.FirstSeen.Add(2*time.Minute)) {
		t.Errorf("first/last seen %v %v", last.FirstSeen, last.LastSeen)
	}
	if n := len(h.l.alerts); n != 1 {
		t.Errorf("%d alerts in ledger, want 1", n)
	}
	for _, route := range []string{"oncall", "journal"} {
		es := eventsOf(t, h.l, route)
		if len(es) != 1 || es[0].Type != "org.plumb.alert.suspect_point.opened" || es[0].ID != first.ID+"-1" {
			t.Errorf("route %s: events %v, want one opened event %s-1", route, eventTypes(es), first.ID)
		}
	}
	rec := h.l.alerts[first.ID]
	stored, err := DecodeAlert([]byte(rec.Doc))
	if err != nil {
		t.Fatal(err)
	}
	if stored.Count != 3 || rec.State != "open" || rec.Kind != "suspect_point" || rec.Severity != "warning" {
		t.Errorf("stored record %+v count %d", rec, stored.Count)
	}
	// Another row is another alert.
	other := mustAlert(t)(h.m.Point(ctx, suspectRow(213)))
	if other.ID == first.ID {
		t.Error("two rows share an alert id")
	}
}

func TestPointRule(t *testing.T) {
	bonf := Measure{Measure: "outlier_p_bonferroni", Family: "test", Value: 0.001, Cutoff: 0.05}
	grubbs := Measure{Measure: "grubbs", Family: "test", Value: 3.1, Cutoff: 2.7}
	cook := Measure{Measure: "cooks_distance", Family: "absolute", Value: 1.4, Cutoff: 1}
	dffits := Measure{Measure: "dffits", Family: "size_adjusted", Value: 1.2, Cutoff: 0.69}
	lev := Measure{Measure: "leverage", Family: "size_adjusted", Value: 0.5, Cutoff: 0.24}
	cov := Measure{Measure: "covratio", Family: "size_adjusted", Value: 1.6, Cutoff: 1.36}
	tests := []struct {
		name      string
		test      string
		c         PointCondition
		wantAlert bool
	}{
		{"outlier and Cook", "bonferroni", PointCondition{Measures: []Measure{bonf, cook}}, true},
		{"outlier and DFFITS", "bonferroni", PointCondition{Measures: []Measure{bonf, dffits}}, true},
		{"outlier only", "bonferroni", PointCondition{Outlier: true, Measures: []Measure{bonf}}, false},
		{"influential only", "bonferroni", PointCondition{Influential: true, Measures: []Measure{cook, dffits}}, false},
		{"high leverage that fits", "bonferroni", PointCondition{Measures: []Measure{lev}}, false},
		{"outlier with leverage and COVRATIO only", "bonferroni",
			PointCondition{Outlier: true, Influential: true, Measures: []Measure{bonf, lev, cov}}, false},
		{"grubbs rule ignores Bonferroni", "grubbs", PointCondition{Outlier: true, Measures: []Measure{bonf, cook}}, false},
		{"grubbs rule", "grubbs", PointCondition{Measures: []Measure{grubbs, cook}}, true},
		{"flags without measures", "bonferroni", PointCondition{Outlier: true, Influential: true}, true},
		{"flag for outlier, measure for influence", "bonferroni",
			PointCondition{Outlier: true, Measures: []Measure{dffits}}, true},
		{"nothing", "bonferroni", PointCondition{}, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			h := newHarness(t, func(c *Config) { c.Rules.SuspectPoint.Test = tt.test })
			tt.c.Model, tt.c.File, tt.c.Line = "bench-b", "feed.csv", 7
			a, err := h.m.Point(context.Background(), tt.c)
			if err != nil {
				t.Fatal(err)
			}
			if (a != nil) != tt.wantAlert {
				t.Errorf("alert %v, want alert: %v", a, tt.wantAlert)
			}
			if n := len(h.l.all()); (n > 0) != tt.wantAlert {
				t.Errorf("%d deliveries", n)
			}
		})
	}
}

func TestPointResolvesWhenNoLongerSuspect(t *testing.T) {
	h := newHarness(t, nil)
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	calm := suspectRow(212)
	calm.Outlier, calm.Influential, calm.Measures = false, false, nil
	r := mustAlert(t)(h.m.Point(ctx, calm))
	if r.ID != a.ID || r.State != StateResolved || r.Resolution == nil || !r.Resolution.Auto {
		t.Errorf("got %v resolution %+v", r, r.Resolution)
	}
	want := []string{"org.plumb.alert.suspect_point.opened", "org.plumb.alert.suspect_point.resolved"}
	if got := eventTypes(eventsOf(t, h.l, "oncall")); !slices.Equal(got, want) {
		t.Errorf("events %v, want %v", got, want)
	}
	// A row that never was suspect touches nothing.
	calm.Line = 300
	if a, err := h.m.Point(ctx, calm); err != nil || a != nil {
		t.Errorf("calm row: %v %v", a, err)
	}
}

func TestFragilityLifecycle(t *testing.T) {
	h := newHarness(t, nil) // limit 2
	ctx := context.Background()
	cond := func(idx int) FragilityCondition {
		return FragilityCondition{Model: "bench-b", Index: idx, Removed: []string{"feed.csv:9"},
			Conclusion: "slope of dose differs from 0 at the 5% level", Before: "p = 0.03", After: "p = 0.08",
			Suggestion: &Suggestion{Text: "add standards between dose 20 and 30", At: Values{"dose": 25}}}
	}
	steps := []struct {
		index     int
		wantState State
		wantCount int
		wantEvent string // "" for none
	}{
		{3, "", 0, ""},
		{1, StateOpen, 1, "opened"},
		{2, StateOpen, 2, ""},
		{1, StateOpen, 3, ""},
		{3, StateResolved, 3, "resolved"},
		{4, "", 0, ""}, // already resolved: nothing changes, nil
		{2, StateOpen, 4, "reopened"},
		{-1, StateResolved, 4, "resolved"},
	}
	var id string
	nEvents := 0
	for i, s := range steps {
		h.clock.Add(time.Minute)
		a, err := h.m.Fragility(ctx, cond(s.index))
		if err != nil {
			t.Fatal(err)
		}
		if s.wantState == "" {
			if a != nil {
				t.Fatalf("step %d: alert %v, want none", i, a)
			}
			continue
		}
		if a == nil {
			t.Fatalf("step %d: no alert", i)
		}
		if id == "" {
			id = a.ID
		}
		if a.ID != id || a.State != s.wantState || a.Count != s.wantCount {
			t.Errorf("step %d (index %d): %v count %d, want %s count %d", i, s.index, a, a.Count, s.wantState, s.wantCount)
		}
		es := eventsOf(t, h.l, "oncall")
		if s.wantEvent != "" {
			nEvents++
			if len(es) != nEvents || es[len(es)-1].Type != EventType(KindFragileFit, Transition(s.wantEvent)) {
				t.Errorf("step %d: events %v, want %d ending in %s", i, eventTypes(es), nEvents, s.wantEvent)
			}
			if last := es[len(es)-1]; last.ID != EventID(id, nEvents) || last.AlertID != id {
				t.Errorf("step %d: event id %s (alert %s), want %s", i, last.ID, last.AlertID, EventID(id, nEvents))
			}
		} else if len(es) != nEvents {
			t.Errorf("step %d: %d events, want %d (an update sends nothing)", i, len(es), nEvents)
		}
	}
}

func TestDriftBands(t *testing.T) {
	h := newHarness(t, func(c *Config) {
		c.Rules.Drift.K = 3
		c.Rules.Drift.Tolerance = map[string]float64{"at dose 50": 0.5}
	})
	ctx := context.Background()
	cond := func(slope, pred float64) DriftCondition {
		return DriftCondition{Model: "bench-b", Baseline: "fit after the first 20 rows", Measures: []DriftMeasure{
			{Name: "dose", Kind: DriftCoefficient, Baseline: 1.60, Current: slope, StdError: 0.05},
			{Name: "at dose 50", Kind: DriftPrediction, At: Values{"dose": 50}, Baseline: 82.0, Current: pred, StdError: 0.01},
		}}
	}
	// 0.14 = 2.8 SE: in band; prediction 0.4 units within tolerance 0.5
	// (although 40 SE: the tolerance replaces the k-SE band).
	if a, err := h.m.Drift(ctx, cond(1.74, 82.4)); err != nil || a != nil {
		t.Fatalf("in band: %v %v", a, err)
	}
	a := mustAlert(t)(h.m.Drift(ctx, cond(1.76, 82.4))) // 3.2 SE
	if a.Severity != SeverityCritical || len(a.Measures) != 1 || a.Measures[0].Term != "dose" {
		t.Errorf("coefficient out of band: %v measures %+v", a, a.Measures)
	}
	if !strings.Contains(a.Explanation, "3.2 standard errors") {
		t.Errorf("explanation %q does not give the shift", a.Explanation)
	}
	a = mustAlert(t)(h.m.Drift(ctx, cond(1.60, 82.6)))
	if a.State != StateOpen || len(a.Measures) != 1 || a.Measures[0].Term != "at dose 50" || a.Drift.Measures[1].Rule != "tolerance" {
		t.Errorf("prediction out of tolerance: %v %+v", a, a.Measures)
	}
	a = mustAlert(t)(h.m.Drift(ctx, cond(1.61, 82.1)))
	if a.State != StateResolved {
		t.Errorf("back in band: %v", a)
	}
}

func TestBlockedAndSilence(t *testing.T) {
	h := newHarness(t, func(c *Config) { c.Rules.Blocked.Silence = 2 * time.Hour })
	ctx := context.Background()
	a := mustAlert(t)(h.m.Blocked(ctx, BlockedCondition{Model: "bench-b", Blocked: true, Cause: CauseCollinear,
		Reason: "terms dose and dose^2 are collinear"}))
	if a.Subject != "bench-b" || a.Blocked.Cause != CauseCollinear {
		t.Errorf("blocked: %v %+v", a, a.Blocked)
	}
	a = mustAlert(t)(h.m.Blocked(ctx, BlockedCondition{Model: "bench-b", Blocked: false}))
	if a.State != StateResolved {
		t.Errorf("unblocked: %v", a)
	}

	start := h.clock.Now()
	if err := h.m.Activity(ctx, "bench-b", start); err != nil {
		t.Fatal(err)
	}
	if err := h.m.Tick(ctx, start.Add(2*time.Hour)); err != nil {
		t.Fatal(err)
	}
	sid := ID("bench-b", KindBlocked, SilenceSubject("bench-b"))
	if _, ok := h.l.alerts[sid]; ok {
		t.Fatal("silence alert at exactly the limit")
	}
	h.clock.Add(2*time.Hour + time.Second)
	if err := h.m.Tick(ctx, h.clock.Now()); err != nil {
		t.Fatal(err)
	}
	if err := h.m.Tick(ctx, h.clock.Add(time.Minute)); err != nil {
		t.Fatal(err)
	}
	s, err := h.m.Get(ctx, sid)
	if err != nil {
		t.Fatal(err)
	}
	if s.State != StateOpen || s.Blocked.Cause != CauseSilent || s.Count != 1 || s.Blocked.LastData == nil {
		t.Errorf("silence: %v count %d detail %+v", s, s.Count, s.Blocked)
	}
	if err := h.m.Activity(ctx, "bench-b", h.clock.Add(time.Minute)); err != nil {
		t.Fatal(err)
	}
	if s, _ = h.m.Get(ctx, sid); s.State != StateResolved {
		t.Errorf("after activity: %v", s)
	}
}

func TestRenotifyInterval(t *testing.T) {
	h := newHarness(t, func(c *Config) { c.Rules.SuspectPoint.Renotify = 4 * time.Hour })
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	count := func() int { return len(eventsOf(t, h.l, "oncall")) }
	steps := []struct {
		after time.Duration
		want  int
	}{
		{time.Hour, 1},
		{3*time.Hour - time.Second, 1},
		{time.Second, 2}, // 4 h after opening
		{time.Hour, 2},
		{3 * time.Hour, 3},
	}
	for i, s := range steps {
		// Repeated reports in between never page.
		mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
		if err := h.m.Tick(ctx, h.clock.Add(s.after)); err != nil {
			t.Fatal(err)
		}
		if got := count(); got != s.want {
			t.Errorf("step %d: %d events, want %d", i, got, s.want)
		}
	}
	es := eventsOf(t, h.l, "oncall")
	if es[1].Type != "org.plumb.alert.suspect_point.reminder" || es[1].ID != a.ID+"-2" {
		t.Errorf("reminder event %s %s", es[1].Type, es[1].ID)
	}
	// Acknowledged alerts get no reminders.
	if _, err := h.m.Ack(ctx, a.ID, "checking the sample log", "night shift"); err != nil {
		t.Fatal(err)
	}
	n := count()
	if err := h.m.Tick(ctx, h.clock.Add(24*time.Hour)); err != nil {
		t.Fatal(err)
	}
	if count() != n {
		t.Errorf("reminder sent for an acknowledged alert")
	}
}

func TestAckResolveReopen(t *testing.T) {
	h := newHarness(t, nil)
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	ack, err := h.m.Ack(ctx, a.ID, "re-measuring the standard", "duty analyst")
	if err != nil {
		t.Fatal(err)
	}
	if ack.State != StateAcknowledged || ack.Ack.By != "duty analyst" || ack.Ack.Note != "re-measuring the standard" {
		t.Errorf("ack: %v %+v", ack, ack.Ack)
	}
	// Still reported while acknowledged: count goes up, no page.
	upd := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if upd.State != StateAcknowledged || upd.Count != 2 {
		t.Errorf("update while acknowledged: %v count %d", upd, upd.Count)
	}
	res, err := h.m.Resolve(ctx, a.ID, "sample was contaminated; documented in deviation log")
	if err != nil {
		t.Fatal(err)
	}
	if res.State != StateResolved || res.Resolution.Auto {
		t.Errorf("resolve: %v %+v", res, res.Resolution)
	}
	if _, err := h.m.Resolve(ctx, a.ID, ""); !errors.Is(err, ErrNotOpen) {
		t.Errorf("resolve twice: %v, want ErrNotOpen", err)
	}
	if _, err := h.m.Ack(ctx, a.ID, "", "x"); !errors.Is(err, ErrNotOpen) {
		t.Errorf("ack resolved: %v, want ErrNotOpen", err)
	}
	re := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if re.ID != a.ID || re.State != StateOpen || re.Ack != nil || re.Resolution != nil || re.Count != 3 {
		t.Errorf("reopen: %v count %d ack %v res %v", re, re.Count, re.Ack, re.Resolution)
	}
	want := []string{"opened", "acknowledged", "resolved", "reopened"}
	var got []string
	for _, e := range eventsOf(t, h.l, "oncall") {
		got = append(got, strings.TrimPrefix(e.Type, "org.plumb.alert.suspect_point."))
	}
	if !slices.Equal(got, want) {
		t.Errorf("events %v, want %v", got, want)
	}
	if _, err := h.m.Ack(ctx, "sp-0000000000000000", "", "x"); !errors.Is(err, errFakeNotFound) {
		t.Errorf("ack unknown: %v, want the ledger's not-found", err)
	}
}

func TestRouteSelection(t *testing.T) {
	routes := []RouteConfig{
		{Name: "all", Kind: RouteLog},
		{Name: "critical-only", Kind: RouteLog, MinSeverity: "critical"},
		{Name: "drift-only", Kind: RouteLog, Kinds: []string{"drift"}},
		{Name: "lab-a", Kind: RouteLog, Models: []string{"lab-a"}},
		{Name: "pager", Kind: RouteLog},
	}
	h := newHarness(t, func(c *Config) {
		c.Routes = routes
		c.ModelRoutes = map[string][]string{"night-run": {"pager"}}
	})
	ctx := context.Background()
	mustAlert(t)(h.m.Point(ctx, suspectRow(1)))
	pc := suspectRow(1)
	pc.Model = "night-run"
	mustAlert(t)(h.m.Point(ctx, pc))
	mustAlert(t)(h.m.Drift(ctx, DriftCondition{Model: "bench-b", Measures: []DriftMeasure{
		{Name: "dose", Kind: DriftCoefficient, Baseline: 1, Current: 2, StdError: 0.1}}}))
	got := map[string][]string{}
	for _, d := range h.l.all() {
		got[d.AlertID] = append(got[d.AlertID], d.Route)
	}
	want := map[string][]string{
		ID("bench-b", KindSuspectPoint, "bench-b/feed.csv:1"):     {"all", "pager"},
		ID("night-run", KindSuspectPoint, "night-run/feed.csv:1"): {"pager"},
		ID("bench-b", KindDrift, "bench-b"):                       {"all", "critical-only", "drift-only", "pager"},
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("routes %v, want %v", got, want)
	}
	if _, err := NewManager(newMemLedger(), Config{Rules: DefaultRules(), Routes: routes,
		ModelRoutes: map[string][]string{"x": {"nope"}}}); err == nil || !strings.Contains(err.Error(), `"nope"`) {
		t.Errorf("unknown model route: %v", err)
	}
}

func TestDisabledRule(t *testing.T) {
	h := newHarness(t, func(c *Config) {
		c.ModelRules = map[string]Rules{"bench-b": DefaultRules()}
		r := c.ModelRules["bench-b"]
		r.SuspectPoint.Enabled = false
		c.ModelRules["bench-b"] = r
	})
	if a, err := h.m.Point(context.Background(), suspectRow(212)); err != nil || a != nil {
		t.Errorf("disabled rule raised %v %v", a, err)
	}
	pc := suspectRow(212)
	pc.Model = "other"
	mustAlert(t)(h.m.Point(context.Background(), pc))
}

func TestManagerReloadsOpenAlerts(t *testing.T) {
	h := newHarness(t, nil)
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	// A restarted daemon: a new Manager on the same ledger.
	m2, err := NewManager(h.l, Config{Rules: DefaultRules(), Routes: testRoutes(), Now: h.clock.Now})
	if err != nil {
		t.Fatal(err)
	}
	again := mustAlert(t)(m2.Point(ctx, suspectRow(212)))
	if again.ID != a.ID || again.Count != 2 {
		t.Errorf("after restart: %v count %d", again, again.Count)
	}
	calm := suspectRow(212)
	calm.Outlier, calm.Influential, calm.Measures = false, false, nil
	if r := mustAlert(t)(m2.Point(ctx, calm)); r.State != StateResolved {
		t.Errorf("restarted manager did not resolve: %v", r)
	}
	if n := len(eventsOf(t, h.l, "oncall")); n != 2 {
		t.Errorf("%d events, want opened and resolved", n)
	}
}

func TestLedgerFailureKeepsState(t *testing.T) {
	h := newHarness(t, nil)
	ctx := context.Background()
	boom := errors.New("disk full")
	h.l.failPut = boom
	if _, err := h.m.Point(ctx, suspectRow(212)); !errors.Is(err, boom) {
		t.Fatalf("err %v, want wrapped %v", err, boom)
	}
	h.l.failPut = nil
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if a.Count != 1 || a.Sequence != 1 {
		t.Errorf("after a failed write: count %d sequence %d, want 1 1", a.Count, a.Sequence)
	}
}

func TestAckFromAnotherManagerIsKept(t *testing.T) {
	h := newHarness(t, func(c *Config) { c.Rules.SuspectPoint.Renotify = time.Hour })
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	// An offline command opens its own Manager on the same ledger.
	cli, err := NewManager(h.l, Config{Rules: DefaultRules(), Now: h.clock.Now})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := cli.Ack(ctx, a.ID, "checking", "duty analyst"); err != nil {
		t.Fatal(err)
	}
	upd := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if upd.State != StateAcknowledged || upd.Ack == nil || upd.Count != 2 {
		t.Errorf("daemon's update after an outside ack: %v ack %v count %d", upd, upd.Ack, upd.Count)
	}
	n := len(eventsOf(t, h.l, "oncall"))
	if err := h.m.Tick(ctx, h.clock.Add(2*time.Hour)); err != nil {
		t.Fatal(err)
	}
	if got := len(eventsOf(t, h.l, "oncall")); got != n {
		t.Errorf("reminder for an alert acknowledged elsewhere (%d events, want %d)", got, n)
	}
	if _, err := cli.Resolve(ctx, a.ID, "done"); err != nil {
		t.Fatal(err)
	}
	calm := suspectRow(212)
	calm.Outlier, calm.Influential, calm.Measures = false, false, nil
	if r, err := h.m.Point(ctx, calm); err != nil || r != nil {
		t.Errorf("clear after an outside resolve changed %v (%v)", r, err)
	}
	if rec := h.l.alerts[a.ID]; rec.State != "resolved" {
		t.Errorf("state %s", rec.State)
	}
}

func TestSilenceOfAFeedThatNeverDelivers(t *testing.T) {
	rules := DefaultRules()
	rules.Blocked.Silence = time.Hour
	h := newHarness(t, func(c *Config) { c.ModelRules = map[string]Rules{"night-run": rules} })
	ctx := context.Background()
	if err := h.m.Tick(ctx, h.clock.Add(59*time.Minute)); err != nil {
		t.Fatal(err)
	}
	if len(h.l.alerts) != 0 {
		t.Fatal("silence alert before the limit")
	}
	if err := h.m.Tick(ctx, h.clock.Add(2*time.Minute)); err != nil {
		t.Fatal(err)
	}
	a, err := h.m.Get(ctx, ID("night-run", KindBlocked, "night-run/feed"))
	if err != nil {
		t.Fatal(err)
	}
	if a.State != StateOpen || a.Blocked.Cause != CauseSilent {
		t.Errorf("%v %+v", a, a.Blocked)
	}
}

// interposer is a Ledger that runs before, once, just ahead of the next
// PutAlert: another writer acting between a Manager's read and its write.
type interposer struct {
	*memLedger
	before func()
}

func (l *interposer) PutAlert(ctx context.Context, a AlertRecord, ds []Delivery) error {
	if f := l.before; f != nil {
		l.before = nil
		f()
	}
	return l.memLedger.PutAlert(ctx, a, ds)
}

// TestAckBetweenReadAndWriteIsKept: an acknowledgement written by another
// process after the daemon's Manager read the alert and before it wrote
// its update is not overwritten: the write conflicts, the Manager reads
// again and applies its update on top of the acknowledgement. The same
// holds for a resolution met by a reminder, and an ack met by a
// resolution from a third Manager.
func TestAckBetweenReadAndWriteIsKept(t *testing.T) {
	ctx := context.Background()
	h := newHarness(t, func(c *Config) { c.Rules.SuspectPoint.Renotify = time.Hour })
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	il := &interposer{memLedger: h.l}
	daemon, err := NewManager(il, Config{Rules: DefaultRules(), Routes: testRoutes(), Now: h.clock.Now})
	if err != nil {
		t.Fatal(err)
	}
	cli, err := NewManager(h.l, Config{Rules: DefaultRules(), Now: h.clock.Now})
	if err != nil {
		t.Fatal(err)
	}
	il.before = func() {
		if _, err := cli.Ack(ctx, a.ID, "on it", "duty analyst"); err != nil {
			t.Errorf("ack: %v", err)
		}
	}
	upd := mustAlert(t)(daemon.Point(ctx, suspectRow(212)))
	if il.before != nil {
		t.Fatal("the ack did not run between the read and the write")
	}
	rec := h.l.alerts[a.ID]
	stored, err := DecodeAlert([]byte(rec.Doc))
	if err != nil {
		t.Fatal(err)
	}
	for what, got := range map[string]*Alert{"returned": upd, "stored": stored} {
		if got.State != StateAcknowledged || got.Ack == nil || got.Ack.By != "duty analyst" || got.Count != 2 {
			t.Errorf("%s after an ack in between: state %s ack %+v count %d; want acknowledged, the ack kept, count 2",
				what, got.State, got.Ack, got.Count)
		}
	}

	// A reminder that meets a resolution made in between is not sent,
	// and the alert stays resolved (the outside Manager has no routes, so
	// its resolution enqueues nothing either).
	b := mustAlert(t)(h.m.Point(ctx, suspectRow(300)))
	before := len(eventsOf(t, h.l, "oncall"))
	rules := DefaultRules()
	rules.SuspectPoint.Renotify = time.Hour
	ticker, err := NewManager(il, Config{Rules: rules, Routes: testRoutes(), Now: h.clock.Now})
	if err != nil {
		t.Fatal(err)
	}
	il.before = func() {
		if _, err := cli.Resolve(ctx, b.ID, "handled"); err != nil {
			t.Errorf("resolve: %v", err)
		}
	}
	if err := ticker.Tick(ctx, h.clock.Add(2*time.Hour)); err != nil {
		t.Fatal(err)
	}
	if il.before != nil {
		t.Fatal("the resolution did not run between the read and the write")
	}
	if st := h.l.alerts[b.ID].State; st != string(StateResolved) {
		t.Errorf("after a reminder met a resolution: state %s, want resolved", st)
	}
	// The acknowledged alert a gets no reminder; b's was withdrawn.
	if got := len(eventsOf(t, h.l, "oncall")); got != before {
		t.Errorf("%d events after the tick, want %d: a reminder went out for an alert resolved in between", got, before)
	}
}
