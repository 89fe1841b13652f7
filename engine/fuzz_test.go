package engine

import (
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// FuzzParseTerm: never a panic; every failure is a *TermError whose Pos
// lies within the text (0 <= Pos <= len, len meaning "at the end"); every
// success re-parses from its Text to the same term. Seeds in
// testdata/fuzz/FuzzParseTerm.
func FuzzParseTerm(f *testing.F) {
	for _, s := range []string{"x", "x^2", "x*z", "log(x)^3", `"a ""b"""*c`, "log", "x^10", "  ", "é"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		term, err := ParseTerm(s)
		if err != nil {
			var te *TermError
			if !errors.As(err, &te) {
				t.Fatalf("ParseTerm(%q): error %T %v, want *TermError", s, err, err)
			}
			if te.Pos < 0 || te.Pos > len(s) || te.Term != s {
				t.Fatalf("ParseTerm(%q): Pos %d outside the text (len %d) or Term %q", s, te.Pos, len(s), te.Term)
			}
			_ = te.Error()
			return
		}
		if term.Text != strings.Trim(s, " \t") {
			t.Fatalf("Text %q, want trimmed %q", term.Text, s)
		}
		if len(term.Factors) == 0 {
			t.Fatalf("ParseTerm(%q): no factors", s)
		}
		for _, fa := range term.Factors {
			if fa.Column == "" || fa.Power < 1 || fa.Power > MaxPower || (fa.Group && (fa.Power != 1 || fa.Log)) {
				t.Fatalf("ParseTerm(%q): bad factor %+v", s, fa)
			}
		}
		again, err := ParseTerm(term.Text)
		if err != nil || !reflect.DeepEqual(again, term) {
			t.Fatalf("re-parse of %q: %+v, %v; first %+v", term.Text, again, err, term)
		}
	})
}

// fuzzProblem decodes bytes into a small regression problem: the first byte
// picks the number of predictors (1-3) and the intercept, the rest are the
// values, row by row (response last), as small multiples of 1/4 so that
// ties, constant and collinear columns are common; byte 127 is a huge
// value and byte 128 a NaN.
func fuzzProblem(data []byte) (Model, *mat.Dense, []float64, bool) {
	if len(data) < 2 {
		return Model{}, nil, nil, false
	}
	k := int(data[0]%3) + 1
	intercept := data[0]&4 == 0
	names := []string{"a", "b", "c"}[:k]
	m, err := NewModel("y", names, intercept)
	if err != nil {
		return Model{}, nil, nil, false
	}
	vals := data[1:]
	n := len(vals) / (k + 1)
	if n == 0 {
		return Model{}, nil, nil, false
	}
	p := m.P()
	X := mat.NewDense(n, p, nil)
	y := make([]float64, n)
	conv := func(b byte) float64 {
		switch b {
		case 127:
			return 1e200
		case 128:
			return math.NaN()
		}
		return float64(int8(b)) / 4
	}
	for i := 0; i < n; i++ {
		off := 0
		if intercept {
			X.Set(i, 0, 1)
			off = 1
		}
		for j := 0; j < k; j++ {
			X.Set(i, off+j, conv(vals[i*(k+1)+j]))
		}
		y[i] = conv(vals[i*(k+1)+k])
	}
	return m, X, y, true
}

// FuzzRefit: Refit never panics on data and returns finite values or an
// error. Finite means: estimates, standard errors, sigma, RSS, TSS,
// residuals, fitted values and leverages (t statistics may be infinite
// when the fit is exact and sigma is 0). Diagnose and Judge never panic.
// Seeds in testdata/fuzz/FuzzRefit.
func FuzzRefit(f *testing.F) {
	f.Add([]byte{0, 1, 2, 3, 2, 5, 4, 7, 9, 9, 8})
	f.Add([]byte{1, 1, 1, 2, 2, 2, 3, 3, 3, 4, 4, 5, 6, 7, 8})
	f.Add([]byte{6, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12})
	f.Add([]byte{2, 127, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15})
	f.Fuzz(func(t *testing.T, data []byte) {
		m, X, y, ok := fuzzProblem(data)
		if !ok {
			return
		}
		fit, err := Refit(m, X, y)
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
		if bad(fit.Sigma) || bad(fit.RSS) || bad(fit.TSS) {
			t.Fatalf("non-finite summary: sigma %v RSS %v TSS %v", fit.Sigma, fit.RSS, fit.TSS)
		}
		for i := range fit.Residuals {
			if bad(fit.Residuals[i]) || bad(fit.Fitted[i]) {
				t.Fatalf("row %d: residual %v fitted %v", i, fit.Residuals[i], fit.Fitted[i])
			}
		}
		inf := Diagnose(fit)
		for i, o := range inf.Rows {
			if bad(o.Leverage) || o.Leverage < 0 || o.Leverage > 1 {
				t.Fatalf("row %d: leverage %v", i, o.Leverage)
			}
		}
		Judge(inf, DefaultCutoffs())
		c := DefaultCutoffs()
		c.Test, c.Family, c.Cook = GrubbsTest, SizeAdjusted, CookOne
		Judge(inf, c)
	})
}
