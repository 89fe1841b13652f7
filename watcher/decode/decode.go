package decode

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"math/bits"
	"strings"
	"unicode/utf8"
	"unsafe"
)

// DefaultMaxRecordBytes is the default limit on one record's length.
const DefaultMaxRecordBytes = 1 << 20

// rawErrorLimit bounds Raw for a record rejected as too long.
const rawErrorLimit = 1024

// Dialect describes one family of CSV files.
type Dialect struct {
	// Delimiter separates fields; 0 means ','. It must not be '"', '\r',
	// '\n' or a byte >= 0x80.
	Delimiter byte
	// Comment, when not empty, is a prefix marking whole lines to skip
	// (they still count in line numbers). Only lines that start a record
	// are checked; a comment prefix inside a quoted field is data.
	Comment string
	// DecimalComma makes ',' the decimal separator in number columns
	// ("3,14" is 3.14). A '.' in a number is then refused, so "1.234" is
	// never silently read as 1.234 when it may mean 1234. The delimiter
	// must not be ',' (';' or '\t' usually).
	DecimalComma bool
	// Missing lists the cell texts that stand for a missing value (a
	// site's "NA", "-999", or "" for an empty cell). A selected number
	// cell whose text, spaces around it ignored, is one of them is not
	// parsed: the record gets Missing instead of an error (its value is
	// NaN). Cells of columns not selected are never looked at. A token
	// must not hold the delimiter, a quote or a line break.
	Missing []string
}

// Validate reports whether the dialect is usable; the error wraps
// ErrDialect.
func (d Dialect) Validate() error {
	delim := d.delim()
	switch {
	case delim == '"' || delim == '\r' || delim == '\n' || delim >= utf8.RuneSelf:
		return fmt.Errorf("%w: delimiter %q not allowed", ErrDialect, delim)
	case d.DecimalComma && delim == ',':
		return fmt.Errorf("%w: decimal comma needs a delimiter other than ','", ErrDialect)
	case d.DecimalComma && delim == '.':
		return fmt.Errorf("%w: decimal comma with '.' as delimiter", ErrDialect)
	case strings.ContainsAny(d.Comment, "\r\n"):
		return fmt.Errorf("%w: comment prefix %q holds a line break", ErrDialect, d.Comment)
	case d.Comment != "" && d.Comment[0] == delim:
		return fmt.Errorf("%w: comment prefix %q starts with the delimiter", ErrDialect, d.Comment)
	}
	for _, m := range d.Missing {
		if strings.ContainsAny(m, "\r\n\"") || strings.IndexByte(m, delim) >= 0 {
			return fmt.Errorf("%w: missing-value token %q holds the delimiter, a quote or a line break", ErrDialect, m)
		}
		if strings.TrimSpace(m) != m {
			return fmt.Errorf("%w: missing-value token %q has spaces around it (they are ignored in cells anyway)", ErrDialect, m)
		}
	}
	return nil
}

func (d Dialect) delim() byte {
	if d.Delimiter == 0 {
		return ','
	}
	return d.Delimiter
}

// Record is one decoded record (a data row; the header is not emitted).
type Record struct {
	// Line is the 1-based line on which the record starts; EndLine is the
	// line on which it ends (later than Line only when a quoted field holds
	// line breaks).
	Line, EndLine int
	// EndOffset is the absolute byte offset just past the record's line
	// terminator (or past its last byte at the end of the file).
	EndOffset int64
	// Raw is the record's text as it stood in the file, without the line
	// terminator. For ErrLineTooLong it is only the first
	// min(MaxRecordBytes+1, 1024) bytes.
	Raw string
	// Values holds the selected number columns, in the order given to
	// Select. Nil when Err is set.
	Values []float64
	// Text holds the selected text columns (unquoted, doubled quotes
	// undone, spaces kept), in the order given to Select. Nil when Err is
	// set.
	Text []string
	// Err is why the row was refused, or nil.
	Err *RowError
	// Missing, when not nil, is the first selected number cell holding a
	// missing-value token (Dialect.Missing), positioned like an error and
	// wrapping ErrMissing; Values holds NaN for every such cell. The row
	// is not refused: a fit leaves it out and counts it as missing. Nil
	// when Err is set (a refused row is refused, whatever else it holds).
	Missing *RowError
}

