// Package demo holds the scenario that "plumb demo" plays: an invented
// end-of-line calibration bench and a simulated instrument that writes its
// readings into a watched folder, so the real daemon can be watched at
// work.
//
// # The setting
//
// Larkfield Instruments (an invented maker) calibrates its type LK2
// thermocouple sensors on bench B. The bench holds each sensor in an oven
// beside a reference thermometer; one reading is the reference temperature
// ref_temp_c (degC) and the sensor's thermo-voltage emf_mv (mV). The bench's
// calibration curve is the quadratic
//
//	ref_temp_c = b0 + b1*emf_mv + b2*emf_mv^2
//
// refitted by plumb as the readings arrive in
// incoming/bench-b/feed-2026-12.csv (see Folder, FeedName, Terms).
//
// # The story
//
// Scenario returns the readings in order, each with its Phase and what
// plumb is expected to do (Expect):
//
//	ordinary       sweeps over 50..350 degC with realistic noise: no alert
//	high_leverage  one reading at 460 degC, far out but on the curve: high
//	               leverage, no alert
//	mid_outlier    one reading off the curve at 150 degC: an outlier, but not
//	               influential, so it is recorded and raises no alert
//	edge_outlier   one reading off the curve at 10 degC, the bottom edge: an
//	               outlier and influential, a suspect-point alert on its
//	               file:line; the prediction at the lower specification
//	               limit now rests on it (a fragile-fit alert), and plumb
//	               suggests readings at the bottom of the region
//	follow_up      readings at 1..10 degC, where the suggestion points; with
//	               the second the fit is no longer fragile and the
//	               fragile-fit alert resolves (the suspect reading stays
//	               suspect: plumb never drops or alters a measurement)
//	drift          the bench voltmeter's offset creeps downward reading by
//	               reading until the curve has drifted from its baseline: a
//	               drift alert opens three readings before the end
//
// Expected summarises the outcomes by line of the feed.
//
// The scenario's tests prove each expectation with the engine itself, as
// the daemon computes it: each arriving reading judged against all rows so
// far with the engine's default cutoffs; at each refresh, the window of the
// last WindowRows rows, its fragility under the config's conclusions, and
// its drift from the baseline (the fit of the first BaselineRows rows),
// judged without the window's suspect rows. The diagnostics of the planted
// readings are also checked against R.
//
// # Use
//
//	path, err := demo.Config(dir, "127.0.0.1:8765") // writes dir/plumb.toml, makes the folder
//	// start the daemon on path, then:
//	err = demo.Run(ctx, dir, 1, func(l demo.Line) { fmt.Println(l.File, l.Number, l.Text) })
//
// Run creates dir/incoming/bench-b/feed-2026-12.csv, writes the header and
// then one reading every two seconds divided by speed, some of them in two
// pieces (half a line, a pause, the rest) as a slow instrument would.
//
// daemon_integration_test.go (build tag integration) plays the scenario
// into the real daemon and checks its alerts against Expected.
//
// All names, numbers and people in this package are invented.
package demo
