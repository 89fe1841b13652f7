package engine

import (
	"errors"
	"fmt"
	"strings"
	"unicode/utf8"
)

// Sentinel causes. Errors returned by this package wrap one of these; test
// for them with errors.Is.
var (
	// ErrTooFewRows: the fit needs more rows than coefficients (n > p).
	ErrTooFewRows = errors.New("engine: too few rows (need more rows than coefficients)")
	// ErrConstantColumn: a term takes the same value in every row (with an
	// intercept), or is zero in every row (without one).
	ErrConstantColumn = errors.New("engine: constant column")
	// ErrCollinear: some terms are (numerically) linear combinations of
	// others; the error is a *CollinearError naming them.
	ErrCollinear = errors.New("engine: collinear terms")
	// ErrNonFinite: a value is NaN or infinite.
	ErrNonFinite = errors.New("engine: value is NaN or infinite")
	// ErrLogDomain: log() of a value that is zero or negative.
	ErrLogDomain = errors.New("engine: log of a non-positive value")
	// ErrZeroResponse: the response is zero in every row.
	ErrZeroResponse = errors.New("engine: response is zero in every row")
	// ErrIllConditioned: the scaled design is too ill-conditioned for a
	// trustworthy fit. The error also wraps the mat.Condition value.
	ErrIllConditioned = errors.New("engine: design too ill-conditioned")
	// ErrMissingColumn: a column the model uses is not in the data.
	ErrMissingColumn = errors.New("engine: column missing from the data")
)

// TermError reports a malformed model term. Pos is the 0-based byte offset
// in Term of the offending character; Pos == len(Term) means the term ended
// where more was expected.
type TermError struct {
	Term string
	Pos  int
	Msg  string
}

// Error shows the term with a caret under the offending character:
//
//	engine: term "x^a": power must be a digit 1-9
//	  x^a
//	    ^
func (e *TermError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "engine: term %q: %s (at byte %d)\n  ", e.Term, e.Msg, e.Pos)
	shown := strings.Map(func(r rune) rune {
		if r == '\t' || r == '\n' || r == '\r' {
			return ' '
		}
		return r
	}, e.Term)
	b.WriteString(shown)
	b.WriteString("\n  ")
	pos := e.Pos
	if pos > len(e.Term) {
		pos = len(e.Term)
	}
	if pos < 0 {
		pos = 0
	}
	b.WriteString(strings.Repeat(" ", utf8.RuneCountInString(e.Term[:pos])))
	b.WriteByte('^')
	return b.String()
}

// DataError reports a value that cannot enter the design: Row is the 0-based
// row (-1 when a single row is built by DesignRow, or for a missing column),
// Column the data column or term concerned, Err one of ErrNonFinite,
// ErrLogDomain or ErrMissingColumn.
type DataError struct {
	Row    int
	Column string
	Err    error
}

func (e *DataError) Error() string {
	if e.Row < 0 {
		return fmt.Sprintf("engine: column %q: %v", e.Column, e.Err)
	}
	return fmt.Sprintf("engine: row %d, column %q: %v", e.Row, e.Column, e.Err)
}

func (e *DataError) Unwrap() error { return e.Err }

// CollinearError names terms that are, to working precision, linear
// combinations of each other ("intercept" included when it takes part).
// It wraps ErrCollinear.
type CollinearError struct {
	Terms []string
}

func (e *CollinearError) Error() string {
	q := make([]string, len(e.Terms))
	for i, t := range e.Terms {
		q[i] = fmt.Sprintf("%q", t)
	}
	return "engine: collinear terms: " + strings.Join(q, ", ")
}

func (e *CollinearError) Unwrap() error { return ErrCollinear }

// ColumnError reports a term whose values make the fit impossible (for
// example a constant term). It wraps ErrConstantColumn.
type ColumnError struct {
	Term string
	Err  error
}

func (e *ColumnError) Error() string {
	return fmt.Sprintf("engine: term %q: %v", e.Term, e.Err)
}

func (e *ColumnError) Unwrap() error { return e.Err }
