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
		{"column", "x", Term{"x", []Factor{{Column: "x", Power: 1, Log: false, Text: "x"}}}},
		{"trimmed", "  x\t", Term{"x", []Factor{{Column: "x", Power: 1, Log: false, Text: "x"}}}},
		{"power", "x^2", Term{"x^2", []Factor{{Column: "x", Power: 2, Log: false, Text: "x^2"}}}},
		{"spaced power", "x ^ 3", Term{"x ^ 3", []Factor{{Column: "x", Power: 3, Log: false, Text: "x ^ 3"}}}},
		{"product", "x*z", Term{"x*z", []Factor{{Column: "x", Power: 1, Log: false, Text: "x"}, {Column: "z", Power: 1, Log: false, Text: "z"}}}},
		{"log", "log(x)", Term{"log(x)", []Factor{{Column: "x", Power: 1, Log: true, Text: "log(x)"}}}},
		{"log power", "log( x )^2", Term{"log( x )^2", []Factor{{Column: "x", Power: 2, Log: true, Text: "log( x )^2"}}}},
		{"column named log", "log", Term{"log", []Factor{{Column: "log", Power: 1, Log: false, Text: "log"}}}},
		{"log column power", "log^2", Term{"log^2", []Factor{{Column: "log", Power: 2, Log: false, Text: "log^2"}}}},
		{"dots and digits", "a.b_2", Term{"a.b_2", []Factor{{Column: "a.b_2", Power: 1, Log: false, Text: "a.b_2"}}}},
		{"leading dot", ".x", Term{".x", []Factor{{Column: ".x", Power: 1, Log: false, Text: ".x"}}}},
		{"unicode letters", "température", Term{"température", []Factor{{Column: "température", Power: 1, Log: false, Text: "température"}}}},
		{"quoted", `"flow rate (l/min)"`, Term{`"flow rate (l/min)"`, []Factor{{Column: "flow rate (l/min)", Power: 1, Log: false, Text: `"flow rate (l/min)"`}}}},
		{"quoted quote", `"a""b"^2`, Term{`"a""b"^2`, []Factor{{Column: `a"b`, Power: 2, Log: false, Text: `"a""b"^2`}}}},
		{"quoted log", `log("c 1")*x^9`, Term{`log("c 1")*x^9`, []Factor{{Column: "c 1", Power: 1, Log: true, Text: `log("c 1")`}, {Column: "x", Power: 9, Log: false, Text: "x^9"}}}},
		{"quoted digit start", `"2x"`, Term{`"2x"`, []Factor{{Column: "2x", Power: 1, Log: false, Text: `"2x"`}}}},
		{"power 10", "x^10", Term{"x^10", []Factor{{Column: "x", Power: 10, Text: "x^10"}}}},
		{"power 20", "x ^ 20", Term{"x ^ 20", []Factor{{Column: "x", Power: 20, Text: "x ^ 20"}}}},
		{"group", "group(batch)", Term{"group(batch)", []Factor{{Column: "batch", Power: 1, Group: true, Text: "group(batch)"}}}},
		{"group product", "group( b )*months", Term{"group( b )*months", []Factor{{Column: "b", Power: 1, Group: true, Text: "group( b )"}, {Column: "months", Power: 1, Text: "months"}}}},
		{"column named group", "group*x", Term{"group*x", []Factor{{Column: "group", Power: 1, Text: "group"}, {Column: "x", Power: 1, Text: "x"}}}},
		{"repeated factor", "x*x", Term{"x*x", []Factor{{Column: "x", Power: 1, Log: false, Text: "x"}, {Column: "x", Power: 1, Log: false, Text: "x"}}}},
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
		{"x^0", 2, "whole number 1-20"},
		{"x^21", 2, "whole number 1-20"},
		{"x^a", 2, "whole number 1-20"},
		{"x^02", 2, "whole number 1-20"},
		{"group(x)^2", 8, "takes no power"},
		{"group(x", 7, `expected ")"`},
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
	want := "engine: term \"é*x^a\": power must be a whole number 1-20 (at byte 5)\n  é*x^a\n      ^"
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