// Decoder decodes one CSV file incrementally. Set MaxRecordBytes before
// the first Feed if the default is not wanted. A Decoder is not safe for
// concurrent use.
//
// Memory: Raw, Text and Values of emitted records point into blocks the
// decoder allocates (64 KiB of text, 4096 numbers at a time), never into
// the buffer passed to Feed; a record kept alive keeps its block alive.
type Decoder struct {
	// MaxRecordBytes limits one record's length (bytes before its '\n');
	// 0 means DefaultMaxRecordBytes.
	MaxRecordBytes int

	file      string
	dialect   Dialect
	delim     byte
	delimMask uint64
	comment   []byte
	class     [256]uint8
	dialErr   error

	header     []string
	headerLine int
	haveHeader bool

	missing             []string // Dialect.Missing
	numNames, textNames []string
	numIdx, textIdx     []int
	selected            bool
	resolved            bool

	off     int64 // absolute offset of the next unconsumed byte
	line    int   // lines fully consumed
	bomDone bool

	// skip state while discarding an over-long record across Feeds.
	skipping  bool
	skipQuiet bool // skipping a comment line: no record at the end
	skipRec   Record
	skipStart int64
	skipLine  int

	fields []field
	arena  []byte
	vals   []float64
	texts  []string
}

type field struct {
	start, end int  // content bounds within the record (quotes excluded)
	quoted     bool // field was quoted
	escaped    bool // content holds doubled quotes
}

// SWAR constants: a byte's high bit in m marks a byte of interest; the
// lowest marked byte is exact (borrows only run upwards).
const (
	loBits    = 0x0101010101010101
	hiBits    = 0x8080808080808080
	nlMask    = loBits * '\n'
	quoteMask = loBits * '"'
)

// zeroBytes marks the zero bytes of v (exact for the lowest one).
func zeroBytes(v uint64) uint64 { return (v - loBits) &^ v & hiBits }

const (
	clsPlain uint8 = iota
	clsDelim
	clsNL
	clsQuote
	clsNUL
	clsHigh
)

// NewDecoder returns a decoder for the named file (the name is used in
// errors only) reading from offset 0, line 0, with the header still to
// come.
func NewDecoder(file string, d Dialect) *Decoder {
	dec := &Decoder{file: file, dialect: d, delim: d.delim(), comment: []byte(d.Comment)}
	dec.missing = d.Missing
	dec.dialErr = d.Validate()
	dec.delimMask = loBits * uint64(dec.delim)
	dec.class[dec.delim] = clsDelim
	dec.class['\n'] = clsNL
	dec.class['"'] = clsQuote
	dec.class[0] = clsNUL
	for c := 0x80; c < 0x100; c++ {
		dec.class[c] = clsHigh
	}
	return dec
}

// File returns the file name given to NewDecoder.
func (d *Decoder) File() string { return d.file }

// SetOffset tells the decoder that the next Feed starts at absolute byte
// offset off, after line lines (the number of the last consumed line, 0
// at the start of the file). A UTF-8 BOM is recognised only at offset 0.
// It also ends any skipping of an over-long record.
func (d *Decoder) SetOffset(off int64, line int) {
	d.off, d.line = off, line
	d.bomDone = off > 0
	d.skipping = false
}

// Pos returns the resumable position: the offset and line just past the
// last consumed record, blank line or comment line. While an over-long
// record is being skipped it is the start of that record.
func (d *Decoder) Pos() (offset int64, line int) {
	if d.skipping {
		return d.skipStart, d.skipLine
	}
	return d.off, d.line
}

// Offset returns the absolute offset of the next byte Feed expects: Pos
// plus whatever part of an over-long record was already skipped. A caller
// reading the file sequentially reads from here.
func (d *Decoder) Offset() int64 { return d.off }

// Header returns the header names (trimmed), or nil before the header was
// read or set.
func (d *Decoder) Header() []string { return d.header }

// HeaderLine returns the line of the header row (0 if not known).
func (d *Decoder) HeaderLine() int { return d.headerLine }

