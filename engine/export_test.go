package engine

// DWNormalP exposes the normal-approximation Durbin-Watson p-value to the
// external tests, which compare it with lmtest::dwtest(exact = FALSE) also
// where CheckForm computes the exact one.
func DWNormalP(f *Fit, d float64) float64 { return dwNormal(f, formPass(f), d) }
