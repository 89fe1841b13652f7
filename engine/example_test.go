package engine_test

import (
	"fmt"
	"math/rand/v2"

	"plumb/engine"
)

// A pressure-sensor calibration (invented scenario): ten reference
// pressures, readings with a little noise, and one reading mistyped.
func Example() {
	rng := rand.New(rand.NewPCG(7, 7))
	ref := []float64{0, 10, 20, 30, 40, 50, 60, 70, 80, 90}
	reading := make([]float64, len(ref))
	for i, p := range ref {
		reading[i] = 0.5 + 0.98*p + 0.2*rng.NormFloat64()
	}
	reading[6] += 3 // the mistyped reading

	m, err := engine.NewModel("reading", []string{"pressure"}, true)
	if err != nil {
		fmt.Println(err)
		return
	}
	X, y, err := m.Design(map[string][]float64{"pressure": ref, "reading": reading})
	if err != nil {
		fmt.Println(err)
		return
	}
	fit, err := engine.Refit(m, X, y)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, c := range fit.Coef {
		fmt.Printf("%-9s %7.4f ± %.4f\n", c.Term, c.Estimate, c.StdError)
	}
	inf := engine.Diagnose(fit)
	notable := 0
	for i, v := range engine.Judge(inf, engine.DefaultCutoffs()) {
		switch v.Word() {
		case "ordinary":
		case "notable":
			notable++
		default:
			o := inf.Rows[i]
			fmt.Printf("row %d: %s (t = %.2f, Bonferroni p = %.2g, Cook's D = %.2f)\n",
				i, v.Word(), o.StudentExternal, o.BonferroniP, o.Cook)
			for _, f := range v.Flags {
				if f.Family != "size_adjusted" {
					fmt.Printf("  %s %s (%s): %.3g, cutoff %.3g\n", f.Measure, f.Term, f.Family, f.Value, f.Cutoff)
				}
			}
		}
	}
	fmt.Println("rows crossing only size-adjusted cutoffs:", notable)
	// Output:
	// intercept  0.5852 ± 0.6459
	// pressure   0.9860 ± 0.0121
	// row 6: suspect (t = 15.54, Bonferroni p = 1.1e-05, Cook's D = 0.57)
	//   dffits  (absolute): 5.94, cutoff 1
	//   dfbetas pressure (absolute): 2.75, cutoff 1
	//   outlier_p_bonferroni  (test): 1.1e-05, cutoff 0.05
	// rows crossing only size-adjusted cutoffs: 4
}
