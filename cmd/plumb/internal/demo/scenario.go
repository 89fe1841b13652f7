package demo

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
)

// The invented setting of the demo.
const (
	// Company and Bench name the invented maker and its bench.
	Company = "Larkfield Instruments"
	Bench   = "bench B"
	// ModelName is the model the demo config defines.
	ModelName = "bench-b"
	// Folder is the watched folder, relative to the demo directory.
	Folder = "incoming/bench-b"
	// FeedName is the feed file inside Folder that the Writer appends to.
	FeedName = "feed-2026-12.csv"
	// Response and Predictor are the model's columns: the bench's
	// reference thermometer against the sensor's thermo-voltage.
	Response  = "ref_temp_c"
	Predictor = "emf_mv"
)

// Header is the feed file's first line.
var Header = []string{"measured_at", "sensor", "ref_temp_c", "emf_mv"}

// Terms are the model's terms: the usual quadratic inverse curve of a
// thermocouple, temperature from thermo-voltage.
var Terms = []string{"emf_mv", "emf_mv^2"}

// Phase names the part of the story a reading belongs to.
type Phase string

// The phases, in the order they are written.
const (
	// PhaseOrdinary: calibration sweeps over the bench's usual range.
	PhaseOrdinary Phase = "ordinary"
	// PhaseLeverage: one reading far out at the top of the range that
	// lies on the curve: high leverage, not influential, no alert.
	PhaseLeverage Phase = "high_leverage"
	// PhaseMidOutlier: a reading off the curve in the middle of the
	// range: an outlier whose removal barely moves the fit, no alert.
	PhaseMidOutlier Phase = "mid_outlier"
	// PhaseEdgeOutlier: a reading off the curve at the bottom edge: an
	// outlier that pulls the fit, a suspect-point alert.
	PhaseEdgeOutlier Phase = "edge_outlier"
	// PhaseFollowUp: readings taken near the bottom edge, where the
	// suggestion pointed, that settle the fit there.
	PhaseFollowUp Phase = "follow_up"
	// PhaseDrift: the bench's voltmeter offset creeps downward, the
	// calibration drifts from its baseline.
	PhaseDrift Phase = "drift"
)

// Expect is what plumb is expected to do on a reading.
type Expect string

const (
	// ExpectNothing: the reading is neither an outlier nor influential
	// (it may be notable, e.g. for its leverage); no alert.
	ExpectNothing Expect = "nothing"
	// ExpectOutlierOnly: an outlier that is not influential; recorded,
	// no alert.
	ExpectOutlierOnly Expect = "outlier_only"
	// ExpectSuspect: an outlier that is influential; a suspect-point
	// alert on the reading's file:line, with a suggestion.
	ExpectSuspect Expect = "suspect_point"
	// ExpectFragilityClears: with this reading the fit is no longer
	// fragile; an open fragile-fit alert resolves.
	ExpectFragilityClears Expect = "fragility_clears"
	// ExpectDrift: with this reading the fit has drifted from its
	// baseline; a drift alert opens.
	ExpectDrift Expect = "drift"
)

// Reading is one planted row of the feed.
type Reading struct {
	// Index is the 0-based position in the scenario; the reading stands on
	// line Index+2 of the feed (the header is line 1).
	Index  int
	Phase  Phase
	Sensor string
	// RefTempC and EmfMV are the values as written (already rounded to the
	// written precision).
	RefTempC float64
	EmfMV    float64
	// Expect is what plumb should do when this reading arrives; Note says
	// it in words for the demo's narration.
	Expect Expect
	Note   string
}

// Line returns the reading's 1-based line number in the feed.
func (r Reading) Line() int { return r.Index + 2 }

// Fields returns the CSV fields of the reading with the given timestamp.
func (r Reading) Fields(measuredAt string) []string {
	return []string{measuredAt, r.Sensor, formatTemp(r.RefTempC), formatEMF(r.EmfMV)}
}

func formatTemp(v float64) string { return strconv.FormatFloat(v, 'f', 2, 64) }
func formatEMF(v float64) string  { return strconv.FormatFloat(v, 'f', 4, 64) }

// round returns v as it reads back after formatting with f.
func round(v float64, f func(float64) string) float64 {
	x, err := strconv.ParseFloat(f(v), 64)
	if err != nil {
		panic("demo: " + err.Error())
	}
	return x
}

// The invented sensor: the true inverse curve of Larkfield's type LK2
// sensors on bench B, T = c0 + c1 e + c2 e^2 (T in degC, e in mV).
const (
	trueC0 = 0.60
	trueC1 = 24.62
	trueC2 = -0.0310

	emfNoise = 0.004 // voltmeter noise, mV (about 0.1 degC)
	refNoise = 0.03  // reference thermometer noise, degC
	ovenBand = 0.4   // how far the oven settles from its setpoint, degC
)

// trueTemp is the true curve.
func trueTemp(e float64) float64 { return trueC0 + trueC1*e + trueC2*e*e }

// trueEMF inverts trueTemp on its increasing branch.
func trueEMF(t float64) float64 {
	// c2 e^2 + c1 e + (c0 - t) = 0, the root near t/c1.
	a, b, c := trueC2, trueC1, trueC0-t
	return (-b + math.Sqrt(b*b-4*a*c)) / (2 * a)
}

// Scenario returns the planted readings in the order the Writer writes
// them. It is deterministic: every call returns the same readings.
func Scenario() []Reading { return build(thePlan) }

