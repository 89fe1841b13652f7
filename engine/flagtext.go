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
func (f Flag) Text() string { return string(f.AppendText(nil)) }

// AppendText appends f.Text() to dst without building intermediate
// strings (inspect's json writes it for every flag of every row).
func (f Flag) AppendText(dst []byte) []byte {
	above := func(dst []byte) []byte {
		dst = append(dst, ", above "...)
		dst = appendCutoffWords(dst, f.Family)
		return appendFlagNum(dst, f.Cutoff)
	}
	switch f.Measure {
	case MeasureBonferroni:
		dst = append(dst, "Bonferroni outlier test: "...)
		dst = append(dst, PText(f.Value)...)
		dst = append(dst, ", below the "...)
		dst = appendFlagNum(dst, f.Cutoff)
		return append(dst, " level"...)
	case MeasureGrubbs:
		dst = append(dst, "Grubbs statistic G "...)
		dst = appendFlagNum(dst, f.Value)
		dst = append(dst, ", above the critical value "...)
		return appendFlagNum(dst, f.Cutoff)
	case MeasureLeverage:
		dst = append(dst, "leverage "...)
		return above(appendFlagNum(dst, f.Value))
	case MeasureCook:
		dst = append(dst, "Cook's distance "...)
		return above(appendFlagNum(dst, f.Value))
	case MeasureDFFITS, MeasureDFBETAS:
		short := "DFFITS"
		if f.Measure == MeasureDFBETAS {
			short = "DFBETAS"
		}
		if f.Value < 0 {
			dst = append(dst, short...)
			if f.Term != "" {
				dst = append(append(dst, " of "...), f.Term...)
			}
			dst = append(dst, ' ')
			dst = appendFlagNum(dst, f.Value)
			dst = append(append(append(dst, ": |"...), short...), "| "...)
			return above(appendFlagNum(dst, -f.Value))
		}
		dst = append(append(append(dst, '|'), short...), '|')
		if f.Term != "" {
			dst = append(append(dst, " of "...), f.Term...)
		}
		dst = append(dst, ' ')
		return above(appendFlagNum(dst, math.Abs(f.Value)))
	case MeasureCOVRATIO:
		dst = append(dst, "COVRATIO "...)
		dst = appendFlagNum(dst, f.Value)
		dst = append(dst, ": |COVRATIO − 1| "...)
		return above(appendFlagNum(dst, math.Abs(f.Value-1)))
	}
	dst = append(dst, f.Measure...)
	if f.Term != "" {
		dst = append(append(dst, " of "...), f.Term...)
	}
	dst = append(dst, ' ')
	dst = appendFlagNum(dst, f.Value)
	dst = append(dst, ", beyond "...)
	dst = appendCutoffWords(dst, f.Family)
	return appendFlagNum(dst, f.Cutoff)
}

// appendCutoffWords appends cutoffWords(family).
func appendCutoffWords(dst []byte, family string) []byte {
	switch family {
	case "", FamilyTest:
		return dst
	}
	dst = append(dst, "the "...)
	for i := 0; i < len(family); i++ {
		c := family[i]
		if c == '_' {
			c = '-'
		}
		dst = append(dst, c)
	}
	return append(dst, " cutoff "...)
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

// appendFlagNum appends 4 significant digits, "undefined" when not finite.
func appendFlagNum(dst []byte, x float64) []byte {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return append(dst, "undefined"...)
	}
	return strconv.AppendFloat(dst, x, 'g', 4, 64)
}
