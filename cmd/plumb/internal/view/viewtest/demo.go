package viewtest

import (
	"encoding/json"
	"fmt"
	"strings"
	"time"

	"plumb/cmd/plumb/internal/view"
)

// DemoX and DemoY are an invented calibration run of our own scenario: a
// bench pressure transducer ("bench-b") read against a reference gauge,
// reference pressure in kPa and transducer output in mV. Row 17 (line 18)
// sits far from the line at a high pressure: an outlier with leverage.
var (
	DemoX = []float64{10, 15, 20, 25, 30, 35, 40, 45, 50, 55, 60, 65, 70, 75, 80, 85, 130, 90, 95, 100}
	DemoY = []float64{20.9, 30.6, 41.3, 50.8, 61.2, 70.7, 81.5, 90.6, 101.4, 110.9, 121.2, 130.8, 141.6, 150.7, 161.3, 170.9, 252.0, 181.2, 190.6, 201.3}
)

// Demo returns a Fake holding three models in the three states, a fit
// history, observations, quarantined rows and four alerts (one of them
// acknowledged). The judging model "bench-b" has one suspect point.
func Demo() *Fake {
	at := time.Date(2026, 3, 14, 9, 30, 0, 0, time.UTC)
	f := New()
	l := Line{Name: "bench-b", Response: "output_mv", Predictor: "ref_kpa", File: "run-0314.csv",
		X: DemoX, Y: DemoY, Lo: 0, Hi: 150, At: at}
	d, err := StraightLine(l)
	if err != nil {
		panic("viewtest: demo data: " + err.Error())
	}
	d.Fragility = view.Fragility{Computed: true, Found: true, Index: 1, K: 3, Fragile: true, Limit: 2, Searched: "exhaustive",
		Conclusion: "intercept differs from 0 at 0.05",
		Rows:       []view.RowRef{{ID: 17, File: "run-0314.csv", Line: 18}}}
	d.Quarantined = 2
	hist := LineHistory(l)
	d.Fits = int64(len(hist))
	f.SetModel(d)
	for _, h := range hist {
		f.AddFit("bench-b", h)
	}
	for i := range DemoX {
		p := d.Points[i]
		f.AddObservation("bench-b", view.ObservationView{
			File: "run-0314.csv", Line: i + 2, Raw: fmt.Sprintf("%g,%g", DemoY[i], DemoX[i]),
			Values:    []view.Float{view.Float(DemoY[i]), view.Float(DemoX[i])},
			ArrivedAt: at.Add(time.Duration(i-len(DemoX)) * time.Minute),
			Verdict:   p.Verdict, ArrivalVerdict: p.Verdict,
			Leverage: p.Leverage, Cook: p.Cook, StudentizedExternal: p.StudentizedExternal,
		})
	}
	f.AddQuarantine(view.QuarantineView{Model: "bench-b", File: "run-0314.csv", Line: 9, Column: 6, ColumnName: "ref_kpa", Field: 2,
		Raw: "71.4,4O", Reason: `column 2 "ref_kpa": not a number`, At: at.Add(-12 * time.Minute)})
	f.AddQuarantine(view.QuarantineView{Model: "bench-b", File: "run-0314.csv", Line: 23, Column: 1, ColumnName: "output_mv", Field: 1,
		Raw: ",105", Reason: `column 1 "output_mv": empty field`, At: at.Add(-2 * time.Minute)})

	f.SetModel(view.ModelDetail{ModelSummary: view.ModelSummary{
		Name: "flow-rig", State: view.StateWaiting, Reason: "3 rows, the fit needs at least 4",
		Response: "flow_lpm", Terms: []string{"intercept", "dp_pa", "dp_pa^2"}, Predictors: []string{"dp_pa"},
		Rows: 3, MaxCook: view.NaN(),
	}})
	f.SetModel(view.ModelDetail{ModelSummary: view.ModelSummary{
		Name: "oven-3", State: view.StateBlocked, Reason: "collinear terms: temp_c, temp_k",
		Response: "drift_um", Terms: []string{"intercept", "temp_c", "temp_k"}, Predictors: []string{"temp_c", "temp_k"},
		Rows: 41, Fits: 6, LastFitAt: at.Add(-3 * time.Hour), MaxCook: view.NaN(),
		Fragility: view.Fragility{Computed: true, Found: false, K: 3, Limit: 2, Searched: "exhaustive"},
	}})

	doc := func(m map[string]any) json.RawMessage {
		m["caution"] = view.Caution
		b, _ := json.Marshal(m)
		return b
	}
	p := d.Points[16]
	// The suspect point's document as the alerts package writes it
	// (alerts/schema/alert.schema.json): measures from the point's flags,
	// the model's first suggestion, the reading and its history.
	var measures []map[string]any
	var words []string
	for _, fl := range p.Flags {
		measures = append(measures, map[string]any{"name": fl.Measure, "family": fl.Family, "term": fl.Term, "value": fl.Value, "cutoff": fl.Cutoff})
		words = append(words, fl.Text())
	}
	spDoc := map[string]any{
		"id": "sp-3c1d9a70b2e45f18", "count": 2,
		"explanation": "The row newly read from run-0314.csv, line 18, lies far from what the rest of the data predict " +
			"and pulls the fitted line toward itself (" + strings.Join(words, "; ") + ").",
		"measures": measures,
		"point":    map[string]any{"file": "run-0314.csv", "line": 18, "label": "gauge K-0418", "values": map[string]float64{"ref_kpa": DemoX[16], "output_mv": DemoY[16]}},
		"history":  []map[string]any{{"event": "opened", "at": at.Add(-4 * time.Minute)}},
	}
	if len(d.Suggestions) > 0 {
		spDoc["suggestion"] = map[string]any{"text": d.Suggestions[0].Text, "at": d.Suggestions[0].At}
	}
	f.PutAlert(view.AlertView{ID: "sp-3c1d9a70b2e45f18", Model: "bench-b", Kind: "suspect_point", Severity: "warning",
		Subject: "run-0314.csv:18", State: view.AlertOpen, FirstSeen: at.Add(-4 * time.Minute), LastSeen: at,
		Summary: fmt.Sprintf("run-0314.csv:18 is an outlier (t = %.2f) and influential (Cook's D = %.2f)", float64(p.StudentizedExternal), float64(p.Cook)),
		Doc:     doc(spDoc)})
	f.PutAlert(view.AlertView{ID: "ff-9e02b4c6d1a8f357", Model: "bench-b", Kind: "fragile_fit", Severity: "warning",
		Subject: "intercept", State: view.AlertOpen, FirstSeen: at.Add(-4 * time.Minute), LastSeen: at.Add(-time.Minute),
		Summary: "removing 1 row (run-0314.csv:18) changes whether the intercept differs from 0",
		Doc: doc(map[string]any{"count": 1, "measures": []map[string]any{{"name": "fragility_index", "value": 1, "cutoff": 2}},
			"fragility": map[string]any{"index": 1, "limit": 2, "removed": []string{"run-0314.csv:18"}, "conclusion": "intercept differs from 0 at 0.05"},
			"history":   []map[string]any{{"event": "opened", "at": at.Add(-4 * time.Minute)}}})})
	f.PutAlert(view.AlertView{ID: "bl-51f7e0a2c39d6b84", Model: "oven-3", Kind: "blocked", Severity: "critical",
		Subject: "fit", State: view.AlertAcknowledged, FirstSeen: at.Add(-3 * time.Hour), LastSeen: at.Add(-2 * time.Hour),
		Summary: "oven-3 cannot be fitted: temp_c and temp_k are collinear", Note: "config fix pending", By: "shift-lead",
		Doc: doc(map[string]any{"reason": "collinear"})})
	f.PutAlert(view.AlertView{ID: "dr-07aa4be19c2f6d35", Model: "bench-b", Kind: "drift", Severity: "info",
		Subject: "ref_kpa", State: view.AlertResolved, FirstSeen: at.Add(-26 * time.Hour), LastSeen: at.Add(-25 * time.Hour),
		Summary: "slope of ref_kpa moved 3.4 standard errors from baseline", Doc: doc(map[string]any{"term": "ref_kpa"})})
	return f
}
