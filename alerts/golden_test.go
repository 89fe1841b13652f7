package alerts

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"log/slog"
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"
)

var update = flag.Bool("update", false, "rewrite the golden files in ../testdata/golden/alerts")

const goldenDir = "../testdata/golden/alerts"

func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join(goldenDir, name)
	if *update {
		if err := os.MkdirAll(goldenDir, 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./alerts/... -update)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs from the golden file:\n--- got\n%s\n--- want\n%s", name, got, want)
	}
}

// goldenAlerts produces one event of each kind (and a resolution) on a
// fixed clock and returns the ledger.
func goldenAlerts(t *testing.T) *memLedger {
	t.Helper()
	h := newHarness(t, func(c *Config) {
		c.Routes = []RouteConfig{{Name: "oncall", Kind: RouteWebhook, URL: "http://127.0.0.1:9911/hook"}}
	})
	ctx := context.Background()
	must := mustAlert(t)
	must(h.m.Point(ctx, suspectRow(212)))
	h.clock.Add(time.Minute)
	must(h.m.Fragility(ctx, FragilityCondition{Model: "bench-b", Index: 1, Removed: []string{"feed.csv:212"},
		Conclusion: "slope of dose differs from 0 at the 5% level", Before: "p = 0.012", After: "p = 0.21",
		Suggestion: &Suggestion{Text: "add two standards between dose 24 and 30", At: Values{"dose": 27}}}))
	h.clock.Add(time.Minute)
	must(h.m.Drift(ctx, DriftCondition{Model: "bench-b", Baseline: "fit after the first 20 rows",
		Measures: []DriftMeasure{
			{Name: "intercept", Kind: DriftCoefficient, Baseline: 2.34, Current: 2.41, StdError: 1.10},
			{Name: "dose", Kind: DriftCoefficient, Baseline: 1.616, Current: 1.83, StdError: 0.05},
		}}))
	h.clock.Add(time.Minute)
	must(h.m.Blocked(ctx, BlockedCondition{Model: "bench-c", Blocked: true, Cause: CauseTooFewRows,
		Reason: "3 rows for 3 coefficients"}))
	h.clock.Add(time.Minute)
	must(h.m.Fragility(ctx, FragilityCondition{Model: "bench-b", Index: 5}))
	h.clock.Add(time.Minute)
	must(h.m.Form(ctx, formRefresh(2)))
	return h.l
}

func TestGoldenPayloads(t *testing.T) {
	l := goldenAlerts(t)
	ds := l.all()
	names := []string{"suspect_point.opened", "fragile_fit.opened", "drift.opened", "blocked.opened", "fragile_fit.resolved", "form_lapse.opened"}
	if len(ds) != len(names) {
		t.Fatalf("%d deliveries, want %d", len(ds), len(names))
	}
	for i, d := range ds {
		var buf bytes.Buffer
		if err := json.Indent(&buf, d.Payload, "", "  "); err != nil {
			t.Fatal(err)
		}
		buf.WriteByte('\n')
		golden(t, "event."+names[i]+".json", buf.Bytes())
	}
}

