// Package metrics holds the Prometheus collectors the daemon updates and
// the web server exposes at /metrics.
//
// New makes a private registry (never the global default one) holding
// plumb's own families plus the Go runtime and process collectors:
//
//	plumb_rows_ingested_total{model}            counter
//	plumb_rows_quarantined_total{model}         counter
//	plumb_fits_total{model}                     counter
//	plumb_fit_duration_seconds{model}           histogram
//	plumb_alerts_open{kind}                     gauge
//	plumb_alert_deliveries_total{route}         counter
//	plumb_alert_delivery_failures_total{route}  counter
//	plumb_model_observations{model}             gauge
//	plumb_model_fragility_index{model}          gauge (absent when none)
//	plumb_model_max_cooks_distance{model}       gauge
//
// Labels are low-cardinality by design: a model name, an alert kind or a
// route name, never a row or a file. Names follow the Prometheus and
// OpenMetrics conventions: the plumb_ prefix, base units as a plural
// suffix, counters ending in _total.
//
// A *Metrics is safe for use by multiple goroutines. A nil *Metrics is
// valid and records nothing, so the daemon can run without metrics.
package metrics

import (
	"math"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
)

// Metrics is the set of plumb's collectors.
type Metrics struct {
	reg           *prometheus.Registry
	rows          *prometheus.CounterVec
	quarantined   *prometheus.CounterVec
	fits          *prometheus.CounterVec
	fitDuration   *prometheus.HistogramVec
	alertsOpen    *prometheus.GaugeVec
	deliveries    *prometheus.CounterVec
	deliveryFails *prometheus.CounterVec
	observations  *prometheus.GaugeVec
	fragility     *prometheus.GaugeVec
	maxCook       *prometheus.GaugeVec
}

// FitBuckets are the fit duration histogram's upper bounds in seconds,
// from 100 µs to about 26 s.
var FitBuckets = prometheus.ExponentialBuckets(0.0001, 4, 10)

// New returns Metrics registered in a new private registry, together with
// the Go runtime and process collectors.
func New() *Metrics {
	m := &Metrics{
		reg: prometheus.NewRegistry(),
		rows: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "plumb_rows_ingested_total",
			Help: "Data rows accepted into a model's history.",
		}, []string{"model"}),
		quarantined: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "plumb_rows_quarantined_total",
			Help: "Rows that could not be read and were kept aside with their reason.",
		}, []string{"model"}),
		fits: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "plumb_fits_total",
			Help: "Completed refits of a model.",
		}, []string{"model"}),
		fitDuration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "plumb_fit_duration_seconds",
			Help:    "Time to refit a model and compute its diagnostics.",
			Buckets: FitBuckets,
		}, []string{"model"}),
		alertsOpen: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "plumb_alerts_open",
			Help: "Alerts currently open (not acknowledged, not resolved), by kind.",
		}, []string{"kind"}),
		deliveries: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "plumb_alert_deliveries_total",
			Help: "Alert events delivered through a route.",
		}, []string{"route"}),
		deliveryFails: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "plumb_alert_delivery_failures_total",
			Help: "Failed attempts to deliver an alert event through a route.",
		}, []string{"route"}),
		observations: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "plumb_model_observations",
			Help: "Observations in the model's current fit.",
		}, []string{"model"}),
		fragility: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "plumb_model_fragility_index",
			Help: "Fewest rows whose removal changes a conclusion of the current fit; absent when no removal within the search limit does.",
		}, []string{"model"}),
		maxCook: prometheus.NewGaugeVec(prometheus.GaugeOpts{
			Name: "plumb_model_max_cooks_distance",
			Help: "Largest Cook's distance under the model's current fit.",
		}, []string{"model"}),
	}
	m.reg.MustRegister(
		collectors.NewGoCollector(),
		collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}),
		m.rows, m.quarantined, m.fits, m.fitDuration, m.alertsOpen,
		m.deliveries, m.deliveryFails, m.observations, m.fragility, m.maxCook,
	)
	return m
}