// plan holds the numbers the scenario is built from; the tests prove the
// outcomes of thePlan with the engine.
type plan struct {
	seed             uint64
	setpoints        []float64 // of the ordinary sweeps, degC
	ordinary         int       // readings in the ordinary sweeps
	leverageSetpoint float64   // degC
	midSetpoint      float64   // degC
	midShift         float64   // mV added to the mid outlier's thermo-voltage
	edgeSetpoint     float64   // degC
	edgeShift        float64   // mV added to the edge outlier's thermo-voltage
	follow           []float64
	clearsAt         int // 0-based follow-up reading after which the fit is no longer fragile
	drift            []float64
	driftCount       int
	driftStep        float64 // mV of offset added per drift reading
	driftAt          int     // 0-based drift reading with which the drift alert opens
}

var thePlan = plan{
	seed:             4,
	setpoints:        []float64{50, 100, 150, 200, 250, 300, 350},
	ordinary:         30,
	leverageSetpoint: 460,
	midSetpoint:      150,
	midShift:         -0.015,
	edgeSetpoint:     10,
	edgeShift:        0.06,
	follow:           []float64{1, 5, 10, 2},
	clearsAt:         1,
	drift:            []float64{100, 150, 200, 250, 300, 350, 300, 250, 200, 150},
	driftCount:       21,
	driftStep:        -0.0017,
	driftAt:          18,
}

// seed1 is the first word of every random stream of the package.
const seed1 = 20261201

func build(pl plan) []Reading {
	rng := rand.New(rand.NewPCG(seed1, pl.seed))
	var out []Reading
	serial := 4100
	add := func(ph Phase, setpoint, emfShift float64, exp Expect, note string) {
		t := setpoint + ovenBand*(2*rng.Float64()-1)
		noise := 1.0
		if ph == PhaseLeverage || ph == PhaseMidOutlier {
			noise = 0 // exactly on the curve, or exactly off it by emfShift
		}
		e := trueEMF(t) + noise*emfNoise*rng.NormFloat64() + emfShift
		ref := t + noise*refNoise*rng.NormFloat64()
		serial++
		out = append(out, Reading{
			Index:    len(out),
			Phase:    ph,
			Sensor:   fmt.Sprintf("LK2-%05d", serial),
			RefTempC: round(ref, formatTemp),
			EmfMV:    round(e, formatEMF),
			Expect:   exp,
			Note:     note,
		})
	}
	// (a) ordinary sweeps up and down the range.
	for i := 0; i < pl.ordinary; i++ {
		n := len(pl.setpoints)
		k := i % (2 * n)
		if k >= n {
			k = 2*n - 1 - k
		}
		add(PhaseOrdinary, pl.setpoints[k], 0, ExpectNothing, "ordinary reading")
	}
	// (b) a far reading that fits.
	add(PhaseLeverage, pl.leverageSetpoint, 0, ExpectNothing,
		"far out at the top of the range but on the curve: high leverage, no alert")
	// (c) an outlier in the middle.
	add(PhaseMidOutlier, pl.midSetpoint, pl.midShift, ExpectOutlierOnly,
		"off the curve in the middle of the range: an outlier, but it barely moves the fit; no alert")
	// (d) an outlier at the bottom edge.
	add(PhaseEdgeOutlier, pl.edgeSetpoint, pl.edgeShift, ExpectSuspect,
		"off the curve at the bottom edge: an outlier that pulls the fit; suspect-point alert, "+
			"and the prediction at the lower spec limit now rests on this reading (fragile fit)")
	// (e) readings where the suggestion points.
	for i, sp := range pl.follow {
		exp, note := ExpectNothing, "more data near the bottom edge, where plumb suggested"
		if i == pl.clearsAt {
			exp, note = ExpectFragilityClears, note+"; the fit is no longer fragile"
		}
		add(PhaseFollowUp, sp, 0, exp, note)
	}
	// (f) the voltmeter offset creeps.
	for i := 0; i < pl.driftCount; i++ {
		exp, note := ExpectNothing, "the voltmeter's offset is creeping"
		if i == pl.driftAt {
			exp, note = ExpectDrift, note+"; the curve has drifted from its baseline"
		}
		add(PhaseDrift, pl.drift[i%len(pl.drift)], pl.driftStep*float64(i+1), exp, note)
	}
	return out
}

// Outcomes is what plumb is expected to report over the whole scenario,
// by line of the feed (1-based, the header is line 1).
type Outcomes struct {
	// Suspect are the lines that raise a suspect-point alert; it stays
	// open to the end of the feed.
	Suspect []int
	// OutlierOnly are outliers that raise no alert (not influential).
	OutlierOnly []int
	// Leverage is the far reading that fits: high leverage, no alert.
	Leverage int
	// FragileFrom is the line with which a fragile-fit alert opens;
	// FragileUntil the line with which it resolves.
	FragileFrom, FragileUntil int
	// Drift is the line with which the drift alert opens; it stays open
	// to the end of the feed.
	Drift int
	// Lines is the number of lines of the feed, header included.
	Lines int
}

// Expected returns the outcomes of Scenario.
func Expected() Outcomes {
	sc := Scenario()
	o := Outcomes{Lines: len(sc) + 1}
	for _, r := range sc {
		switch {
		case r.Expect == ExpectSuspect:
			o.Suspect = append(o.Suspect, r.Line())
			o.FragileFrom = r.Line()
		case r.Expect == ExpectOutlierOnly:
			o.OutlierOnly = append(o.OutlierOnly, r.Line())
		case r.Expect == ExpectFragilityClears:
			o.FragileUntil = r.Line()
		case r.Expect == ExpectDrift:
			o.Drift = r.Line()
		case r.Phase == PhaseLeverage:
			o.Leverage = r.Line()
		}
	}
	return o
}
