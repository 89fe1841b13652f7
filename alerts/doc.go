// Package alerts decides when plumb tells someone about a model, keeps one
// alert per thing worth telling, and delivers its events through an outbox.
//
// # The model
//
// The daemon reports conditions; the Manager decides. A condition is what
// the daemon saw after a row arrived or a refit ran:
//
//	mgr.Point(ctx, alerts.PointCondition{Model: "bench-b", File: "feed.csv", Line: 212, ...})
//	mgr.Fragility(ctx, alerts.FragilityCondition{Model: "bench-b", Index: 1, ...})
//	mgr.Drift(ctx, alerts.DriftCondition{Model: "bench-b", Measures: ...})
//	mgr.Blocked(ctx, alerts.BlockedCondition{Model: "bench-b", Blocked: true, Reason: "..."})
//	mgr.Form(ctx, alerts.FormCondition{Model: "bench-b", Checks: ...})
//	mgr.Activity(ctx, "bench-b", arrivedAt)   // the feed is alive
//	mgr.Tick(ctx, now)                        // silence and reminders
//
// Each call is judged against the Rules for the alert's kind:
//
//	suspect_point  a new row that is an outlier (Bonferroni test, or Grubbs
//	               when configured) and influential (Cook's distance or
//	               DFFITS beyond its cutoff); either alone raises nothing
//	fragile_fit    the fragility index is at or below the configured limit
//	drift          a coefficient or checkpoint prediction has moved more than
//	               k standard errors, or a tolerance in units, from baseline
//	blocked        the model cannot be fitted, or its feed has been silent
//	               longer than the configured time
//	form_lapse     a check of the model form (lack of fit, Durbin-Watson,
//	               Breusch-Pagan) is significant at the rule's level on
//	               consecutive refreshes (2 by default)
//
// # One alert per thing
//
// An alert is identified by (model, kind, subject). Its id is deterministic:
// a readable kind prefix and the first 16 hex digits of a SHA-256 over the
// three, for instance "sp-0b45c711a175d0ec" for ("bench-b", suspect_point,
// "bench-b/feed.csv:212"). A condition that repeats
// updates the alert (count, last seen) and sends nothing. The alert's life:
//
//	(none) --condition--> open --Ack--> acknowledged
//	open, acknowledged --condition clears or Resolve--> resolved
//	resolved --condition again--> open (same id, notified again)
//
// An open alert is re-notified (event "reminder") only by Tick and only
// when its rule's Renotify interval has passed since the last notification.
// Acknowledged alerts are not re-notified.
//
// The document keeps that life in History: each event with its time,
// who acknowledged and their note, how it was resolved; reminders in a
// row are one entry with their count (at most 50 entries, the first
// kept). With Config.DashboardURL set, URL is the alert's dashboard page.
//
// # Delivery
//
// Every notification becomes one outbound event per selected route. The
// Manager writes the alert and its events in one Ledger.PutAlert call, the
// outbox pattern: an event is either stored with the alert or not at all.
// A Dispatcher polls due deliveries and sends them through Routes (log,
// file, webhook, command), with a per-route token-bucket rate limit,
// exponential backoff with jitter, a bounded number of attempts and then a
// dead-letter state visible through Ledger.Deliveries(ctx, DeliveryDead, n).
//
// Delivery is at least once. Each event is a CloudEvents 1.0 event in
// structured JSON mode. Its id is the alert id, "-", and the alert's event
// sequence number (1, 2, ...): the idempotency key a receiver dedupes on; a
// retried event carries the same id and the same bytes. The extension
// attribute "plumbalertid" carries the alert id alone, so a receiver can
// group all events of one alert. The webhook route also sends the event id
// in an Idempotency-Key header and, when a secret is configured, signs the
// body (see Sign and VerifySignature).
//
// # Quiet periods
//
// Config.Quiet tells the Manager when a quiet period holds a model's
// deliveries: alerts are still raised, updated and stored, but their
// events are not enqueued (the alert document says Held). When the
// period ends, QuietSummary enqueues one event of type SummaryType per
// route that takes any alert still open, its data a QuietSummaryDoc that
// lists them. Its id, SummaryEventID(key), is derived from the period, so
// the Ledger's rule (one event id per route) sends it once however often
// it is asked, across crashes and restarts.
//
// # Wiring
//
// The daemon builds the routes, the Manager and the Dispatcher from the
// same route configs and runs the Dispatcher until shutdown:
//
//	routes, err := alerts.NewRoutes(cfgs, alerts.RouteOptions{Logger: log})
//	disp := alerts.NewDispatcher(ledger, routes)
//	mgr, err := alerts.NewManager(ledger, alerts.Config{
//		Rules: rules, ModelRules: perModel, Routes: cfgs, ModelRoutes: own,
//		Host: host, OnEnqueue: disp.Wake,
//	})
//	go disp.Run(ctx)              // returns after ctx is cancelled
//	... mgr.Point / Fragility / Drift / Blocked / Activity as data arrives
//	... mgr.Tick(ctx, time.Now()) every minute or so
//
// Status pages list alerts with Ledger.Alerts (DecodeAlert reads the
// document) and dead letters with Ledger.Deliveries(ctx, DeliveryDead, n).
//
// # Caution
//
// plumb flags; it never deletes or alters a measurement. Every alert document carries the caution
// line Caution: the decision to keep, correct, re-measure or exclude a
// value belongs to qualified staff under local quality procedures.
//
// # Storage
//
// Ledger mirrors the alert part of plumb's store one-to-one, so the daemon
// adapts the store with plain field copies; alerts and store never import
// each other.
package alerts
