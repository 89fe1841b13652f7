package engine

import (
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
)

func TestParseTerm(t *testing.T) {
	tests := []struct {
		name string
		in   string
		want Term
	}{
		{"column", "x", Term{"x", []Factor{{"x", 1, false}}}},
		{"trimmed", "  x\t", Term{"x", []Factor{{"x", 1, false}}}},
		{"power", "x^2", Term{"x^2", []Factor{{"x", 2, false}}}},
		{"spaced power", "x ^ 3", Term{"x ^ 3", []Factor{{"x", 3, false}}}},
		{"product", "x*z", Term{"x*z", []Factor{{"x", 1, false}, {"z", 1, false}}}},
		{"log", "log(x)", Term{"log(x)", []Factor{{"x", 1, true}}}},
		{"log power", "log( x )^2", Term{"log( x )^2", []Factor{{"x", 2, true}}}},
		{"column named log", "log", Term{"log", []Factor{{"log", 1, false}}}},
		{"log column power", "log^2", Term{"log^2", []Factor{{"log", 2, false}}}},
		{"dots and digits", "a.b_2", Term{"a.b_2", []Factor{{"a.b_2", 1, false}}}},
		{"leading dot", ".x", Term{".x", []Factor{{".x", 1, false}}}},
		{"unicode letters", "température", Term{"température", []Factor{{"température", 1, false}}}},
		{"quoted", `"flow rate (l/min)"`, Term{`"flow rate (l/min)"`, []Factor{{"flow rate (l/min)", 1, false}}}},
		{"quoted quote", `"a""b"^2`, Term{`"a""b"^2`, []Factor{{`a"b`, 2, false}}}},
		{"quoted log", `log("c 1")*x^9`, Term{`log("c 1")*x^9`, []Factor{{"c 1", 1, true}, {"x", 9, false}}}},
		{"quoted digit start", `"2x"`, Term{`"2x"`, []Factor{{"2x", 1, false}}}},
		{"repeated factor", "x*x", Term{"x*x", []Factor{{"x", 1, false}, {"x", 1, false}}}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := ParseTerm(tt.in)
			if err != nil {
				t.Fatalf("ParseTerm(%q): %v", tt.in, err)
			}
			if !reflect.DeepEqual(got, tt.want) {
				t.Errorf("ParseTerm(%q) = %+v, want %+v", tt.in, got, tt.want)
			}
		})
	}
}

func TestParseTermErrors(t *testing.T) {
	tests := []struct {
		in  string
		pos int
		msg string
	}{
		{"", 0, "empty term"},
		{"   ", 3, "empty term"},
		{"2x", 0, "cannot start with a digit"},
		{"x^", 2, "expected a power"},
		{"x^0", 2, "single digit 1-9"},
		{"x^10", 3, "x^9*x"},
		{"x^a", 2, "single digit 1-9"},
		{"x*", 2, "expected a column name"},
		{"x**z", 2, "expected a column name"},
		{"x z", 2, `expected "*"`},
		{"x+z", 1, `expected "*"`},
		{"(x)", 0, "expected a column name"},
		{"log(x", 5, `expected ")"`},
		{"log()", 4, "expected a column name"},
		{"log(x^2)", 5, `expected ")"`},
		{`"abc`, 0, "unterminated"},
		{`x*"`, 2, "unterminated"},
		{`""`, 0, "empty quoted name"},
		{"x\xff", 1, "invalid UTF-8"},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			_, err := ParseTerm(tt.in)
			var te *TermError
			if !errors.As(err, &te) {
				t.Fatalf("ParseTerm(%q) error %v, want *TermError", tt.in, err)
			}
			if te.Pos != tt.pos || te.Term != tt.in || !strings.Contains(te.Msg, tt.msg) {
				t.Errorf("ParseTerm(%q) = %+v, want Pos %d, Msg containing %q", tt.in, te, tt.pos, tt.msg)
			}
		})
	}
}

