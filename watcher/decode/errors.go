package decode

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
)

// Sentinel causes of a bad row. A [RowError] wraps exactly one of them;
// test with errors.Is.
var (
	// ErrFieldCount: the row has a different number of fields than the header.
	ErrFieldCount = errors.New("wrong number of fields")
	// ErrNotNumber: a number column holds text that is not a decimal number.
	ErrNotNumber = errors.New("not a number")
	// ErrNonFinite: a number column holds NaN or Inf text, or a number too
	// large for float64 (1e999). Such values are refused, never stored.
	ErrNonFinite = errors.New("not a finite number")
	// ErrEmptyField: a number column is empty (or only spaces).
	ErrEmptyField = errors.New("empty number field")
	// ErrBareQuote: a '"' appears inside an unquoted field, or a closing
	// quote is followed by something other than a delimiter or line end.
	ErrBareQuote = errors.New(`bare " in field`)
	// ErrQuote: a quoted field is still open at the end of the file.
	ErrQuote = errors.New(`unterminated quoted field`)
	// ErrLineTooLong: the record is longer than MaxRecordBytes. The decoder
	// skips to the first newline past the limit and goes on.
	ErrLineTooLong = errors.New("record too long")
	// ErrMissing: a number cell holds a missing-value token
	// (Dialect.Missing). Only Record.Missing wraps it: such a row is not
	// refused.
	ErrMissing = errors.New("missing value")
	// ErrBinary: the record holds a NUL byte or is not valid UTF-8.
	ErrBinary = errors.New("binary data (NUL byte or invalid UTF-8)")
)

// Errors returned by Feed or Select that stop the file (not one row).
var (
	// ErrHeader: the header row cannot be read (wrapped together with the
	// row-level cause, e.g. ErrBareQuote).
	ErrHeader = errors.New("bad header row")
	// ErrUnknownColumn: a selected column is not in the header.
	ErrUnknownColumn = errors.New("column not in header")
	// ErrDuplicateColumn: a selected column name occurs more than once in
	// the header, so it is ambiguous.
	ErrDuplicateColumn = errors.New("column name occurs more than once in header")
	// ErrEncoding: the file starts with the byte-order mark of an encoding
	// other than UTF-8 (UTF-16 or UTF-32); the detail names it.
	ErrEncoding = errors.New("unreadable text encoding")
	// ErrDialect: the dialect is unusable (see Dialect.Validate).
	ErrDialect = errors.New("invalid CSV dialect")
)

// RowError is the reason one record could not be read. It records where
// the problem is: File, Line (1-based, the physical line of the offending
// byte, which is later than Record.Line inside a multi-line quoted field),
// Column (1-based byte column within that line), Field (1-based field
// number, 0 when the problem is not one field's) and Name (the header name
// of that field, "" if unknown).
//
// Its Error reads
//
//	feed.csv:212:14: column "emf_mv" (field 3): not a number: "12..4"
//
// (file:line:byte column, then the column's header name and its 1-based
// position among the fields).
type RowError struct {
	File   string
	Line   int
	Column int
	Field  int
	Name   string
	// Err wraps one of the sentinels (ErrNotNumber, ...), possibly with
	// detail such as the offending text.
	Err error
}

func (e *RowError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	b.WriteByte(':')
	b.WriteString(strconv.Itoa(e.Line))
	if e.Column > 0 {
		b.WriteByte(':')
		b.WriteString(strconv.Itoa(e.Column))
	}
	b.WriteString(": ")
	switch {
	case e.Name != "" && e.Field > 0:
		b.WriteString("column ")
		b.WriteString(strconv.Quote(e.Name))
		b.WriteString(" (field ")
		b.WriteString(strconv.Itoa(e.Field))
		b.WriteString("): ")
	case e.Name != "":
		b.WriteString("column ")
		b.WriteString(strconv.Quote(e.Name))
		b.WriteString(": ")
	case e.Field > 0:
		b.WriteString("field ")
		b.WriteString(strconv.Itoa(e.Field))
		b.WriteString(": ")
	}
	b.WriteString(e.Err.Error())
	return b.String()
}

func (e *RowError) Unwrap() error { return e.Err }

// detailError is a sentinel with detail text; it unwraps to the sentinel.
type detailError struct {
	sentinel error
	detail   string
}

func (e *detailError) Error() string { return e.sentinel.Error() + ": " + e.detail }
func (e *detailError) Unwrap() error { return e.sentinel }

func withDetail(sentinel error, format string, args ...any) error {
	return &detailError{sentinel: sentinel, detail: fmt.Sprintf(format, args...)}
}

// quoteText quotes cell text for a message, shortened to 64 bytes.
func quoteText(b []byte) string {
	const max = 64
	if len(b) > max {
		return strconv.Quote(string(b[:max])) + "..."
	}
	return strconv.Quote(string(b))
}

// ColumnError reports that a selected column cannot be used: it is not in
// the header (ErrUnknownColumn) or occurs there more than once
// (ErrDuplicateColumn). Available lists the header's names.
type ColumnError struct {
	File      string
	Line      int // header line, 0 if unknown
	Name      string
	Available []string
	Err       error
}

func (e *ColumnError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		b.WriteByte(':')
		b.WriteString(strconv.Itoa(e.Line))
	}
	b.WriteString(": column ")
	b.WriteString(strconv.Quote(e.Name))
	b.WriteString(": ")
	b.WriteString(e.Err.Error())
	b.WriteString(" (header has: ")
	for i, n := range e.Available {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.Quote(n))
	}
	b.WriteString(")")
	return b.String()
}

func (e *ColumnError) Unwrap() error { return e.Err }