// SetHeader sets the header when resuming in the middle of a file whose
// header was read before, at the given line. Names are trimmed. If columns
// were selected, they are resolved now.
func (d *Decoder) SetHeader(names []string, line int) error {
	h := make([]string, len(names))
	for i, n := range names {
		h[i] = strings.TrimSpace(n)
	}
	d.header, d.headerLine, d.haveHeader = h, line, true
	d.resolved = false
	if d.selected {
		return d.resolve()
	}
	return nil
}

// Select chooses the columns parsed as numbers (into Record.Values) and
// those kept as text (Record.Text), each in the given order. Names match
// header names exactly after trimming surrounding spaces. If the header is
// known, the names are checked now; otherwise when the header is read (and
// Feed returns the error). The error is a *ColumnError wrapping
// ErrUnknownColumn or ErrDuplicateColumn.
func (d *Decoder) Select(numeric, text []string) error {
	d.numNames = trimAll(numeric)
	d.textNames = trimAll(text)
	d.selected = true
	d.resolved = false
	if d.haveHeader {
		return d.resolve()
	}
	return nil
}

func trimAll(in []string) []string {
	out := make([]string, len(in))
	for i, s := range in {
		out[i] = strings.TrimSpace(s)
	}
	return out
}

func (d *Decoder) resolve() error {
	find := func(name string) (int, error) {
		at := -1
		for i, h := range d.header {
			if h == name {
				if at >= 0 {
					return -1, &ColumnError{File: d.file, Line: d.headerLine, Name: name, Available: d.header, Err: ErrDuplicateColumn}
				}
				at = i
			}
		}
		if at < 0 {
			return -1, &ColumnError{File: d.file, Line: d.headerLine, Name: name, Available: d.header, Err: ErrUnknownColumn}
		}
		return at, nil
	}
	numIdx := make([]int, len(d.numNames))
	for i, n := range d.numNames {
		x, err := find(n)
		if err != nil {
			return err
		}
		numIdx[i] = x
	}
	textIdx := make([]int, len(d.textNames))
	for i, n := range d.textNames {
		x, err := find(n)
		if err != nil {
			return err
		}
		textIdx[i] = x
	}
	d.numIdx, d.textIdx, d.resolved = numIdx, textIdx, true
	return nil
}

func (d *Decoder) maxRec() int {
	if d.MaxRecordBytes > 0 {
		return d.MaxRecordBytes
	}
	return DefaultMaxRecordBytes
}

