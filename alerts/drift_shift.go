package alerts

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// shiftSentence states how far the curve has moved at each checkpoint,
// in the response's units with the standard error of the shift:
// "... at emf_mv = 10.4 mV the curve now reads 0.41 °C higher (± 0.08 °C)".
// It is "" when no prediction measure carries a shift.
func shiftSentence(ms []DriftMeasure) string {
	var parts []string
	for _, d := range ms {
		if d.Kind != DriftPrediction || d.ShiftSE == 0 {
			continue
		}
		parts = append(parts, shiftWords(d))
	}
	if len(parts) == 0 {
		return ""
	}
	return "At the checkpoints (± one standard error of the shift): " + strings.Join(parts, "; ") + ". "
}

// shiftWords is one checkpoint's shift in words.
func shiftWords(d DriftMeasure) string {
	change := d.Current - d.Baseline
	dir := "higher"
	if change < 0 {
		dir = "lower"
	}
	where := d.Name
	if len(d.At) > 0 {
		where = atWords(d.At, d.AtUnits)
	}
	unit := ""
	if d.Unit != "" {
		unit = " " + d.Unit
	}
	if change == 0 {
		return fmt.Sprintf("at %s the curve reads as at baseline (± %s%s)", where, fmtNum(d.ShiftSE), unit)
	}
	return fmt.Sprintf("at %s the curve now reads %s%s %s (± %s%s)", where, fmtNum(math.Abs(change)), unit, dir, fmtNum(d.ShiftSE), unit)
}

// atWords is "emf_mv = 10.4 mV, bath_c = 20" in column order.
func atWords(at Values, units map[string]string) string {
	keys := make([]string, 0, len(at))
	for k := range at {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = k + " = " + fmtNum(at[k])
		if u := units[k]; u != "" {
			parts[i] += " " + u
		}
	}
	return strings.Join(parts, ", ")
}

// inUnit is x with the measure's unit, if any.
func (d DriftMeasure) inUnit(x float64) string {
	if d.Unit == "" {
		return fmtNum(x)
	}
	return fmtNum(x) + " " + d.Unit
}
