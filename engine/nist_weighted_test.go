package engine

import (
	"fmt"
	"math"
	"testing"
)

// TestWeightedNIST fits the NIST StRD linear datasets (source: NIST StRD)
// with unequal weights (1, 1.5, 2 in turn) and compares the estimates
// with the ordinary fit of the rows √w [x y] (no intercept, the intercept
// column becoming √w): the same least-squares problem up to the rounding
// of the products √w·x to double, which moves the exact solution by about
// κ·eps. Digits required: 9 up to a scaled condition number of 1e7; above
// it the reference itself is that far off, and the test only asks for a
// finite fit with at least 16 - log10(κ) - 2 digits (TestFilipWeightedExact
// checks the weighted fit of Filip against its exact solution instead).
func TestWeightedNIST(t *testing.T) {
	const refLimit = 1e7 // past it the scaled-row reference is off by about κ·eps
	for _, name := range []string{"Norris", "Pontius", "NoInt1", "NoInt2", "Filip", "Longley",
		"Wampler1", "Wampler2", "Wampler3", "Wampler4", "Wampler5"} {
		d := loadNIST(t, name)
		m, cols := d.model(t)
		X, y, err := m.Design(cols)
		if err != nil {
			t.Fatal(err)
		}
		n, p := X.Dims()
		w := make([]float64, n)
		for i := range w {
			w[i] = 1 + 0.5*float64(i%3)
		}
		f, err := RefitWeighted(m, X, y, w)
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		terms := make([]string, p)
		sc := map[string][]float64{"ys": make([]float64, n)}
		for j := range terms {
			terms[j] = fmt.Sprintf("c%d", j)
			sc[terms[j]] = make([]float64, n)
		}
		for i := 0; i < n; i++ {
			s := math.Sqrt(w[i])
			for j := 0; j < p; j++ {
				sc[terms[j]][i] = X.At(i, j) * s
			}
			sc["ys"][i] = y[i] * s
		}
		mm, _ := NewModel("ys", terms, false)
		XX, yy, err := mm.Design(sc)
		if err != nil {
			t.Fatal(err)
		}
		g, err := Refit(mm, XX, yy)
		if err != nil {
			t.Logf("%s: reference fit: %v", name, err)
			continue
		}
		digits := 15.0
		for j := range f.Coef {
			digits = math.Min(digits, lre(f.Coef[j].Estimate, g.Coef[j].Estimate))
		}
		want := 9.0
		if f.Condition > refLimit {
			want = 16 - math.Log10(f.Condition) - 2
		}
		t.Logf("%-9s cond %8.2g: %.1f digits (want %.1f)", name, f.Condition, digits, want)
		if digits < want {
			t.Errorf("%s: weighted fit agrees with the scaled-row fit to %.1f digits, want %.1f", name, digits, want)
		}
	}
}