// Feed decodes the complete records in buf, which must start at a record
// boundary (the offset given by SetOffset plus everything consumed so
// far), and calls emit for each data record, good or bad, in order. It
// returns how many bytes of buf it consumed; the caller passes the rest
// again, with more data appended, in the next call.
//
// A record is complete when its line terminator ("\n" or "\r\n") is in
// buf; a final record without one is consumed only when atEOF. Blank lines
// and comment lines are consumed without a record. The first record that
// is neither is the header (unless SetHeader was called); it is not
// emitted.
//
// If a record is not complete and buf holds more than MaxRecordBytes of
// it, the record is refused (ErrLineTooLong) and skipped to the first
// newline past the limit, across as many Feed calls as needed, so the
// caller's buffer need hold at most MaxRecordBytes+1 bytes plus one read.
//
// Feed returns an error only for a problem that stops the file: a bad
// header (ErrHeader), a selected column missing from the header
// (*ColumnError), an invalid dialect (ErrDialect), or an error returned by
// emit (the record passed to that emit is not consumed). Bad rows are
// emitted with Record.Err set and decoding goes on.
func (d *Decoder) Feed(buf []byte, atEOF bool, emit func(Record) error) (consumed int, err error) {
	if d.dialErr != nil {
		return 0, d.dialErr
	}
	pos := 0
	if d.skipping {
		n, done := d.skipMore(buf, atEOF)
		if !done {
			return n, nil
		}
		endOff := d.off + int64(n)
		endLine := d.line + countNL(buf[:n])
		if n == 0 || buf[n-1] != '\n' {
			endLine++ // ended by EOF: the last line has no newline
		}
		if !d.skipQuiet {
			rec := d.skipRec
			rec.EndOffset, rec.EndLine = endOff, endLine
			if err := emit(rec); err != nil {
				return 0, err
			}
		}
		d.skipping = false
		d.off, d.line = endOff, endLine
		pos = n
	}
	if !d.bomDone {
		rest := buf[pos:]
		bom := []byte{0xEF, 0xBB, 0xBF}
		if len(rest) < 3 && bytes.HasPrefix(bom, rest) && !atEOF {
			return pos, nil
		}
		if bytes.HasPrefix(rest, bom) {
			pos += 3
			d.off += 3
		} else if len(rest) < 4 && !atEOF && len(rest) > 0 && (rest[0] == 0xFF || rest[0] == 0xFE || rest[0] == 0) {
			return pos, nil // perhaps another encoding's mark: wait for 4 bytes
		} else if name := foreignBOM(rest); name != "" {
			return pos, withDetail(ErrEncoding, "%s: the file starts with its byte-order mark; save it as UTF-8", name)
		}
		d.bomDone = true
	}
	for pos < len(buf) {
		b := buf[pos:]
		// Comment line.
		if len(d.comment) > 0 {
			if len(b) < len(d.comment) && bytes.HasPrefix(d.comment, b) && !atEOF {
				return pos, nil
			}
			if bytes.HasPrefix(b, d.comment) {
				nl := bytes.IndexByte(b, '\n')
				var n int
				switch {
				case nl >= 0:
					n = nl + 1
				case atEOF:
					n = len(b)
				case len(b) > d.maxRec():
					// A huge comment must not pin the caller's buffer:
					// skip it quietly across Feeds.
					d.skipping, d.skipQuiet = true, true
					d.skipStart, d.skipLine = d.off, d.line
					d.line += countNL(b)
					d.off += int64(len(b))
					return len(buf), nil
				default:
					return pos, nil
				}
				pos += n
				d.off += int64(n)
				d.line++
				continue
			}
		}
		// Blank line.
		if b[0] == '\n' {
			pos++
			d.off++
			d.line++
			continue
		}
		if b[0] == '\r' {
			if len(b) == 1 {
				if !atEOF {
					return pos, nil
				}
				pos++
				d.off++
				d.line++
				continue
			}
			if b[1] == '\n' {
				pos += 2
				d.off += 2
				d.line++
				continue
			}
		}
		var rec Record
		n, st := d.record(&rec, b, atEOF)
		switch st {
		case stMore:
			return pos, nil
		case stSkip:
			if !d.haveHeader {
				e := *rec.Err
				e.Err = fmt.Errorf("%w: %w", ErrHeader, rec.Err.Err)
				return pos, &e
			}
			// Over-long record continues beyond buf: consume it all.
			d.skipping, d.skipQuiet = true, false
			d.skipRec = rec
			d.skipStart = d.off
			d.skipLine = d.line
			d.line += countNL(b)
			d.off += int64(len(b))
			return len(buf), nil
		}
		if !d.haveHeader {
			if rec.Err != nil {
				e := *rec.Err
				e.Err = fmt.Errorf("%w: %w", ErrHeader, rec.Err.Err)
				return pos, &e
			}
			h := make([]string, len(d.fields))
			for i, f := range d.fields {
				h[i] = strings.TrimSpace(fieldString(b, f))
			}
			d.header, d.headerLine, d.haveHeader = h, rec.Line, true
			d.resolved = false
			pos += n
			d.off = rec.EndOffset
			d.line = rec.EndLine
			if d.selected {
				if err := d.resolve(); err != nil {
					return pos, err
				}
			}
			continue
		}
		if rec.Err == nil {
			d.fill(&rec, b)
		}
		if err := emit(rec); err != nil {
			return pos, err
		}
		pos += n
		d.off = rec.EndOffset
		d.line = rec.EndLine
	}
	return pos, nil
}

type status uint8

const (
	stDone status = iota
	stMore
	stSkip
)

