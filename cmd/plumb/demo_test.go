package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/demo"
)

// TestDemoSummary runs "plumb demo" in-process at high speed and checks,
// from its JSON summary, that exactly the planted alerts were raised: one
// suspect point on the edge outlier's line, a fragile fit that resolved
// itself after the follow-up readings, a drift, and nothing for the benign
// high-leverage reading or the outlier at low leverage.
func TestDemoSummary(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo for about 25 s")
	}
	dir := t.TempDir()
	sumPath := filepath.Join(dir, "summary.json")
	var out, errb bytes.Buffer
	e := &env{stdin: strings.NewReader(""), stdout: &out, stderr: &errb, getenv: os.Getenv}
	// 2 s / 6 = a reading every 333 ms: each reading gets a refresh of its
	// own (refresh is 200 ms in the demo config).
	code := runMain(context.Background(), e, []string{"demo", "--duration", "28s", "--speed", "6", "--listen", "", "--quiet",
		"--keep", filepath.Join(dir, "run"), "--summary-json", sumPath})
	if code != 0 {
		t.Fatalf("exit %d\nstdout:\n%s\nstderr:\n%s", code, out.String(), errb.String())
	}
	// --quiet prints the alerts and the summary, no readings (scripted
	// ones included): a reading line starts with the feed's name.
	for _, line := range strings.Split(out.String(), "\n") {
		if strings.HasPrefix(strings.TrimSpace(line), demo.FeedName+":") {
			t.Errorf("--quiet printed a reading: %q", line)
		}
	}
	b, err := os.ReadFile(sumPath)
	if err != nil {
		t.Fatal(err)
	}
	var sum struct {
		Rows   int `json:"rows"`
		Fits   int `json:"fits"`
		Alerts []struct {
			ID, Kind, Subject, State string
		} `json:"alerts"`
	}
	if err := json.Unmarshal(b, &sum); err != nil {
		t.Fatal(err)
	}
	exp := demo.Expected()
	if sum.Rows != exp.Lines-1 {
		t.Errorf("rows = %d, want %d", sum.Rows, exp.Lines-1)
	}
	if sum.Fits == 0 {
		t.Error("no fits")
	}
	var got []string
	for _, a := range sum.Alerts {
		if a.ID == "" {
			t.Errorf("alert without id: %+v", a)
		}
		got = append(got, a.Kind+" "+a.Subject+" "+a.State)
	}
	sort.Strings(got)
	var want []string
	for _, l := range exp.Suspect {
		want = append(want, "suspect_point "+demo.ModelName+"/"+demo.FeedName+":"+strconv.Itoa(l)+" open")
	}
	want = append(want, "drift "+demo.ModelName+" open", "fragile_fit "+demo.ModelName+" resolved")
	sort.Strings(want)
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Errorf("alerts:\n%s\nwant:\n%s\n\ndemo output:\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"), out.String())
	}
	checkDemoAlertTexts(t, filepath.Join(dir, "run", demo.AlertsFile))
	for _, a := range sum.Alerts {
		for _, l := range append(exp.OutlierOnly, exp.Leverage) {
			if strings.HasSuffix(a.Subject, ":"+strconv.Itoa(l)) {
				t.Errorf("an alert on benign line %d: %+v", l, a)
			}
		}
	}
}

// checkDemoAlertTexts reads the file route's events of the demo and
// checks the words people act on: a suspect reading's flags as the engine
// words them (the p-value "below the 0.05 level", each cutoff's family),
// and the drift alert's suggestion, which names the checkpoints to check
// with reference standards rather than where to add readings.
func checkDemoAlertTexts(t *testing.T, path string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	for _, line := range strings.Split(strings.TrimSpace(string(b)), "\n") {
		var ev struct {
			Data struct {
				Kind        string `json:"kind"`
				Explanation string `json:"explanation"`
				Suggestion  *struct {
					Text string `json:"text"`
				} `json:"suggestion"`
				History []struct {
					Event string `json:"event"`
				} `json:"history"`
			} `json:"data"`
		}
		if err := json.Unmarshal([]byte(line), &ev); err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		d := ev.Data
		if len(d.History) == 0 || d.History[0].Event != "opened" {
			t.Errorf("%s alert: history %+v, want it to start with opened", d.Kind, d.History)
		}
		switch d.Kind {
		case "suspect_point":
			seen[d.Kind] = true
			for _, w := range []string{"Bonferroni outlier test: p ", ", below the 0.05 level", "cutoff"} {
				if !strings.Contains(d.Explanation, w) {
					t.Errorf("suspect_point explanation lacks %q:\n%s", w, d.Explanation)
				}
			}
		case "drift":
			seen[d.Kind] = true
			if d.Suggestion == nil || !strings.HasPrefix(d.Suggestion.Text, "check the calibration with reference standards at the checkpoint") {
				t.Errorf("drift suggestion %+v, want the checkpoints to check", d.Suggestion)
				continue
			}
			for _, c := range demo.Checkpoints {
				if !strings.Contains(d.Suggestion.Text, c.Name) {
					t.Errorf("drift suggestion %q does not name checkpoint %q", d.Suggestion.Text, c.Name)
				}
			}
		}
	}
	if !seen["suspect_point"] || !seen["drift"] {
		t.Errorf("file route %s: events of kinds %v, want suspect_point and drift", path, seen)
	}
}
