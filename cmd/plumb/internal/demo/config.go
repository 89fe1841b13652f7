package demo

import (
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
)

// ConfigName is the file name Config writes in the demo directory.
const ConfigName = "plumb.toml"

// AlertsFile is the file route's output, relative to the demo directory.
const AlertsFile = "alerts.jsonl"

// The model settings the scenario is built for; the tests fit with the
// same values.
const (
	// WindowRows: each fit uses the last WindowRows rows, so a drift
	// shows in the fit instead of being averaged away by old rows.
	WindowRows = 36
	// MinRows: rows before the model is judged; two sweeps of the
	// setpoints, so that the first fits are not fragile by construction.
	MinRows = 14
	// BaselineRows: the drift baseline is the fit after this many rows.
	BaselineRows = 20
	// DriftK: the drift band in baseline standard errors.
	DriftK = 3
	// RegionLow and RegionHigh bound emf_mv for suggestions: the bench's
	// range, 0..500 degC.
	RegionLow, RegionHigh = 0.0, 21.0
)

// Checkpoint is a prediction the demo config asks plumb to watch.
type Checkpoint struct {
	Name      string
	EmfMV     float64
	Tolerance float64 // degC
}

// Checkpoints are the sensor type's specification limits, 10 degC and
// 400 degC, at the thermo-voltages the sensors give there.
var Checkpoints = []Checkpoint{
	{Name: "lower spec limit 10 degC", EmfMV: 0.38, Tolerance: 0.25},
	{Name: "upper spec limit 400 degC", EmfMV: 16.57, Tolerance: 0.5},
}

// ConfigText returns the demo's TOML configuration. Paths in it are
// relative, so it must be written into the demo directory (Config does).
// listen is the HTTP address ("" turns the server off).
func ConfigText(listen string) string {
	var b strings.Builder
	w := func(format string, args ...any) { fmt.Fprintf(&b, format, args...); b.WriteByte('\n') }
	w("# plumb demo: %s, %s (an invented maker and bench).", Company, Bench)
	w("# Thermocouple sensors are calibrated against a reference thermometer;")
	w("# plumb refits the bench's curve as readings arrive and says which")
	w("# readings to look at. All paths are relative to this file.")
	w("# plumb flags; it never deletes or alters a measurement. What to do")
	w("# with a flagged reading is for qualified staff to decide.")
	w("")
	w("state = %q", "plumb.db")
	w("listen = %s", strconv.Quote(listen))
	w("log_format = %q", "text")
	w("log_level = %q", "info")
	w("")
	w("[watch]")
	w("debounce = %q", "50ms")
	w("# a line the instrument left half-written is completed after this")
	w("idle_flush = %q", "3s")
	w("rescan = %q", "5s")
	w("refresh = %q", "200ms")
	w("")
	w("[[model]]")
	w("name = %q", ModelName)
	w("folder = %q", Folder)
	w("pattern = %q", "feed-*.csv")
	w("response = %q", Response)
	w("terms = [%s]", quoteList(Terms))
	w("min_rows = %d", MinRows)
	w("routes = [%q, %q]", "log", "alerts-file")
	w("")
	w("units = { %s = %q, %s = %q }", Response, "°C", Predictor, "mV")
	w("")
	w("# the numbers the bench reports: the temperature at the spec limits'")
	w("# thermo-voltages, and the thermo-voltage a sensor should show there")
	w("[model.calibration]")
	w("predict_at = [{ %s = %s }, { %s = %s }]", Predictor, fmtFloat(Checkpoints[0].EmfMV), Predictor, fmtFloat(Checkpoints[1].EmfMV))
	w("invert = [10.0, 400.0]")
	w("level = 0.95")
	w("")
	w("[model.window]")
	w("rows = %d", WindowRows)
	w("")
	w("[model.judge]")
	w("cutoffs = %q", "absolute")
	w("cook_rule = %q", "f_median")
	w("alpha = 0.05")
	w("outlier_test = %q", "bonferroni")
	w("")
	w("[model.fragility]")
	w("enabled = true")
	w("max_removed = 3")
	w("limit = 2")
	w("")
	w("[model.region]")
	w("%s = [%s, %s]", Predictor, fmtFloat(RegionLow), fmtFloat(RegionHigh))
	for _, c := range Checkpoints {
		w("")
		w("[[model.checkpoint]]")
		w("name = %q", c.Name)
		w("at = { %s = %s }", Predictor, fmtFloat(c.EmfMV))
		w("tolerance = %s", fmtFloat(c.Tolerance))
	}
	w("")
	w("[model.suggest]")
	w("replicates = 3")
	w("count = 3")
	w("")
	w("[model.alerts.suspect_point]")
	w("severity = %q", "critical")
	w("")
	w("[model.alerts.fragile_fit]")
	w("severity = %q", "warning")
	w("")
	w("[model.alerts.drift]")
	w("severity = %q", "warning")
	w("k = %d", DriftK)
	w("baseline_rows = %d", BaselineRows)
	w("")
	// The scenario's alerts are proven line by line (proof_test.go); the
	// form checks' alert is not part of its script (its drift phase does
	// make Durbin-Watson significant near the end), so it is off here.
	w("[model.alerts.form_lapse]")
	w("enabled = false")
	w("")
	w("[[route]]")
	w("name = %q", "log")
	w("kind = %q", "log")
	w("")
	w("[[route]]")
	w("name = %q", "alerts-file")
	w("kind = %q", "file")
	w("path = %q", AlertsFile)
	return b.String()
}

// Config writes the demo configuration to dir/plumb.toml, creates the
// watched folder dir/incoming/bench-b (so the daemon can watch it from its
// start) and returns the config's path. dir must exist.
func Config(dir, listen string) (string, error) {
	path := filepath.Join(dir, ConfigName)
	if err := os.WriteFile(path, []byte(ConfigText(listen)), 0o644); err != nil {
		return "", fmt.Errorf("demo: writing the config: %w", err)
	}
	if err := os.MkdirAll(filepath.Join(dir, filepath.FromSlash(Folder)), 0o755); err != nil {
		return "", fmt.Errorf("demo: creating the watched folder: %w", err)
	}
	return path, nil
}

func quoteList(s []string) string {
	q := make([]string, len(s))
	for i, x := range s {
		q[i] = strconv.Quote(x)
	}
	return strings.Join(q, ", ")
}

// fmtFloat writes a TOML float (always with a decimal point).
func fmtFloat(v float64) string {
	s := strconv.FormatFloat(v, 'f', -1, 64)
	if !strings.ContainsAny(s, ".eE") {
		s += ".0"
	}
	return s
}
