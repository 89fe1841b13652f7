package engine

import (
	"fmt"
	"math"
	"testing"
)

// TestFilipPowerTen fits NIST StRD Filip (degree 10; source: NIST StRD,
// certified values to 15 digits) with the power written as x^10, which
// the term grammar accepts up to MaxPower, and holds it to the digits
// TestNIST requires of Filip (7).
func TestFilipPowerTen(t *testing.T) {
	d := loadNIST(t, "Filip")
	terms := []string{"x"}
	for k := 2; k <= d.Degree; k++ {
		terms = append(terms, fmt.Sprintf("x^%d", k))
	}
	if terms[len(terms)-1] != "x^10" {
		t.Fatalf("Filip has degree %d, want 10", d.Degree)
	}
	m, err := NewModel("y", terms, d.Intercept)
	if err != nil {
		t.Fatal(err)
	}
	X, y, err := m.Design(d.Data)
	if err != nil {
		t.Fatal(err)
	}
	f, err := Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	minC := 15.0
	for j, c := range f.Coef {
		minC = math.Min(minC, lre(c.Estimate, d.Certified.Coefficients[j]))
		minC = math.Min(minC, lre(c.StdError, d.Certified.StdErrors[j]))
	}
	minC = math.Min(minC, lre(f.Sigma, d.Certified.ResidualSD))
	t.Logf("Filip with x^10: %.1f digits", minC)
	if minC < 7 {
		t.Errorf("Filip with x^10 agrees to %.1f digits, want >= 7", minC)
	}
	if _, err := ParseTerm(fmt.Sprintf("x^%d", MaxPower+1)); err == nil {
		t.Errorf("x^%d accepted past MaxPower", MaxPower+1)
	}
}
