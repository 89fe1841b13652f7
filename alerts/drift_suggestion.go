package alerts

import (
	"fmt"
	"sort"
	"strings"
)

// DriftSuggestion is the suggestion of a drift alert. A calibration that
// moves is not helped by more readings where the data are thin: it is
// checked against reference standards at the points that matter, or
// established again. So the text names the model's checkpoints, taken
// from the prediction measures of the condition (Kind DriftPrediction,
// with their Name and At), e.g.
//
//	check the calibration with reference standards at the checkpoints
//	10 degC (emf_mv = 0.397) and 400 degC (emf_mv = 16.4), or recalibrate
//
// With no checkpoint it names the low end, the middle and the high end of
// region (the operating region, one [lo, hi] per predictor column; nil
// or empty: no points named) and says that configured checkpoints would
// be named instead. At is left empty: the suggestion is several points.
func DriftSuggestion(measures []DriftMeasure, region map[string][2]float64) *Suggestion {
	var points []string
	for _, d := range measures {
		if d.Kind != DriftPrediction {
			continue
		}
		at := fmtValues(d.At)
		switch {
		case d.Name == "" && at == "":
			continue
		case d.Name == "":
			points = append(points, at)
		case at == "" || strings.Contains(d.Name, "="):
			points = append(points, d.Name)
		default:
			points = append(points, fmt.Sprintf("%s (%s)", d.Name, at))
		}
	}
	if len(points) > 0 {
		word := "checkpoint"
		if len(points) > 1 {
			word = "checkpoints"
		}
		return &Suggestion{Text: fmt.Sprintf("check the calibration with reference standards at the %s %s, or recalibrate", word, joinAnd(points))}
	}
	cols := make([]string, 0, len(region))
	for c := range region {
		cols = append(cols, c)
	}
	sort.Strings(cols)
	if len(cols) == 0 {
		return &Suggestion{Text: "check the calibration with reference standards across its operating range, or recalibrate " +
			"(the model names no checkpoints; configured checkpoints would be named here)"}
	}
	var ends []string
	for _, frac := range []float64{0, 0.5, 1} {
		v := Values{}
		for _, c := range cols {
			b := region[c]
			v[c] = b[0] + frac*(b[1]-b[0])
		}
		ends = append(ends, fmtValues(v))
	}
	return &Suggestion{Text: fmt.Sprintf("check the calibration with reference standards at the low end, the middle and the high end "+
		"of its operating range (%s), or recalibrate (the model names no checkpoints; configured checkpoints would be named here)",
		strings.Join(ends, "; "))}
}

// fmtValues writes "a = 1, b = 2" in column order.
func fmtValues(v Values) string {
	keys := make([]string, 0, len(v))
	for k := range v {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = k + " = " + fmtNum(v[k])
	}
	return strings.Join(parts, ", ")
}

// joinAnd joins "a", "a and b", "a, b and c".
func joinAnd(s []string) string {
	if len(s) <= 1 {
		return strings.Join(s, "")
	}
	return strings.Join(s[:len(s)-1], ", ") + " and " + s[len(s)-1]
}
