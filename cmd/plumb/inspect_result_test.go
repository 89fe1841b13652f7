package main

import (
	"encoding/json"
	"math"
	"os"
	"strings"
	"testing"
)

// TestInspectFragility checks the fragility search and the suggestions
// against refits done by the command itself: leaving out the reported row
// and fitting again must move the checkpoint's prediction from "before" to
// "after"; a suggestion at a recorded row's predictor value has d equal to
// that row's leverage (d(x_i) = h_ii, common practice; Atkinson, Donev &
// Tobias 2007, from memory), d_gain = 1 + d and det_ratio = 1 + r d
// (matrix determinant lemma).
func TestInspectFragility(t *testing.T) {
	const at = 48.2
	predict := func(js inspectJSON) float64 {
		c := js.Coefficients
		return *c[0].Estimate + *c[1].Estimate*at + *c[2].Estimate*at*at
	}
	out, stderr, code := runPlumb(t, "", "inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms,
		"--fragility", "--checkpoint", "emf_mv=48.2:0.5", "--suggest", "--format", "json")
	if code != 0 {
		t.Fatalf("exit code %d: %s", code, stderr)
	}
	var got struct {
		inspectJSON
		Fragility struct {
			Index        *int     `json:"index"`
			Searched     string   `json:"searched"`
			RemovedRows  []int    `json:"removed_rows"`
			RemovedLines []int    `json:"removed_lines"`
			Conclusion   string   `json:"conclusion"`
			Before       *float64 `json:"before"`
			After        *float64 `json:"after"`
			Fragile      bool     `json:"fragile"`
		} `json:"fragility"`
		Suggestions []struct {
			At         map[string]float64 `json:"at"`
			Replicates int                `json:"replicates"`
			D          float64            `json:"d"`
			DGain      float64            `json:"d_gain"`
			Effect     struct {
				DetRatio float64 `json:"det_ratio"`
				Rows     []struct {
					Row  int `json:"row"`
					Line int `json:"line"`
				} `json:"rows"`
			} `json:"effect"`
			Text string `json:"text"`
		} `json:"suggestions"`
	}
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatal(err)
	}
	fr := got.Fragility
	if fr.Index == nil || *fr.Index != 1 || len(fr.RemovedRows) != 1 || fr.RemovedRows[0] != 32 || fr.RemovedLines[0] != 33 || !fr.Fragile {
		t.Fatalf("fragility = %+v, want index 1 by removing row 32 (line 33)", fr)
	}
	if !strings.Contains(fr.Conclusion, "prediction at emf_mv=48.2") || fr.Searched != "exhaustive" {
		t.Errorf("conclusion %q searched %q", fr.Conclusion, fr.Searched)
	}
	if b := predict(got.inspectJSON); math.Abs(*fr.Before-b) > 1e-9*math.Abs(b) {
		t.Errorf("before = %v, prediction from the coefficients %v", *fr.Before, b)
	}
	// Refit without line 33 (the last line of thermo.csv).
	text, err := os.ReadFile(fixture("thermo.csv"))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(string(text), "\n")
	without := strings.Join(append(append([]string{}, lines[:32]...), lines[33:]...), "")
	out2, stderr2, code := runPlumb(t, without, "inspect", "-", "--response", "temp_c", "--terms", thermoTerms, "--format", "json")
	if code != 0 {
		t.Fatalf("refit without line 33: exit %d: %s", code, stderr2)
	}
	var refit inspectJSON
	if err := json.Unmarshal([]byte(out2), &refit); err != nil {
		t.Fatal(err)
	}
	if refit.N != 29 {
		t.Fatalf("refit has n = %d, want 29", refit.N)
	}
	if a := predict(refit); math.Abs(*fr.After-a) > 1e-9*math.Abs(a) {
		t.Errorf("after = %.12g, refit without row 32 predicts %.12g", *fr.After, a)
	}
	if math.Abs(*fr.After-*fr.Before) <= 0.5 {
		t.Errorf("|after - before| = %v, should exceed the tolerance 0.5", math.Abs(*fr.After-*fr.Before))
	}

	if len(got.Suggestions) == 0 {
		t.Fatal("no suggestions")
	}
	var h32 float64
	for _, r := range got.Rows {
		if r.Row == 32 {
			h32 = *r.Leverage
		}
	}
	for i, sg := range got.Suggestions {
		if math.Abs(sg.DGain-(1+sg.D)) > 1e-12 || math.Abs(sg.Effect.DetRatio-(1+float64(sg.Replicates)*sg.D)) > 1e-9 {
			t.Errorf("suggestion %d: d %v, d_gain %v, det_ratio %v with %d replicates", i, sg.D, sg.DGain, sg.Effect.DetRatio, sg.Replicates)
		}
		x, ok := sg.At["emf_mv"]
		if !ok || x < 2.102 || x > 61.5 {
			t.Errorf("suggestion %d at %v, outside the observed range of emf_mv", i, sg.At)
		}
		if x == 61.5 && math.Abs(sg.D-h32) > 1e-9*h32 {
			t.Errorf("suggestion at emf_mv = 61.5 (row 32's value) has d = %v, row 32's leverage is %v", sg.D, h32)
		}
		if !strings.Contains(sg.Text, "(line ") {
			t.Errorf("suggestion text does not name rows by file line: %q", sg.Text)
		}
	}
	if got.Suggestions[0].At["emf_mv"] != 61.5 {
		t.Errorf("first suggestion at %v; the far end of the range (61.5) lowers row 32's leverage most", got.Suggestions[0].At)
	}
}
