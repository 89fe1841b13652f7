package report

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/view"
)

// The report's decisions section: the readings set aside with who, when
// and why (drawn hollow on the fit chart), every decision with its audit
// record, the re-baselines (marked on the coefficient history), and the
// caution that decisions stay with qualified staff.
func TestReportDecisions(t *testing.T) {
	dm := loadDemo(t)
	d := dm.d
	at := time.Date(2026, 3, 14, 9, 30, 0, 0, time.UTC)
	aside := view.SetAsidePoint{ID: 9001, File: "run-0314.csv", Line: 77, X: map[string]view.Float{"ref_kpa": 40}, Y: 12.5,
		SetAside: view.SetAside{By: "r.okafor", At: at, Reason: "valve left open", Note: "set aside by r.okafor on 2026-03-14: valve left open"}}
	d.SetAside = []view.SetAsidePoint{aside}
	rb := view.RebaselineView{ID: 1, Model: d.Name, From: at, By: "t.berg", Reason: "sensor replaced", Recorded: dm.fits[len(dm.fits)/2].At,
		Note: "re-baselined from 2026-03-14 09:30 UTC by t.berg: sensor replaced", AuditSeq: 12}
	d.Rebaselines = []view.RebaselineView{rb}
	dec := []view.DecisionView{{ID: 1, Model: d.Name, ObsID: 9001, Action: "exclude", By: "r.okafor", Reason: "valve left open", At: at, Note: aside.Note, AuditSeq: 11}}
	var buf bytes.Buffer
	if err := Render(&buf, Contents{Detail: d, Fits: dm.fits, Alerts: dm.alerts, Decisions: dec}, Options{Generated: at}); err != nil {
		t.Fatal(err)
	}
	html := buf.String()
	for _, want := range []string{
		`<h2 id="decisions">Decisions</h2>`,
		"plumb never deleted or altered a measurement",
		"qualified staff under local quality procedures and codes",
		`<tr data-obs="9001"><td class="m">run-0314.csv:77</td>`,
		aside.Note,
		`<tr data-decision="1">`,
		rb.Note,
		`class="pt v-none hollow"`,
		`class="event"`,
	} {
		if !strings.Contains(html, want) {
			t.Errorf("the report lacks %q", want)
		}
	}
	if n := strings.Count(html, `hollow"`); n != 1 {
		t.Errorf("%d hollow marks, want 1 (the fit chart's)", n)
	}
}
