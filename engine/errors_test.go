package engine

import (
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestErrors: every data-dependent failure is an error (never a panic),
// matched with errors.Is and errors.As.
func TestErrors(t *testing.T) {
	line := []float64{1, 2, 3, 4, 5, 6}
	tests := []struct {
		name      string
		terms     []string
		intercept bool
		cols      map[string][]float64
		is        error
		check     func(t *testing.T, err error)
	}{
		{
			name: "too few rows", terms: []string{"x", "x^2"}, intercept: true,
			cols: map[string][]float64{"x": {1, 2, 3}, "y": {1, 4, 8}},
			is:   ErrTooFewRows,
		},
		{
			name: "no rows", terms: []string{"x"}, intercept: true,
			cols: map[string][]float64{"x": {}, "y": {}},
			is:   ErrTooFewRows,
		},
		{
			name: "constant column", terms: []string{"x", "k"}, intercept: true,
			cols: map[string][]float64{"x": line, "k": {2, 2, 2, 2, 2, 2}, "y": {1, 3, 2, 5, 4, 6}},
			is:   ErrConstantColumn,
			check: func(t *testing.T, err error) {
				var ce *ColumnError
				if !errors.As(err, &ce) || ce.Term != "k" {
					t.Errorf("want *ColumnError for k, got %v", err)
				}
			},
		},
		{
			name: "zero column without intercept", terms: []string{"x", "k"}, intercept: false,
			cols: map[string][]float64{"x": line, "k": {0, 0, 0, 0, 0, 0}, "y": {1, 3, 2, 5, 4, 6}},
			is:   ErrConstantColumn,
		},
		{
			name: "constant response", terms: []string{"x"}, intercept: true,
			cols: map[string][]float64{"x": line, "y": {3, 3, 3, 3, 3, 3}},
			is:   ErrConstantColumn,
		},
		{
			name: "duplicated column", terms: []string{"x", "z"}, intercept: true,
			cols: map[string][]float64{"x": line, "z": line, "y": {1, 3, 2, 5, 4, 6}},
			is:   ErrCollinear,
			check: func(t *testing.T, err error) {
				var ce *CollinearError
				if !errors.As(err, &ce) || !reflect.DeepEqual(ce.Terms, []string{"x", "z"}) {
					t.Errorf("want CollinearError{x z}, got %v", err)
				}
			},
		},
		{
			name: "linear combination", terms: []string{"a", "b", "c", "sum"}, intercept: true,
			cols: map[string][]float64{"a": {1, 0, 2, 5, 3, 1, 4}, "b": {3, 1, 4, 1, 5, 9, 2},
				"c": {2, 7, 1, 8, 2, 8, 1}, "sum": {4, 1, 6, 6, 8, 10, 6}, "y": {1, 2, 3, 4, 5, 6, 8}},
			is: ErrCollinear,
			check: func(t *testing.T, err error) {
				var ce *CollinearError
				if !errors.As(err, &ce) || !reflect.DeepEqual(ce.Terms, []string{"a", "b", "sum"}) {
					t.Errorf("want CollinearError{a b sum}, got %v", err)
				}
			},
		},
		{
			name: "shifted copy collinear with intercept", terms: []string{"x", "x1"}, intercept: true,
			cols: map[string][]float64{"x": line, "x1": {11, 12, 13, 14, 15, 16}, "y": {1, 3, 2, 5, 4, 6}},
			is:   ErrCollinear,
		},
		{
			name: "NaN predictor", terms: []string{"x"}, intercept: true,
			cols: map[string][]float64{"x": {1, 2, math.NaN(), 4}, "y": {1, 2, 3, 4}},
			is:   ErrNonFinite,
			check: func(t *testing.T, err error) {
				var de *DataError
				if !errors.As(err, &de) || de.Row != 2 || de.Column != "x" {
					t.Errorf("want DataError row 2 column x, got %v", err)
				}
			},
		},
		{
			name: "Inf response", terms: []string{"x"}, intercept: true,
			cols: map[string][]float64{"x": {1, 2, 3, 4}, "y": {1, math.Inf(-1), 3, 4}},
			is:   ErrNonFinite,
			check: func(t *testing.T, err error) {
				var de *DataError
				if !errors.As(err, &de) || de.Row != 1 || de.Column != "y" {
					t.Errorf("want DataError row 1 column y, got %v", err)
				}
			},
		},
		{
			name: "power overflows", terms: []string{"x^5"}, intercept: true,
			cols: map[string][]float64{"x": {1, 2, 1e70, 4}, "y": {1, 2, 3, 4}},
			is:   ErrNonFinite,
			check: func(t *testing.T, err error) {
				var de *DataError
				if !errors.As(err, &de) || de.Row != 2 || de.Column != "x^5" {
					t.Errorf("want DataError row 2 column x^5, got %v", err)
				}
			},
		},
		{
			name: "log of zero", terms: []string{"log(x)"}, intercept: true,
			cols: map[string][]float64{"x": {1, 2, 0, 4}, "y": {1, 2, 3, 4}},
			is:   ErrLogDomain,
			check: func(t *testing.T, err error) {
				var de *DataError
				if !errors.As(err, &de) || de.Row != 2 || de.Column != "x" {
					t.Errorf("want DataError row 2 column x, got %v", err)
				}
			},
		},
		{
			name: "log of negative", terms: []string{"x", "log(z)"}, intercept: false,
			cols: map[string][]float64{"x": {1, 2, 3}, "z": {-1, 2, 3}, "y": {1, 2, 3}},
			is:   ErrLogDomain,
		},
		{
			name: "all-zero response", terms: []string{"x"}, intercept: true,
			cols: map[string][]float64{"x": line, "y": {0, 0, 0, 0, 0, 0}},
			is:   ErrZeroResponse,
		},
		{
			name: "all-zero response without intercept", terms: []string{"x"}, intercept: false,
			cols: map[string][]float64{"x": line, "y": {0, 0, 0, 0, 0, 0}},
			is:   ErrZeroResponse,
		},
		{
			name: "missing column", terms: []string{"x", "w"}, intercept: true,
			cols: map[string][]float64{"x": line, "y": line},
			is:   ErrMissingColumn,
			check: func(t *testing.T, err error) {
				var de *DataError
				if !errors.As(err, &de) || de.Column != "w" {
					t.Errorf("want DataError column w, got %v", err)
				}
			},
		},
		{
			name: "nearly collinear", terms: []string{"x", "z"}, intercept: true,
			cols: map[string][]float64{"x": line, "z": {1, 2, 3, 4, 5, 6 * (1 + 1e-12)}, "y": {1, 3, 2, 5, 4, 6}},
			is:   ErrIllConditioned,
			check: func(t *testing.T, err error) {
				var c mat.Condition
				if !errors.As(err, &c) || float64(c) < 1e12 {
					t.Errorf("want a wrapped mat.Condition above 1e12, got %v", err)
				}
			},
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m, err := NewModel("y", tt.terms, tt.intercept)
			if err != nil {
				t.Fatal(err)
			}
			X, y, err := m.Design(tt.cols)
			if err == nil {
				_, err = Refit(m, X, y)
			}
			if !errors.Is(err, tt.is) {
				t.Fatalf("error %v, want %v", err, tt.is)
			}
			if !strings.HasPrefix(err.Error(), "engine: ") {
				t.Errorf("message %q lacks the engine: prefix", err)
			}
			if tt.check != nil {
				tt.check(t, err)
			}
		})
	}
}