func TestGoldenFileRoute(t *testing.T) {
	l := goldenAlerts(t)
	path := filepath.Join(t.TempDir(), "alerts.jsonl")
	route, err := NewRoute(RouteConfig{Name: "archive", Kind: RouteFile, Path: path}, RouteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, d := range l.all() {
		if err := route.Send(context.Background(), d); err != nil {
			t.Fatal(err)
		}
	}
	got, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := bytes.Split(bytes.TrimSuffix(got, []byte("\n")), []byte("\n"))
	if len(lines) != len(l.all()) {
		t.Fatalf("%d lines, want one per event", len(lines))
	}
	for i, line := range lines {
		if !json.Valid(line) || !bytes.Equal(line, l.all()[i].Payload) {
			t.Errorf("line %d is not the event", i+1)
		}
	}
	golden(t, "file_route.jsonl", got)
}

func TestGoldenLogRoute(t *testing.T) {
	l := goldenAlerts(t)
	var buf bytes.Buffer
	logger := slog.New(slog.NewJSONHandler(&buf, &slog.HandlerOptions{
		// The record's own time is the wall clock: drop it for the golden file.
		ReplaceAttr: func(groups []string, a slog.Attr) slog.Attr {
			if len(groups) == 0 && a.Key == slog.TimeKey {
				return slog.Attr{}
			}
			return a
		},
	}))
	route, err := NewRoute(RouteConfig{Name: "journal", Kind: RouteLog}, RouteOptions{Logger: logger})
	if err != nil {
		t.Fatal(err)
	}
	for _, d := range l.all() {
		if err := route.Send(context.Background(), d); err != nil {
			t.Fatal(err)
		}
	}
	for i, line := range bytes.Split(bytes.TrimSuffix(buf.Bytes(), []byte("\n")), []byte("\n")) {
		var m map[string]any
		if err := json.Unmarshal(line, &m); err != nil {
			t.Fatalf("line %d: %v", i+1, err)
		}
		for _, k := range []string{"level", "msg", "alert_id", "event_id", "subject", "caution"} {
			if _, ok := m[k]; !ok {
				t.Errorf("line %d lacks %s", i+1, k)
			}
		}
	}
	golden(t, "log_route.jsonl", buf.Bytes())
}

// TestSchemaRequired checks every produced document against the required
// keys of the embedded schema (top level and each present sub-object).
func TestSchemaRequired(t *testing.T) {
	var schema struct {
		Schema     string                     `json:"$schema"`
		ID         string                     `json:"$id"`
		Required   []string                   `json:"required"`
		Properties map[string]json.RawMessage `json:"properties"`
		Defs       map[string]json.RawMessage `json:"$defs"`
	}
	if err := json.Unmarshal(SchemaJSON, &schema); err != nil {
		t.Fatalf("schema is not JSON: %v", err)
	}
	if schema.Schema != "https://json-schema.org/draft/2020-12/schema" || schema.ID != SchemaID {
		t.Errorf("schema $schema %q $id %q", schema.Schema, schema.ID)
	}
	type sub struct {
		Required []string `json:"required"`
		Items    *struct {
			Ref      string   `json:"$ref"`
			Required []string `json:"required"`
		} `json:"items"`
		Properties map[string]json.RawMessage `json:"properties"`
	}
	subs := map[string]sub{}
	for k, raw := range schema.Properties {
		var s sub
		if err := json.Unmarshal(raw, &s); err != nil {
			t.Fatalf("property %s: %v", k, err)
		}
		subs[k] = s
	}
	var measure sub
	json.Unmarshal(schema.Defs["measure"], &measure)
	var driftItem sub
	json.Unmarshal(subs["drift"].Properties["measures"], &driftItem)

	check := func(where string, doc map[string]json.RawMessage, required []string) {
		t.Helper()
		for _, k := range required {
			v, ok := doc[k]
			if !ok || string(v) == "null" {
				t.Errorf("%s: required %q missing", where, k)
			}
		}
	}
	// Every kind and transition, including acknowledgement and reopening.
	l := goldenAlerts(t)
	h := newHarness(t, nil)
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(5)))
	h.m.Ack(ctx, a.ID, "on it", "duty analyst")
	h.m.Resolve(ctx, a.ID, "re-measured")
	mustAlert(t)(h.m.Point(ctx, suspectRow(5)))
	var seenKinds []string
	for _, d := range append(l.all(), h.l.all()...) {
		e, err := DecodeEvent(d.Payload)
		if err != nil {
			t.Fatal(err)
		}
		var doc map[string]json.RawMessage
		if err := json.Unmarshal(e.Data, &doc); err != nil {
			t.Fatal(err)
		}
		check(e.ID, doc, schema.Required)
		for k, s := range subs {
			raw, ok := doc[k]
			if !ok || len(s.Required) == 0 {
				continue
			}
			var obj map[string]json.RawMessage
			if err := json.Unmarshal(raw, &obj); err != nil {
				t.Errorf("%s.%s: %v", e.ID, k, err)
				continue
			}
			check(e.ID+"."+k, obj, s.Required)
			if k == "form" {
				var form sub
				json.Unmarshal(subs["form"].Properties["checks"], &form)
				var items []map[string]json.RawMessage
				json.Unmarshal(obj["checks"], &items)
				if len(items) == 0 {
					t.Errorf("%s.form: no checks", e.ID)
				}
				for _, it := range items {
					for _, rk := range form.Items.Required {
						if _, ok := it[rk]; !ok {
							t.Errorf("%s.form.checks: %q missing", e.ID, rk)
						}
					}
				}
			}
			if k == "drift" {
				var items []map[string]json.RawMessage
				json.Unmarshal(obj["measures"], &items)
				for _, it := range items {
					for _, rk := range driftItem.Items.Required {
						if _, ok := it[rk]; !ok {
							t.Errorf("%s.drift.measures: %q missing", e.ID, rk)
						}
					}
				}
			}
		}
		var ms []map[string]json.RawMessage
		if err := json.Unmarshal(doc["measures"], &ms); err != nil {
			t.Errorf("%s: measures: %v", e.ID, err)
		}
		for _, m := range ms {
			for _, rk := range measure.Required {
				if _, ok := m[rk]; !ok {
					t.Errorf("%s.measures: %q missing", e.ID, rk)
				}
			}
		}
		var kind string
		json.Unmarshal(doc["kind"], &kind)
		if !slices.Contains(seenKinds, kind) {
			seenKinds = append(seenKinds, kind)
		}
	}
	if len(seenKinds) != len(Kinds) {
		t.Errorf("kinds checked %v, want all %d", seenKinds, len(Kinds))
	}
}