// record scans one record at the start of b. On stDone it returns the
// record (Line, EndLine, EndOffset, Raw and, for syntax, binary or length
// errors, Err) and its length including the terminator; d.fields holds
// the field bounds. stMore: need more bytes. stSkip: the record is too
// long and continues past b; rec holds its error.
func (d *Decoder) record(rec *Record, b []byte, atEOF bool) (n int, st status) {
	*rec = Record{}
	max := d.maxRec()
	d.fields = d.fields[:0]
	rec.Line = d.line + 1
	var (
		sawBin  bool // saw NUL or high bytes
		synErr  error
		synAt   int // offset of the syntax error
		termEnd int // end including terminator
	)
	i := 0
	class := &d.class
	for {
		if i < len(b) && b[i] == '"' {
			// Quoted field.
			j := i + 1
			esc := false
			closed := false
			for j < len(b) {
				c := b[j]
				if c == '"' {
					if j+1 < len(b) && b[j+1] == '"' {
						esc = true
						j += 2
						continue
					}
					if j+1 == len(b) && !atEOF {
						break // cannot tell "" from a closing quote yet
					}
					closed = true
					break
				}
				if c == 0 || c >= utf8.RuneSelf {
					sawBin = true
				}
				j++
			}
			if !closed {
				if !atEOF {
					if len(b) > max {
						return d.tooLong(rec, b, atEOF)
					}
					return 0, stMore
				}
				// Unterminated at EOF: the rest of the file is the record.
				synErr, synAt = ErrQuote, i
				termEnd = len(b)
				goto done
			}
			d.fields = append(d.fields, field{start: i + 1, end: j, quoted: true, escaped: esc})
			j++ // past closing quote
			if j == len(b) {
				// atEOF here (else we broke out above)
				termEnd = j
				goto done
			}
			switch c := b[j]; {
			case c == d.delim:
				i = j + 1
				continue
			case c == '\n':
				termEnd = j + 1
				goto done
			case c == '\r' && j+1 < len(b) && b[j+1] == '\n':
				termEnd = j + 2
				goto done
			case c == '\r' && j+1 == len(b):
				if !atEOF {
					if len(b) > max {
						return d.tooLong(rec, b, atEOF)
					}
					return 0, stMore
				}
				termEnd = j + 1
				goto done
			default:
				synErr, synAt = ErrBareQuote, j
				goto resync
			}
		}
		// Unquoted field: skip plain bytes eight at a time, then look at
		// the first byte that may be special one by one.
		j := i
		for j+8 <= len(b) {
			v := binary.LittleEndian.Uint64(b[j:])
			m := zeroBytes(v) | zeroBytes(v^d.delimMask) | zeroBytes(v^nlMask) | zeroBytes(v^quoteMask) | v&hiBits
			if m == 0 {
				j += 8
				continue
			}
			j += bits.TrailingZeros64(m) >> 3
			break
		}
		for j < len(b) {
			c := class[b[j]]
			if c == clsPlain {
				j++
				continue
			}
			if c >= clsNUL {
				sawBin = true
				j++
				continue
			}
			break
		}
		if j == len(b) {
			if !atEOF {
				if len(b) > max {
					return d.tooLong(rec, b, atEOF)
				}
				return 0, stMore
			}
			e := j
			if e > i && b[e-1] == '\r' {
				e--
			}
			d.fields = append(d.fields, field{start: i, end: e})
			termEnd = j
			goto done
		}
		switch class[b[j]] {
		case clsDelim:
			d.fields = append(d.fields, field{start: i, end: j})
			i = j + 1
			continue
		case clsNL:
			e := j
			if e > i && b[e-1] == '\r' {
				e--
			}
			d.fields = append(d.fields, field{start: i, end: e})
			termEnd = j + 1
			goto done
		default: // quote inside an unquoted field
			synErr, synAt = ErrBareQuote, j
			goto resync
		}
	}
resync:
	if k := bytes.IndexByte(b[synAt:], '\n'); k >= 0 {
		termEnd = synAt + k + 1
	} else {
		if !atEOF {
			if len(b) > max {
				return d.tooLong(rec, b, atEOF)
			}
			return 0, stMore
		}
		termEnd = len(b)
	}
done:
	// The record's length is the bytes before its '\n' (all, at EOF).
	lineLen := termEnd
	if termEnd > 0 && b[termEnd-1] == '\n' {
		lineLen = termEnd - 1
	}
	if lineLen > max {
		return d.tooLong(rec, b, atEOF)
	}
	end := lineLen
	if end > 0 && b[end-1] == '\r' {
		end--
	}
	raw := b[:end]
	rec.EndLine = rec.Line + countNL(raw)
	rec.EndOffset = d.off + int64(termEnd)
	rec.Raw = d.intern(raw)
	switch {
	case sawBin || synErr != nil:
		if at := binaryAt(raw); at >= 0 {
			rec.Err = d.posErr(raw, rec.Line, at, 0, "", ErrBinary)
			break
		}
		if synErr != nil {
			rec.Err = d.posErr(raw, rec.Line, synAt, 0, "", synErr)
		}
	}
	return termEnd, stDone
}