// Refit checks X itself too (it may be built without Design).
func TestRefitChecksX(t *testing.T) {
	m, _ := NewModel("y", []string{"x"}, true)
	X := mat.NewDense(4, 2, []float64{1, 1, 1, 2, 1, math.Inf(1), 1, 4})
	_, err := Refit(m, X, []float64{1, 2, 3, 5})
	var de *DataError
	if !errors.As(err, &de) || !errors.Is(err, ErrNonFinite) || de.Row != 2 || de.Column != "x" {
		t.Errorf("error %v, want DataError row 2 column x", err)
	}
	// Huge but finite values: an error, not Inf or NaN results.
	X = mat.NewDense(4, 2, []float64{1, 1e300, 1, -1e300, 1, 3e299, 1, 4})
	if f, err := Refit(m, X, []float64{1e300, -1e300, 1, 2}); err == nil && !f.finite() {
		t.Errorf("fit with non-finite results and no error: %+v", f.Coef)
	}
}

// Caller bugs panic with the engine: prefix.
func TestShapePanics(t *testing.T) {
	m, _ := NewModel("y", []string{"x"}, true)
	cases := map[string]func(){
		"columns": func() { Refit(m, mat.NewDense(3, 3, nil), []float64{1, 2, 3}) },
		"rows":    func() { Refit(m, mat.NewDense(3, 2, []float64{1, 1, 1, 2, 1, 3}), []float64{1, 2}) },
		"ones":    func() { Refit(m, mat.NewDense(3, 2, []float64{2, 1, 1, 2, 1, 3}), []float64{1, 2, 4}) },
		"design row": func() {
			m.DesignRow(make([]float64, 1), func(string) float64 { return 0 })
		},
		"lengths": func() { m.Design(map[string][]float64{"x": {1, 2}, "y": {1, 2, 3}}) },
	}
	for name, fn := range cases {
		t.Run(name, func(t *testing.T) {
			defer func() {
				r := recover()
				s, _ := r.(string)
				if !strings.HasPrefix(s, "engine: ") {
					t.Errorf("panic %v, want an engine: message", r)
				}
			}()
			fn()
		})
	}
}

// Values far larger in a later chunk than in the first one overflow the
// provisional prescaling; Refit must notice and redo the factorization
// with the global range.
func TestRefitLateHugeValue(t *testing.T) {
	n := 3 * chunkRows
	x := make([]float64, n)
	y := make([]float64, n)
	for i := range x {
		x[i] = float64(i % 97)
		y[i] = 1 + 0.5*x[i] + math.Sin(float64(i))
	}
	x[n-1] = 1e200
	f := fitXY(t, x, y)
	if !f.finite() {
		t.Fatalf("non-finite fit: %+v", f.Coef)
	}
	inf := Diagnose(f)
	if h := inf.Rows[n-1].Leverage; math.Abs(h-1) > 1e-9 {
		t.Errorf("leverage of the huge row = %v, want 1", h)
	}
	sh := 0.0
	for _, o := range inf.Rows {
		sh += o.Leverage
	}
	if math.Abs(sh-2) > 1e-9 {
		t.Errorf("Σh = %v, want 2", sh)
	}
}
