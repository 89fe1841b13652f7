package chart

import (
	"fmt"

	"plumb/cmd/plumb/internal/view"
)

// SetAside is the layer of the readings set aside by a recorded decision
// on the fit chart: hollow marks (class "pt v-none hollow", data-row -1)
// whose tooltip names the reading and says who set it aside, when and
// why. They are not part of the fit; they stay drawn where they were.
func SetAside(d view.ModelDetail, predictor string) (Points, bool) {
	out := Points{Class: "set-aside"}
	for _, p := range d.SetAside {
		x, ok := p.X[predictor]
		if !ok || !x.Finite() || !p.Y.Finite() {
			continue
		}
		out.Marks = append(out.Marks, Mark{X: float64(x), Y: float64(p.Y), Row: -1, Hollow: true,
			Title: fmt.Sprintf("%s:%d  %s\ny = %s (not in the fit)", p.File, p.Line, p.Note, Num(p.Y))})
	}
	return out, len(out.Marks) > 0
}

// FitWithSetAside is Fit with the readings set aside drawn hollow.
func FitWithSetAside(d view.ModelDetail, predictor string) Spec {
	s := Fit(d, predictor)
	if l, ok := SetAside(d, predictor); ok {
		s.Layers = append(s.Layers, l)
	}
	return s
}

// RebaselineEvents adds each re-baseline to a coefficient-history chart
// (History over fits) as a vertical event rule (class "event") just
// before the first fit made at or after the event was recorded (the first
// judged against the new baseline), labelled "re-baselined". An event after the last fit is not drawn.
func RebaselineEvents(s *Spec, fits []view.FitView, rbs []view.RebaselineView) {
	for _, r := range rbs {
		for i, f := range fits {
			if !f.At.Before(r.Recorded) {
				s.Layers = append(s.Layers, Rule{Class: "event", ID: fmt.Sprintf("rebaseline-%d", r.ID), Vertical: true,
					At: float64(i+1) - 0.5, Label: "re-baselined", Tone: ToneReference, Dash: Dashed})
				break
			}
		}
	}
}
