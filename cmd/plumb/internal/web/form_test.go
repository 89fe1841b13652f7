package web

import (
	"encoding/json"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/view/viewtest"
)

// TestModelPageForm: the model page shows the checks of the model form
// in words with their statistics, the weighting and the poolability; the
// API carries them as JSON.
func TestModelPageForm(t *testing.T) {
	h := New(viewtest.DemoForm(), Options{})
	body := serve(t, h, call{method: "GET", path: "/models/bench-b"}).Body.String()
	for _, want := range []string{"Does the model form hold?", "weighted by inverse(ref_kpa)", `data-check="lack of fit"`,
		`data-check="Durbin-Watson"`, `data-check="Breusch-Pagan"`, "PRESS =", "predicted R²", "Can the groups be pooled?",
		"common slope", "a line per level"} {
		if !strings.Contains(body, want) {
			t.Errorf("model page lacks %q", want)
		}
	}
	w := serve(t, h, call{method: "GET", path: "/api/v1/models/bench-b?points=none"})
	var got struct {
		Weights   string  `json:"weights"`
		FormLevel float64 `json:"form_level"`
		Form      struct {
			LackOfFit    json.RawMessage `json:"lack_of_fit"`
			DurbinWatson struct {
				Statistic *float64 `json:"statistic"`
				Method    string   `json:"method"`
			} `json:"durbin_watson"`
			BreuschPagan struct {
				DF int `json:"df"`
			} `json:"breusch_pagan"`
			PRESS *float64 `json:"press"`
		} `json:"form_checks"`
		Pool struct {
			Verdict string `json:"verdict"`
		} `json:"poolability"`
	}
	if err := json.Unmarshal(w.Body.Bytes(), &got); err != nil {
		t.Fatalf("%v: %s", err, w.Body.String())
	}
	if got.Weights != "inverse(ref_kpa)" || got.FormLevel != 0.01 || got.Form.DurbinWatson.Statistic == nil ||
		got.Form.BreuschPagan.DF != 1 || got.Form.PRESS == nil || got.Pool.Verdict != "common slope" {
		t.Errorf("API model: %s", w.Body.String()[:min(2000, w.Body.Len())])
	}
}
