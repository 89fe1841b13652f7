package engine

import "testing"

// fitXY fits y = b0 + b1 x.
func fitXY(tb testing.TB, x, y []float64) *Fit {
	tb.Helper()
	m, err := NewModel("y", []string{"x"}, true)
	if err != nil {
		tb.Fatal(err)
	}
	X, yy, err := m.Design(map[string][]float64{"x": x, "y": y})
	if err != nil {
		tb.Fatal(err)
	}
	f, err := Refit(m, X, yy)
	if err != nil {
		tb.Fatal(err)
	}
	return f
}