// tooLong handles a record longer than the limit: it is refused and
// skipped to the first '\n' at index > max (raw, quotes ignored), which
// makes the cut independent of how the input was split into Feeds.
func (d *Decoder) tooLong(rec *Record, b []byte, atEOF bool) (int, status) {
	max := d.maxRec()
	// Raw: the record's first bytes, never past the limit (so the same
	// whatever the chunking).
	rec.Raw = d.intern(b[:min(max+1, rawErrorLimit)])
	// Position of the limit: the byte at index max.
	rec.Err = d.posErr(b[:max+1], rec.Line, max, 0, "",
		withDetail(ErrLineTooLong, "longer than %d bytes", max))
	k := bytes.IndexByte(b[max+1:], '\n')
	switch {
	case k >= 0:
		n := max + 1 + k + 1
		rec.EndLine = d.line + countNL(b[:n])
		rec.EndOffset = d.off + int64(n)
		return n, stDone
	case atEOF:
		rec.EndLine = d.line + countNL(b)
		if b[len(b)-1] != '\n' {
			rec.EndLine++
		}
		rec.EndOffset = d.off + int64(len(b))
		return len(b), stDone
	}
	return len(b), stSkip
}

// skipMore continues skipping an over-long record: it returns the bytes
// consumed and whether the record ended.
func (d *Decoder) skipMore(buf []byte, atEOF bool) (int, bool) {
	k := bytes.IndexByte(buf, '\n')
	switch {
	case k >= 0:
		return k + 1, true
	case atEOF:
		return len(buf), true
	}
	d.line += countNL(buf)
	d.off += int64(len(buf))
	return len(buf), false
}

// fill parses the selected columns of a syntactically good record.
func (d *Decoder) fill(rec *Record, b []byte) {
	nf := len(d.fields)
	if want := len(d.header); nf != want {
		raw := b[:len(rec.Raw)]
		var at, fno int
		if nf > want {
			at, fno = d.fields[want].start, want+1
			if d.fields[want].quoted {
				at--
			}
		} else {
			at, fno = len(raw), nf+1
		}
		rec.Err = d.posErr(raw, rec.Line, at, fno, "",
			withDetail(ErrFieldCount, "got %d, want %d", nf, want))
		return
	}
	if !d.resolved {
		return
	}
	var vals []float64
	if len(d.numIdx) > 0 {
		vals = d.takeVals(len(d.numIdx))
		bad, miss := -1, -1
		var badKind numKind
		for k, x := range d.numIdx {
			f := d.fields[x]
			if len(d.missing) > 0 && d.isMissing(b[f.start:f.end]) {
				vals[k] = math.NaN()
				if miss < 0 || x < d.numIdx[miss] {
					miss = k
				}
				continue
			}
			v, kind := parseNumber(b[f.start:f.end], d.dialect.DecimalComma)
			if kind != numOK {
				if bad < 0 || x < d.numIdx[bad] {
					bad, badKind = k, kind
				}
				continue
			}
			vals[k] = v
		}
		if bad >= 0 {
			x := d.numIdx[bad]
			f := d.fields[x]
			text := b[f.start:f.end]
			var err error
			switch badKind {
			case numEmpty:
				err = ErrEmptyField
			case numNonFinite:
				err = withDetail(ErrNonFinite, "%s", quoteText(text))
			default:
				err = withDetail(ErrNotNumber, "%s", quoteText(text))
			}
			at := f.start
			if f.quoted {
				at--
			}
			rec.Err = d.posErr(b[:len(rec.Raw)], rec.Line, at, x+1, d.header[x], err)
			return
		}
		if miss >= 0 {
			x := d.numIdx[miss]
			f := d.fields[x]
			at := f.start
			if f.quoted {
				at--
			}
			rec.Missing = d.posErr(b[:len(rec.Raw)], rec.Line, at, x+1, d.header[x],
				withDetail(ErrMissing, "%s", quoteText(b[f.start:f.end])))
		}
	}
	if len(d.textIdx) > 0 {
		txt := d.takeTexts(len(d.textIdx))
		for k, x := range d.textIdx {
			f := d.fields[x]
			if f.escaped {
				txt[k] = strings.ReplaceAll(string(b[f.start:f.end]), `""`, `"`)
			} else {
				// Raw is interned from b at offset 0: slice it.
				txt[k] = rec.Raw[f.start:f.end]
			}
		}
		rec.Text = txt
	}
	rec.Values = vals
}

