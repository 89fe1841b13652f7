package engine

import (
	"math"
	"strings"
	"testing"
)

// FuzzRefitWeighted: RefitWeighted never panics on data (weights decoded
// from the last bytes: zero, negative, NaN and huge ones included) and
// returns finite values or an error; Diagnose, Judge and CheckForm never
// panic on its fits.
func FuzzRefitWeighted(f *testing.F) {
	f.Add([]byte{0, 1, 2, 3, 2, 5, 4, 7, 9, 9, 8}, []byte{4, 8, 12, 4, 8, 12})
	f.Add([]byte{1, 1, 1, 2, 2, 2, 3, 3, 3, 4, 4, 5, 6, 7, 8}, []byte{1, 0, 3})
	f.Add([]byte{2, 127, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15}, []byte{127, 1, 128, 2})
	f.Add([]byte{6, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12}, []byte{255, 3})
	f.Fuzz(func(t *testing.T, data, wb []byte) {
		m, X, y, ok := fuzzProblem(data)
		if !ok || len(wb) == 0 {
			return
		}
		n := len(y)
		w := make([]float64, n)
		for i := range w {
			switch b := wb[i%len(wb)]; b {
			case 127:
				w[i] = 1e200
			case 128:
				w[i] = math.NaN()
			default:
				w[i] = float64(int8(b)) / 4
			}
		}
		fit, err := RefitWeighted(m, X, y, w)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "engine: ") {
				t.Fatalf("error without engine: prefix: %v", err)
			}
			return
		}
		bad := func(v float64) bool { return math.IsNaN(v) || math.IsInf(v, 0) }
		for _, c := range fit.Coef {
			if bad(c.Estimate) || bad(c.StdError) {
				t.Fatalf("non-finite coefficient %+v", c)
			}
		}
		for i := range fit.Residuals {
			if bad(fit.Residuals[i]) {
				t.Fatalf("row %d: residual %v", i, fit.Residuals[i])
			}
		}
		inf := Diagnose(fit)
		for i, o := range inf.Rows {
			if bad(o.Leverage) || o.Leverage < 0 || o.Leverage > 1 {
				t.Fatalf("row %d: leverage %v", i, o.Leverage)
			}
		}
		Judge(inf, DefaultCutoffs())
		CheckForm(fit, inf)
	})
}
