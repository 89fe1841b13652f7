package daemon

import (
	"errors"
	"fmt"
	"slices"
	"strconv"
	"strings"

	"plumb/engine"
	"plumb/store"
	"plumb/watcher"
	"plumb/watcher/decode"
)

// cell is where a quarantined cell is: the 1-based byte column where it
// starts on its line (0 when unknown), the column's name and its 1-based
// field in the header (0 when the header lacks it).
type cell struct {
	col   int
	name  string
	field int
}

// row sets q's column, column name and field to c's.
func (c cell) row(q store.QuarantineRow) store.QuarantineRow {
	q.Column, q.ColumnName, q.Field = c.col, c.name, c.field
	return q
}

// cellError quarantines rec for a fault in column name's cell, placed as
// the decoder places its own (decode.RowError): file:line:column, the
// column's name and its position in the header, then the cause. It
// returns where the cell is and the reason.
func (m *watchedModel) cellError(b watcher.Batch, rec decode.Record, name, cause string) (cell, string) {
	k := slices.Index(b.Header, name)
	if k < 0 {
		return cell{name: name}, fmt.Sprintf("%s:%d: column %q: %s", b.Path, rec.Line, name, cause)
	}
	at := cell{name: name, field: k + 1}
	line, col := cellStart(rec.Raw, rec.Line, m.cfg.Dialect().Delimiter, k)
	if col == 0 {
		return at, fmt.Sprintf("%s:%d: column %q (field %d): %s", b.Path, line, name, k+1, cause)
	}
	at.col = col
	return at, fmt.Sprintf("%s:%d:%d: column %q (field %d): %s", b.Path, line, col, name, k+1, cause)
}

// designError is cellError for a value the design cannot take (log of a
// value <= 0, a power that overflows): the column is the term's first
// factor's, or the one of its log factor.
func (m *watchedModel) designError(b watcher.Batch, rec decode.Record, err error) (cell, string) {
	var de *engine.DataError
	if !errors.As(err, &de) {
		return cell{}, fmt.Sprintf("%s:%d: %v", b.Path, rec.Line, err)
	}
	col := de.Column
	for _, t := range m.spec.Terms {
		if t.Text != de.Column || len(t.Factors) == 0 {
			continue
		}
		col = t.Factors[0].Column
		for _, f := range t.Factors {
			if f.Log && errors.Is(de.Err, engine.ErrLogDomain) {
				col = f.Column
				break
			}
		}
	}
	cause := strings.TrimPrefix(de.Err.Error(), "engine: ")
	if j := slices.Index(m.cols, col); j >= 0 && 1+j < len(rec.Values) {
		// The value read, so that the cell can be found and checked.
		cause += ": " + strconv.Quote(strconv.FormatFloat(rec.Values[1+j], 'g', -1, 64))
	}
	return m.cellError(b, rec, col, cause)
}

// cellStart finds where field k (0-based) of the record raw, which starts
// on line, begins: its line and 1-based byte column (0 if the record has
// no field k).
func cellStart(raw string, line int, delim byte, k int) (int, int) {
	if k == 0 {
		return line, 1
	}
	field, inQuote, lineStart := 0, false, 0
	for i := 0; i < len(raw); i++ {
		switch c := raw[i]; {
		case c == '"':
			inQuote = !inQuote
		case c == '\n':
			line++
			lineStart = i + 1
		case c == delim && !inQuote:
			field++
			if field == k {
				return line, i + 1 - lineStart + 1
			}
		}
	}
	return line, 0
}
