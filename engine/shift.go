package engine

import (
	"fmt"
	"math"
)

// Overlap says how the rows of two fits relate, for ShiftAt.
type Overlap int

const (
	// Nested: every row of the earlier fit is also a row of the later one
	// (a baseline fitted on the first rows, say).
	Nested Overlap = iota
	// Disjoint: the two fits share no row (independent readings).
	Disjoint
)

// Shift is the change of the fitted mean at one point between an earlier
// fit and a later one of the same model: how far the curve has moved
// there, in the response's units, with its standard error.
type Shift struct {
	Old, New float64 // fitted values ŷ_old(x0), ŷ_new(x0)
	Change   float64 // New - Old
	SE       float64 // standard error of Change
	Z        float64 // Change/SE (±Inf when SE is 0 and Change is not; 0 when both are)
}

// ShiftAt returns the shift at design row x0 between old and new, two
// fits of the same model, whose rows relate as overlap says.
// With h(x0) = x0'(X'X)^-1 x0 of each fit (Leverage) and σ estimated by
// new.Sigma (under the hypothesis of no change both fits share σ; the
// later fit usually has more degrees of freedom):
//
//	Nested     Var(Change) = σ² (h_old(x0) - h_new(x0))
//	Disjoint   Var(Change) = σ² (h_old(x0) + h_new(x0))
//
// For nested rows Cov(b_old, b_new) = σ² C_old X_old'X_old C_new =
// σ² C_new, hence the difference. For weighted fits the same holds with
// (X'WX)^-1, when shared rows carry the same weight in both fits and
// Leverage and Sigma are the weighted ones. A nested variance below 0 from rounding
// is taken as 0. A curve compared with fixed (pinned) coefficients needs
// no ShiftAt: the standard error is that of the new fit (PredictRow).
// Models that differ, an x0 of the wrong length or an unknown overlap
// are caller bugs and panic.
func ShiftAt(old, new *Fit, x0 []float64, overlap Overlap) Shift {
	if old.P != new.P || len(x0) != new.P {
		panic(fmt.Sprintf("engine: ShiftAt: fits have %d and %d coefficients, row has %d", old.P, new.P, len(x0)))
	}
	on, nn := old.Model.Names(), new.Model.Names()
	for j := range on {
		if on[j] != nn[j] {
			panic(fmt.Sprintf("engine: ShiftAt: coefficient %d is %q in the old fit and %q in the new one", j, on[j], nn[j]))
		}
	}
	yo, _ := old.Predict(x0)
	yn, _ := new.Predict(x0)
	ho, hn := old.Leverage(x0), new.Leverage(x0)
	var v float64
	switch overlap {
	case Nested:
		v = math.Max(0, ho-hn)
	case Disjoint:
		v = ho + hn
	default:
		panic(fmt.Sprintf("engine: ShiftAt: unknown overlap %d", overlap))
	}
	s := Shift{Old: yo, New: yn, Change: yn - yo, SE: new.Sigma * math.Sqrt(v)}
	s.Z = s.Change / s.SE
	if s.Change == 0 && s.SE == 0 {
		s.Z = 0
	}
	return s
}
