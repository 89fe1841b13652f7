// Package decode reads CSV files incrementally and fast, turning each data
// row into a [Record] of float64 values (and optional text cells) with its
// file:line provenance, or into a positioned [RowError] saying why the row
// was refused.
//
// # Format
//
// The input is RFC 4180 CSV with a header row: fields separated by a
// delimiter byte, optionally enclosed in double quotes; inside quotes the
// delimiter and line breaks are data and a doubled quote stands for one
// quote. Records end with "\r\n" or "\n" (both may be mixed); the last
// record may lack a terminator. A UTF-8 byte-order mark at the start of
// the file is skipped. The [Dialect] chooses the delimiter, a comment
// prefix (whole lines starting with it are skipped) and the decimal comma.
// Blank lines are skipped. Skipped lines still count in line numbers, so
// Record.Line is always the line an editor shows.
//
// Number cells hold plain decimal numbers: an optional sign, digits with
// an optional decimal separator, and an optional exponent ("-1.5e-3",
// "+2", ".5"), with spaces or tabs around them ignored. Hex, digit
// separators and words are refused (ErrNotNumber); NaN and Inf spellings
// and values beyond float64's range ("1e999") are refused (ErrNonFinite);
// an empty cell is ErrEmptyField. Values are correctly rounded, exactly as
// strconv.ParseFloat would give them.
//
// # Use
//
//	dec := decode.NewDecoder("in/run7.csv", decode.Dialect{Delimiter: ';', DecimalComma: true})
//	if err := dec.Select([]string{"emf_mv", "temp_c"}, []string{"sample"}); err != nil { ... }
//	n, err := dec.Feed(buf, atEOF, func(r decode.Record) error {
//		if r.Err != nil {
//			log.Print(r.Err) // in/run7.csv:212:14: column "emf_mv" (field 3): not a number: "12..4"
//			return nil
//		}
//		use(r.Line, r.Values, r.Text)
//		return nil
//	})
//	buf = buf[n:] // keep the unconsumed tail; append more bytes; Feed again
//
// Feed never needs a record twice: it returns how many bytes it consumed
// and the caller passes the remainder again with more data appended. A
// partial last line stays unconsumed until its newline arrives or the
// caller says atEOF. Feeding the same bytes split at any points gives the
// same records as one Feed of all of them.
//
// To resume a file mid-way, call SetHeader with the stored header and
// SetOffset with the stored offset and line, then Feed from that offset.
//
// # Errors
//
// Bad rows are emitted, never dropped: Record.Err is a *RowError with
// File, Line, Column (1-based byte column in that line), Field (1-based
// field number) and Name (the column's header name), wrapping one of
// ErrFieldCount, ErrNotNumber, ErrNonFinite, ErrEmptyField, ErrBareQuote,
// ErrQuote, ErrLineTooLong or ErrBinary. When a row has several problems
// the first in this order is reported: too long, binary, quoting, field
// count, then the leftmost bad number cell.
//
// Errors that stop the file come back from Feed or Select: a bad header
// (ErrHeader), a selected column the header lacks or holds twice
// (*ColumnError with ErrUnknownColumn or ErrDuplicateColumn, listing the
// header's names), an unusable dialect (ErrDialect).
//
// A record longer than MaxRecordBytes (default 1 MiB) is refused with
// ErrLineTooLong and skipped, up to the first newline past the limit,
// without buffering it: memory stays bounded by the limit whatever the
// input.
package decode
