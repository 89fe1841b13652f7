package engine

import (
	"math"
	"strconv"
	"strings"
)

// Text says in words which cutoff the flag crosses, in the direction in
// which it is crossed, with the cutoff's family named. It is the one
// rendering of a flag: the dashboard, the report, inspect and the alert
// texts all use it. For example
//
//	Bonferroni outlier test: p < 0.0001, below the 0.05 level
//	DFFITS -4.109: |DFFITS| 4.109, above the absolute cutoff 1
//	|DFBETAS| of slope 2.661, above the size-adjusted cutoff 0.3052
//	COVRATIO 1.252: |COVRATIO − 1| 0.252, above the size-adjusted cutoff 0.25
//
// A DFFITS or DFBETAS flag states the signed value first when it is
// negative. Numbers carry 4 significant digits, a p-value 4 decimals
// ("p < 0.0001" below that); an undefined number reads "undefined". A
// measure the engine does not know is written as "<measure> <value>,
// beyond <cutoff>".
func (f Flag) Text() string {
	above := ", above " + cutoffWords(f.Family) + flagNum(f.Cutoff)
	switch f.Measure {
	case MeasureBonferroni:
		return "Bonferroni outlier test: " + PText(f.Value) + ", below the " + flagNum(f.Cutoff) + " level"
	case MeasureGrubbs:
		return "Grubbs statistic G " + flagNum(f.Value) + ", above the critical value " + flagNum(f.Cutoff)
	case MeasureLeverage:
		return "leverage " + flagNum(f.Value) + above
	case MeasureCook:
		return "Cook's distance " + flagNum(f.Value) + above
	case MeasureDFFITS, MeasureDFBETAS:
		short := "DFFITS"
		if f.Measure == MeasureDFBETAS {
			short = "DFBETAS"
		}
		of := ""
		if f.Term != "" {
			of = " of " + f.Term
		}
		if f.Value < 0 {
			return short + of + " " + flagNum(f.Value) + ": |" + short + "| " + flagNum(-f.Value) + above
		}
		return "|" + short + "|" + of + " " + flagNum(math.Abs(f.Value)) + above
	case MeasureCOVRATIO:
		return "COVRATIO " + flagNum(f.Value) + ": |COVRATIO − 1| " + flagNum(math.Abs(f.Value-1)) + above
	}
	name := f.Measure
	if f.Term != "" {
		name += " of " + f.Term
	}
	return name + " " + flagNum(f.Value) + ", beyond " + cutoffWords(f.Family) + flagNum(f.Cutoff)
}

// cutoffWords names the cutoff of family: "the absolute cutoff ", "the
// size-adjusted cutoff ", or "" for the test family and for none.
func cutoffWords(family string) string {
	switch family {
	case "", FamilyTest:
		return ""
	}
	return "the " + strings.ReplaceAll(family, "_", "-") + " cutoff "
}

// PText writes a p-value for people: "p = 0.0008", "p < 0.0001",
// "p undefined".
func PText(p float64) string {
	switch {
	case math.IsNaN(p) || math.IsInf(p, 0):
		return "p undefined"
	case p < 0.0001:
		return "p < 0.0001"
	}
	s := strconv.FormatFloat(p, 'f', 4, 64)
	s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	return "p = " + s
}

// flagNum writes 4 significant digits, "undefined" when not finite.
func flagNum(x float64) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "undefined"
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}