// posErr builds a RowError for byte index at within the record raw whose
// first line is line.
func (d *Decoder) posErr(raw []byte, line, at, fieldNo int, name string, err error) *RowError {
	if at > len(raw) {
		at = len(raw)
	}
	before := raw[:at]
	l := line + countNL(before)
	col := at + 1
	if k := bytes.LastIndexByte(before, '\n'); k >= 0 {
		col = at - k
	}
	return &RowError{File: d.file, Line: l, Column: col, Field: fieldNo, Name: name, Err: err}
}

// binaryAt returns the index of the first NUL or invalid UTF-8 byte, or -1.
func binaryAt(b []byte) int {
	for i := 0; i < len(b); {
		c := b[i]
		if c == 0 {
			return i
		}
		if c < utf8.RuneSelf {
			i++
			continue
		}
		r, size := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && size == 1 {
			return i
		}
		i += size
	}
	return -1
}

func countNL(b []byte) int { return bytes.Count(b, []byte{'\n'}) }

func fieldString(b []byte, f field) string {
	s := string(b[f.start:f.end])
	if f.escaped {
		s = strings.ReplaceAll(s, `""`, `"`)
	}
	return s
}

const arenaSize = 64 << 10

// intern copies b into the text arena and returns it as a string.
func (d *Decoder) intern(b []byte) string {
	if len(b) == 0 {
		return ""
	}
	if len(b) > arenaSize/8 {
		return string(b)
	}
	if len(b) > cap(d.arena)-len(d.arena) {
		d.arena = make([]byte, 0, arenaSize)
	}
	s := len(d.arena)
	d.arena = append(d.arena, b...)
	// The bytes at d.arena[s:s+len(b)] are never written again.
	return unsafe.String(&d.arena[s], len(b))
}

func (d *Decoder) takeVals(k int) []float64 {
	if len(d.vals) < k {
		d.vals = make([]float64, max(4096, k))
	}
	v := d.vals[:k:k]
	d.vals = d.vals[k:]
	return v
}

func (d *Decoder) takeTexts(k int) []string {
	if len(d.texts) < k {
		d.texts = make([]string, max(1024, k))
	}
	v := d.texts[:k:k]
	d.texts = d.texts[k:]
	return v
}

// foreignBOM names the encoding whose byte-order mark b starts with, for
// the encodings a CSV file is saved in besides UTF-8 ("" if none).
func foreignBOM(b []byte) string {
	switch {
	case bytes.HasPrefix(b, []byte{0xFF, 0xFE, 0, 0}):
		return "UTF-32 little-endian (FF FE 00 00)"
	case bytes.HasPrefix(b, []byte{0, 0, 0xFE, 0xFF}):
		return "UTF-32 big-endian (00 00 FE FF)"
	case bytes.HasPrefix(b, []byte{0xFF, 0xFE}):
		return "UTF-16 little-endian (FF FE)"
	case bytes.HasPrefix(b, []byte{0xFE, 0xFF}):
		return "UTF-16 big-endian (FE FF)"
	}
	return ""
}

// isMissing reports whether a cell's text, spaces and tabs around it
// ignored, is one of the dialect's missing-value tokens.
func (d *Decoder) isMissing(cell []byte) bool {
	i, j := 0, len(cell)
	for i < j && (cell[i] == ' ' || cell[i] == '\t') {
		i++
	}
	for j > i && (cell[j-1] == ' ' || cell[j-1] == '\t') {
		j--
	}
	for _, m := range d.missing {
		if len(m) == j-i && string(cell[i:j]) == m {
			return true
		}
	}
	return false
}