func TestTermErrorCaret(t *testing.T) {
	_, err := ParseTerm("é*x^a")
	want := "engine: term \"é*x^a\": power must be a single digit 1-9 (at byte 5)\n  é*x^a\n      ^"
	if err == nil || err.Error() != want {
		t.Errorf("error\n%v\nwant\n%s", err, want)
	}
}

func TestNewModel(t *testing.T) {
	m, err := NewModel("y", []string{"x", "log(z)", "x*z", "x^2"}, true)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := m.Names(), []string{"intercept", "x", "log(z)", "x*z", "x^2"}; !reflect.DeepEqual(got, want) {
		t.Errorf("Names() = %v, want %v", got, want)
	}
	if got, want := m.Columns(), []string{"x", "z"}; !reflect.DeepEqual(got, want) {
		t.Errorf("Columns() = %v, want %v", got, want)
	}
	if m.P() != 5 {
		t.Errorf("P() = %d, want 5", m.P())
	}
	bad := []struct {
		name      string
		terms     []string
		intercept bool
		pos       int
		msg       string
	}{
		{"duplicate", []string{"x", " x"}, true, 1, `same as term "x"`},
		{"commuted product", []string{"x*z", "z*x"}, true, 0, `same as term "x*z"`},
		{"power as product", []string{"x^2", "x*x"}, true, 0, `same as term "x^2"`},
		{"response", []string{"x", "log(y)"}, true, 0, "response"},
		{"intercept name", []string{"intercept"}, true, 0, "reserved"},
		{"nothing", nil, false, 0, "at least one term"},
		{"bad term", []string{"x", "x^"}, true, 2, "power"},
	}
	for _, b := range bad {
		t.Run(b.name, func(t *testing.T) {
			_, err := NewModel("y", b.terms, b.intercept)
			var te *TermError
			if !errors.As(err, &te) || te.Pos != b.pos || !strings.Contains(te.Msg, b.msg) {
				t.Errorf("NewModel(%q) error %v, want *TermError at %d containing %q", b.terms, err, b.pos, b.msg)
			}
		})
	}
	// A column called intercept is fine without an intercept.
	if _, err := NewModel("y", []string{"intercept"}, false); err != nil {
		t.Error(err)
	}
}

func TestDesign(t *testing.T) {
	m, err := NewModel("y", []string{"x", "x^3", "log(z)", "x*z", `"a b"^2`}, true)
	if err != nil {
		t.Fatal(err)
	}
	cols := map[string][]float64{
		"x": {1, 2, -3}, "z": {1, math.E, 10}, "a b": {0.5, 1, 2}, "y": {1, 2, 3}, "unused": {0, 0, 0},
	}
	X, y, err := m.Design(cols)
	if err != nil {
		t.Fatal(err)
	}
	want := [][]float64{
		{1, 1, 1, 0, 1, 0.25},
		{1, 2, 8, 1, 2 * math.E, 1},
		{1, -3, -27, math.Log(10), -30, 4},
	}
	for i, w := range want {
		if got := X.RawRowView(i); !reflect.DeepEqual(got, w) {
			t.Errorf("row %d = %v, want %v", i, got, w)
		}
	}
	if !reflect.DeepEqual(y, []float64{1, 2, 3}) {
		t.Errorf("y = %v", y)
	}
	row := make([]float64, m.P())
	vals := map[string]float64{"x": 2, "z": math.E, "a b": 1}
	if err := m.DesignRow(row, func(c string) float64 { return vals[c] }); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(row, want[1]) {
		t.Errorf("DesignRow = %v, want %v", row, want[1])
	}
	// Powers are rounded once: x^9 of 1.1 equals the correctly rounded value.
	if got, want := ipow(1.1, 9), 2.357947691000002; got != want {
		t.Errorf("ipow(1.1, 9) = %.17g, want %.17g", got, want)
	}
}