// Registry returns the private registry (for web.Options.Registry).
func (m *Metrics) Registry() *prometheus.Registry {
	if m == nil {
		return nil
	}
	return m.reg
}

// AddModel makes a model's series appear at zero before its first row, so
// that rates work from the start.
func (m *Metrics) AddModel(model string) {
	if m == nil {
		return
	}
	m.rows.WithLabelValues(model)
	m.quarantined.WithLabelValues(model)
	m.fits.WithLabelValues(model)
	m.observations.WithLabelValues(model)
}

// RowsIngested adds n accepted rows.
func (m *Metrics) RowsIngested(model string, n int) {
	if m == nil || n <= 0 {
		return
	}
	m.rows.WithLabelValues(model).Add(float64(n))
}

// RowsQuarantined adds n quarantined rows.
func (m *Metrics) RowsQuarantined(model string, n int) {
	if m == nil || n <= 0 {
		return
	}
	m.quarantined.WithLabelValues(model).Add(float64(n))
}

// FitDone counts one refit that took d.
func (m *Metrics) FitDone(model string, d time.Duration) {
	if m == nil {
		return
	}
	m.fits.WithLabelValues(model).Inc()
	m.fitDuration.WithLabelValues(model).Observe(d.Seconds())
}

// FitState sets the per-model gauges after a fit: the number of
// observations, the largest Cook's distance (NaN removes the series) and the
// fragility index; found false removes the fragility series (no removal
// within the search limit changes a conclusion, or not computed).
func (m *Metrics) FitState(model string, observations int, maxCook float64, fragility int, found bool) {
	if m == nil {
		return
	}
	m.SetObservations(model, observations)
	m.SetMaxCook(model, maxCook)
	m.SetFragility(model, fragility, found)
}

// SetObservations sets the number of observations in the current fit.
func (m *Metrics) SetObservations(model string, n int) {
	if m == nil {
		return
	}
	m.observations.WithLabelValues(model).Set(float64(n))
}

// SetMaxCook sets the largest Cook's distance of the current fit; a NaN
// removes the series.
func (m *Metrics) SetMaxCook(model string, d float64) {
	if m == nil {
		return
	}
	if math.IsNaN(d) {
		m.maxCook.DeleteLabelValues(model)
		return
	}
	m.maxCook.WithLabelValues(model).Set(d)
}

// SetFragility sets the fragility index; found false removes the series.
func (m *Metrics) SetFragility(model string, index int, found bool) {
	if m == nil {
		return
	}
	if !found {
		m.fragility.DeleteLabelValues(model)
		return
	}
	m.fragility.WithLabelValues(model).Set(float64(index))
}

// SetAlertsOpen sets the number of open alerts of one kind.
func (m *Metrics) SetAlertsOpen(kind string, n int) {
	if m == nil {
		return
	}
	m.alertsOpen.WithLabelValues(kind).Set(float64(n))
}

// Delivery counts one delivery attempt through route: a success counts in
// plumb_alert_deliveries_total, a failure in
// plumb_alert_delivery_failures_total.
func (m *Metrics) Delivery(route string, ok bool) {
	if m == nil {
		return
	}
	if ok {
		m.deliveries.WithLabelValues(route).Inc()
		m.deliveryFails.WithLabelValues(route)
		return
	}
	m.deliveryFails.WithLabelValues(route).Inc()
	m.deliveries.WithLabelValues(route)
}

// RemoveModel drops every series of a model (when it leaves the config).
func (m *Metrics) RemoveModel(model string) {
	if m == nil {
		return
	}
	for _, v := range []interface{ DeleteLabelValues(...string) bool }{
		m.rows, m.quarantined, m.fits, m.fitDuration, m.observations, m.fragility, m.maxCook,
	} {
		v.DeleteLabelValues(model)
	}
}
