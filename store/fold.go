package store

import "time"

// ExcludedAt folds a model's decisions (in the order Decisions returns
// them, oldest first) into the readings set aside at the time at: for each
// observation, its latest decision at or before at, kept when that is an
// exclusion. The value is that exclusion (who, when, why), for the marks
// the views draw. A zero at means "now": every decision counts.
//
// How the daemon uses it: at the start of each refresh it reads the
// model's Decisions once (they are few), calls ExcludedAt(ds, time.Time{})
// and leaves the returned observation ids out of the design matrix of the
// refit, of the drift check and of the fragility and suggestion searches.
// The rows stay in the history and in every list, marked as set aside.
// A decision taken between two refreshes therefore changes the fit from
// the next refresh on, never a fit already stored.
func ExcludedAt(ds []Decision, at time.Time) map[int64]Decision {
	out := make(map[int64]Decision)
	for _, d := range ds {
		if !at.IsZero() && d.At.After(at) {
			continue
		}
		switch d.Action {
		case ActionExclude:
			out[d.ObsID] = d
		case ActionReinstate:
			delete(out, d.ObsID)
		}
	}
	return out
}

// BaselineFrom returns the re-baseline in force at the time at (zero:
// now): of the events whose From is at or before at, the one with the
// latest From (the latest recorded among equal Froms). ok is false when
// there is none, and the baseline is then the model's first rows as
// before.
//
// How the daemon uses it: the drift baseline is the fit of the first
// baseline_rows readings, not set aside, whose time is at or after
// r.From, where a reading's time is its timestamp column when the model
// has one and its arrival time otherwise. Until that many such readings
// have arrived the model has no baseline and reports no drift. Drift
// alerts raised before r.Recorded are resolved with a note naming the
// event ("re-baselined by X: reason").
func BaselineFrom(rs []Rebaseline, at time.Time) (r Rebaseline, ok bool) {
	for _, e := range rs {
		if !at.IsZero() && e.From.After(at) {
			continue
		}
		if !ok || !e.From.Before(r.From) {
			r, ok = e, true
		}
	}
	return r, ok
}

// QuietAt returns the quiet periods in force for model at t (periods of
// all models included), in the given order. The daemon holds the
// deliveries of an alert while any period covers it, and when the last
// one ends sends one summary of the alerts still open.
func QuietAt(qs []QuietPeriod, model string, t time.Time) []QuietPeriod {
	var out []QuietPeriod
	for _, q := range qs {
		if q.Covers(model, t) {
			out = append(out, q)
		}
	}
	return out
}

// QuietUntil returns when the quiet of model that covers t ends: the end
// of the covering period, followed through periods that overlap or touch
// it. ok is false when no period covers t. The daemon holds the model's
// deliveries until then, and at that time sends one summary of the
// alerts still open.
func QuietUntil(qs []QuietPeriod, model string, t time.Time) (end time.Time, ok bool) {
	for _, q := range QuietAt(qs, model, t) {
		if q.End.After(end) {
			end, ok = q.End, true
		}
	}
	for ok {
		grown := false
		for _, q := range qs {
			if (q.Model == "" || q.Model == model) && !q.Start.After(end) && q.End.After(end) {
				end, grown = q.End, true
			}
		}
		if !grown {
			break
		}
	}
	return end, ok
}

// Note is the words every view shows beside a reading set aside, and the
// note its alert resolves with: "set aside by r.okafor on 2026-05-04:
// valve left open" (the date in UTC). A reinstatement reads "reinstated
// by ...".
func (d Decision) Note() string {
	verb := "set aside"
	if d.Action == ActionReinstate {
		verb = "reinstated"
	}
	return verb + " by " + d.Actor + " on " + d.At.UTC().Format(time.DateOnly) + ": " + d.Reason
}

// Note is the note drift alerts raised before the event resolve with:
// "re-baselined from 2026-05-04 08:00 UTC by t.berg: sensor replaced".
func (r Rebaseline) Note() string {
	return "re-baselined from " + r.From.UTC().Format("2006-01-02 15:04") + " UTC by " + r.Actor + ": " + r.Reason
}
