package metrics

import (
	"math"
	"net/http/httptest"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/promhttp"
	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"
)

// scrape renders the registry as the text format 0.0.4 and parses it back
// with the reference parser of prometheus/common.
func scrape(t testing.TB, m *Metrics) (map[string]*dto.MetricFamily, string) {
	t.Helper()
	h := promhttp.HandlerFor(m.Registry(), promhttp.HandlerOpts{})
	rec := httptest.NewRecorder()
	req := httptest.NewRequest("GET", "/metrics", nil)
	req.Header.Set("Accept", "text/plain")
	h.ServeHTTP(rec, req)
	body := rec.Body.String()
	p := expfmt.NewTextParser(model.LegacyValidation)
	fams, err := p.TextToMetricFamilies(strings.NewReader(body))
	if err != nil {
		t.Fatalf("text parser: %v\n%s", err, body)
	}
	return fams, body
}

func value(t testing.TB, fams map[string]*dto.MetricFamily, name, label string) (float64, bool) {
	t.Helper()
	f, ok := fams[name]
	if !ok {
		return 0, false
	}
	for _, m := range f.Metric {
		for _, lp := range m.Label {
			if lp.GetValue() != label {
				continue
			}
			switch {
			case m.Counter != nil:
				return m.Counter.GetValue(), true
			case m.Gauge != nil:
				return m.Gauge.GetValue(), true
			case m.Histogram != nil:
				return float64(m.Histogram.GetSampleCount()), true
			}
		}
	}
	return 0, false
}

func TestScrape(t *testing.T) {
	m := New()
	m.AddModel("bench-b")
	m.RowsIngested("bench-b", 20)
	m.RowsIngested("bench-b", 3)
	m.RowsQuarantined("bench-b", 2)
	m.FitDone("bench-b", 3*time.Millisecond)
	m.FitDone("bench-b", 40*time.Millisecond)
	m.FitState("bench-b", 23, 1.7, 1, true)
	m.FitState("oven-3", 41, math.NaN(), 0, false)
	m.SetAlertsOpen("suspect_point", 2)
	m.Delivery("pager", true)
	m.Delivery("pager", false)
	m.Delivery("pager", false)

	fams, body := scrape(t, m)
	tests := []struct {
		name, label string
		want        float64
	}{
		{"plumb_rows_ingested_total", "bench-b", 23},
		{"plumb_rows_quarantined_total", "bench-b", 2},
		{"plumb_fits_total", "bench-b", 2},
		{"plumb_fit_duration_seconds", "bench-b", 2},
		{"plumb_alerts_open", "suspect_point", 2},
		{"plumb_alert_deliveries_total", "pager", 1},
		{"plumb_alert_delivery_failures_total", "pager", 2},
		{"plumb_model_observations", "bench-b", 23},
		{"plumb_model_observations", "oven-3", 41},
		{"plumb_model_fragility_index", "bench-b", 1},
		{"plumb_model_max_cooks_distance", "bench-b", 1.7},
	}
	for _, tt := range tests {
		t.Run(tt.name+"/"+tt.label, func(t *testing.T) {
			got, ok := value(t, fams, tt.name, tt.label)
			if !ok || got != tt.want {
				t.Errorf("%s{%s} = %v (present %v), want %v\n%s", tt.name, tt.label, got, ok, tt.want, body)
			}
		})
	}
	if _, ok := value(t, fams, "plumb_model_fragility_index", "oven-3"); ok {
		t.Error("fragility series present for a model with none")
	}
	if _, ok := value(t, fams, "plumb_model_max_cooks_distance", "oven-3"); ok {
		t.Error("max Cook's series present for an undefined value")
	}
	for _, name := range []string{"go_goroutines", "process_cpu_seconds_total"} {
		if _, ok := fams[name]; !ok {
			t.Errorf("%s missing: Go/process collectors not registered", name)
		}
	}
	// A second fit state without fragility removes the series.
	m.SetFragility("bench-b", 0, false)
	fams, _ = scrape(t, m)
	if _, ok := value(t, fams, "plumb_model_fragility_index", "bench-b"); ok {
		t.Error("fragility series not removed")
	}
	m.RemoveModel("bench-b")
	fams, _ = scrape(t, m)
	if _, ok := value(t, fams, "plumb_rows_ingested_total", "bench-b"); ok {
		t.Error("RemoveModel left series behind")
	}
}

// Naming rules from the Prometheus exposition format and the OpenMetrics
// 1.0 conventions (../shared/reference/CHECKS.md section B): legacy name
// charset without colons, the app prefix, counters end in _total, units as
// a plural base-unit suffix, low-cardinality labels, HELP on every family.
func TestNamingConventions(t *testing.T) {
	m := New()
	m.AddModel("bench-b")
	m.FitDone("bench-b", time.Millisecond)
	m.FitState("bench-b", 5, 0.3, 2, true)
	m.SetAlertsOpen("drift", 0)
	m.Delivery("log", true)
	fams, _ := scrape(t, m)

	nameRE := regexp.MustCompile(`^[a-zA-Z_][a-zA-Z0-9_]*$`)
	labelRE := regexp.MustCompile(`^[a-zA-Z_][a-zA-Z0-9_]*$`)
	allowedLabels := map[string]bool{"model": true, "kind": true, "route": true}
	units := regexp.MustCompile(`_(seconds|bytes|ratio)(_total)?$`)
	badUnits := regexp.MustCompile(`_(milliseconds|ms|second|minutes|percent)(_|$)`)
	own := 0
	for name, f := range fams {
		if !nameRE.MatchString(name) || strings.Contains(name, ":") {
			t.Errorf("%s: not a valid exporter name", name)
		}
		if f.GetHelp() == "" {
			t.Errorf("%s: no HELP", name)
		}
		if !strings.HasPrefix(name, "plumb_") {
			continue
		}
		own++
		if badUnits.MatchString(name) {
			t.Errorf("%s: not a base unit", name)
		}
		switch f.GetType() {
		case dto.MetricType_COUNTER:
			if !strings.HasSuffix(name, "_total") {
				t.Errorf("%s: counter without _total", name)
			}
		case dto.MetricType_HISTOGRAM:
			if !units.MatchString(name) {
				t.Errorf("%s: histogram without a unit suffix", name)
			}
		default:
			if strings.HasSuffix(name, "_total") {
				t.Errorf("%s: %v ends in _total", name, f.GetType())
			}
		}
		for _, mm := range f.Metric {
			for _, lp := range mm.Label {
				if !labelRE.MatchString(lp.GetName()) || strings.HasPrefix(lp.GetName(), "__") {
					t.Errorf("%s: bad label name %q", name, lp.GetName())
				}
				if !allowedLabels[lp.GetName()] {
					t.Errorf("%s: label %q is not one of the low-cardinality labels", name, lp.GetName())
				}
			}
		}
	}
	if own != 10 {
		t.Errorf("found %d plumb_ families, want 10", own)
	}
}

func TestNilMetrics(t *testing.T) {
	var m *Metrics
	m.RowsIngested("x", 1)
	m.FitDone("x", time.Second)
	m.FitState("x", 1, 1, 1, true)
	m.Delivery("r", false)
	m.SetAlertsOpen("k", 1)
	m.RemoveModel("x")
	if m.Registry() != nil {
		t.Error("nil Metrics has a registry")
	}
}
