package main

// plumb inspect: reading the file into columns; a row that cannot be used
// is set aside with its place and reason.

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"

	"plumb/engine"
	"plumb/watcher/decode"
)

// rejectedRow is a data row left out of the fit, with where and why.
type rejectedRow struct {
	File    string `json:"file"`
	Row     int    `json:"row"`          // 1-based data row (0 if not known)
	ID      string `json:"id,omitempty"` // the --id-column label, when known
	Line    int    `json:"line"`
	Column  int    `json:"column"`                 // 1-based byte column in Line, 0 if none
	Field   string `json:"field,omitempty"`        // header name of the field concerned
	FieldNo int    `json:"field_number,omitempty"` // its 1-based position in the header
	Reason  string `json:"reason"`

	err error // the decoder's *RowError, if it found the fault
}

// where is "file:line:column" (the column when known).
func (r rejectedRow) where() string {
	if r.Column > 0 {
		return fmt.Sprintf("%s:%d:%d", r.File, r.Line, r.Column)
	}
	return fmt.Sprintf("%s:%d", r.File, r.Line)
}

// why is the cause with the field it concerns, as the decoder's RowError
// and the daemon write it: `column "emf_mv" (field 2): not a number:
// "11.5x"`, and the row's label when known.
func (r rejectedRow) why() string {
	s := ""
	switch {
	case r.Field != "" && r.FieldNo > 0:
		s = fmt.Sprintf("column %q (field %d): ", r.Field, r.FieldNo)
	case r.Field != "":
		s = fmt.Sprintf("column %q: ", r.Field)
	case r.FieldNo > 0:
		s = fmt.Sprintf("field %d: ", r.FieldNo)
	}
	s += r.Reason
	if r.ID != "" {
		s += fmt.Sprintf(" (row %s)", strconv.Quote(r.ID))
	}
	return s
}

// rowErrorRejected is the rejected row the decoder found, row being its
// data row number.
func rowErrorRejected(e *decode.RowError, row int) rejectedRow {
	return rejectedRow{File: e.File, Row: row, Line: e.Line, Column: e.Column,
		Field: e.Name, FieldNo: e.Field, Reason: e.Err.Error(), err: e}
}

// inspectData is the usable part of the file: one slice per column the
// model reads, with each kept row's data-row number, line and raw text.
type inspectData struct {
	file     string
	header   []string
	names    []string // selected columns: response first, then predictors
	cols     map[string][]float64
	vals     [][]float64 // the same columns, in the order of names
	tnames   []string    // columns kept as text (group labels)
	text     map[string][]string
	tvals    [][]string // the same, in the order of tnames
	rowNo    []int
	line     []int
	labels   []string // --id-column text of each kept row; nil without one
	idColumn string
	buf      []byte // the whole file, to find a field of a rejected row
	starts   []int  // byte offset of each line's start, built on first use
	// reread is the regular file buf came from, and size its length:
	// once loaded, buf is let go (on 1e7 rows it is a sixth of the peak
	// memory) and read again only if a row is set aside later.
	reread   string
	size     int
	total    int // data rows in the file, good and bad
	rejected []rejectedRow
	missing  int // rows left out for a missing value in a used column
	filtered int // rows the --filter left out
	// missingCols counts the missing rows by the first column found
	// missing in them, in the order of names.
	missingCols []int
	leftOut     []leftOutRow // rows the --leave-out list names
}

// readSpec is what every part's decoder reads: the numeric columns, the
// text columns (the group columns, then the id column and the filter
// column unless already among them) and the filter.
type readSpec struct {
	file       string
	dialect    decode.Dialect
	header     []string
	headerLine int
	names      []string
	text       []string
	groups     int // text[:groups] are the group columns
	idAt       int // index of the id column in text, -1 if none
	filterAt   int // index of the filter column in text, -1 if none
	keep       map[string]bool
}

func loadInspectData(e *env, opt *inspectOptions, m engine.Model) (*inspectData, error) {
	var (
		buf []byte
		err error
	)
	name := opt.file
	if name == "-" {
		name = "stdin"
		buf, err = io.ReadAll(e.stdin)
	} else {
		buf, err = os.ReadFile(name)
	}
	if err != nil {
		return nil, fmt.Errorf("inspect: %w", err)
	}
	names, tnames := dataColumns(m)
	dialect := opt.dialect
	// The text columns: the group columns (labels for the design), then
	// the id column and the filter column when not among them.
	spec := readSpec{file: name, dialect: dialect, names: names, groups: len(tnames), idAt: -1, filterAt: -1}
	spec.text = append(spec.text, tnames...)
	textAt := func(c string) int {
		if k := slices.Index(spec.text, c); k >= 0 {
			return k
		}
		spec.text = append(spec.text, c)
		return len(spec.text) - 1
	}
	if opt.idColumn != "" {
		spec.idAt = textAt(opt.idColumn)
	}
	if opt.filter != nil {
		spec.filterAt = textAt(opt.filter.Column)
		spec.keep = map[string]bool{}
		for _, v := range opt.filter.Values {
			spec.keep[v] = true
		}
	}

	// The header first, alone, so that the rest can be cut into parts.
	hdr := decode.NewDecoder(name, dialect)
	if err := hdr.Select(names, spec.text); err != nil {
		return nil, fmt.Errorf("inspect: %w", err)
	}
	_, err = hdr.Feed(buf, true, func(decode.Record) error { return errHeaderRead })
	if err != nil && !errors.Is(err, errHeaderRead) {
		return nil, fmt.Errorf("inspect: %w", err)
	}
	header := hdr.Header()
	if header == nil {
		return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: the file is empty (no header row)", name)}
	}
	off, line := hdr.Pos()
	spec.header, spec.headerLine = header, hdr.HeaderLine()

	parts := splitRecords(buf, int(off), line, runtime.GOMAXPROCS(0))
	store := newRowStore(len(names), spec.idAt >= 0, buf, parts)
	results := make([]*inspectData, len(parts))
	if len(parts) == 1 {
		results[0], err = decodePart(&spec, buf, parts[0], store.slot(0))
	} else {
		errs := make([]error, len(parts))
		var wg sync.WaitGroup
		for k := range parts {
			wg.Add(1)
			go func() {
				defer wg.Done()
				results[k], errs[k] = decodePart(&spec, buf, parts[k], store.slot(k))
			}()
		}
		wg.Wait()
		err = errors.Join(errs...)
		if err == nil && quoteTrouble(results) {
			// A malformed quote may end a record elsewhere than quote
			// parity says: decode the file in one piece after all.
			whole := []part{{off: int(off), end: len(buf), line: line}}
			store = newRowStore(len(names), spec.idAt >= 0, buf, whole)
			results = results[:1]
			results[0], err = decodePart(&spec, buf, whole[0], store.slot(0))
		}
	}
	if err != nil {
		return nil, fmt.Errorf("inspect: %w", err)
	}
	ds := store.merge(results)
	ds.file, ds.header, ds.buf, ds.names, ds.idColumn = name, header, buf, names, opt.idColumn
	for i, n := range names {
		ds.cols[n] = ds.vals[i]
	}
	ds.vals = nil // cols is the truth from here on (drop edits it)
	ds.tnames, ds.text = tnames, map[string][]string{}
	for i, n := range tnames {
		ds.text[n] = ds.tvals[i]
	}
	ds.tvals = nil
	if ds.total == 0 {
		return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: the file has a header (line %d) but no data rows", name, hdr.HeaderLine())}
	}
	ds.rejectLogDomain(m, opt.delimiter)
	ds.rejectBadWeights(m, opt.delimiter)
	if name != "stdin" {
		if fi, err := os.Stat(name); err == nil && fi.Mode().IsRegular() && fi.Size() == int64(len(buf)) {
			ds.reread, ds.size = name, len(buf)
			ds.buf, ds.starts = nil, nil
		}
	}
	return ds, nil
}

var errHeaderRead = errors.New("header read")

// part is a run of whole records: bytes [off, end) of the file, starting
// after line lines.
type part struct {
	off, end, line int
}

// minPartBytes is the smallest part worth a goroutine of its own (a
// variable so that tests can cut small files).
var minPartBytes = 1 << 20

// splitRecords cuts buf[off:] into up to k parts at line ends that lie
// outside quoted fields. In RFC 4180 a quote inside a quoted field is
// doubled, so a line end is outside quotes exactly when the number of
// quotes before it is even.
func splitRecords(buf []byte, off, line, k int) []part {
	n := len(buf) - off
	if k > n/minPartBytes {
		k = n / minPartBytes
	}
	if k <= 1 {
		return []part{{off, len(buf), line}}
	}
	var out []part
	start, startLine := off, line
	quotes := 0 // quotes in buf[off:start]
	for i := 1; i < k; i++ {
		target := off + i*n/k
		if target <= start {
			continue
		}
		q := quotes + bytes.Count(buf[start:target], []byte{'"'})
		cut := -1
		for j := target; j < len(buf); j++ {
			switch buf[j] {
			case '"':
				q++
			case '\n':
				if q%2 == 0 {
					cut = j + 1
				}
			}
			if cut >= 0 {
				break
			}
		}
		if cut < 0 || cut >= len(buf) {
			break
		}
		out = append(out, part{start, cut, startLine})
		startLine += bytes.Count(buf[start:cut], []byte{'\n'})
		start, quotes = cut, q
	}
	return append(out, part{start, len(buf), startLine})
}

// rowStore holds the kept rows of all parts in one set of arrays: part k
// writes from base[k] on, with room for one row per line end in it (plus
// one for a last line without a newline), which no part can exceed.
type rowStore struct {
	cols   [][]float64
	rowNo  []int
	line   []int
	labels []string // nil without an id column
	base   []int
	room   []int
}

func newRowStore(ncols int, labels bool, buf []byte, parts []part) *rowStore {
	st := &rowStore{cols: make([][]float64, ncols)}
	total := 0
	for _, pt := range parts {
		n := bytes.Count(buf[pt.off:pt.end], []byte{'\n'}) + 1
		st.base = append(st.base, total)
		st.room = append(st.room, n)
		total += n
	}
	for i := range st.cols {
		st.cols[i] = make([]float64, total)
	}
	st.rowNo = make([]int, total)
	st.line = make([]int, total)
	if labels {
		st.labels = make([]string, total)
	}
	return st
}

// slot is part k's share of the arrays, as zero-length slices with the
// part's room as capacity.
func (st *rowStore) slot(k int) *inspectData {
	b, e := st.base[k], st.base[k]+st.room[k]
	ds := &inspectData{}
	ds.rowNo = st.rowNo[b:b:e]
	ds.line = st.line[b:b:e]
	if st.labels != nil {
		ds.labels = st.labels[b:b:e]
	}
	ds.cols = map[string][]float64{}
	ds.vals = make([][]float64, len(st.cols))
	for i := range st.cols {
		ds.vals[i] = st.cols[i][b:b:e]
	}
	return ds
}

// merge closes the gaps between the parts (rows they rejected or records
// spanning several lines) and renumbers the data rows in file order.
func (st *rowStore) merge(parts []*inspectData) *inspectData {
	ds := &inspectData{cols: map[string][]float64{}}
	w := 0
	for k, p := range parts {
		n := len(p.rowNo)
		if n > st.room[k] {
			panic("plumb: inspect: a part holds more rows than line ends")
		}
		base := ds.total
		for i := 0; i < n; i++ {
			st.rowNo[w+i] = p.rowNo[i] + base
		}
		copy(st.line[w:], p.line)
		if st.labels != nil {
			copy(st.labels[w:], p.labels)
		}
		for i := range st.cols {
			copy(st.cols[i][w:], p.vals[i])
		}
		if ds.tvals == nil {
			ds.tvals = make([][]string, len(p.tvals))
		}
		for i, v := range p.tvals {
			ds.tvals[i] = append(ds.tvals[i], v...)
		}
		for _, r := range p.rejected {
			r.Row += base
			ds.rejected = append(ds.rejected, r)
		}
		ds.total += p.total
		ds.missing += p.missing
		ds.filtered += p.filtered
		if p.missingCols != nil {
			if ds.missingCols == nil {
				ds.missingCols = make([]int, len(p.missingCols))
			}
			for i, c := range p.missingCols {
				ds.missingCols[i] += c
			}
		}
		w += n
	}
	ds.rowNo, ds.line = st.rowNo[:w], st.line[:w]
	if st.labels != nil {
		ds.labels = st.labels[:w]
	}
	ds.vals = make([][]float64, len(st.cols))
	for i := range st.cols {
		ds.vals[i] = st.cols[i][:w]
	}
	return ds
}

// decodePart decodes the records of one part with its own decoder into
// slot (see rowStore).
// missingText reports whether a group label is one of the dialect's
// missing-value tokens (spaces around it ignored), as the decoder judges a
// number cell: such a row is left out and counted, not given a level.
func (sp *readSpec) missingText(v string) bool {
	return len(sp.dialect.Missing) > 0 && slices.Contains(sp.dialect.Missing, strings.Trim(v, " \t"))
}

func decodePart(sp *readSpec, buf []byte, pt part, slot *inspectData) (*inspectData, error) {
	dec := decode.NewDecoder(sp.file, sp.dialect)
	if err := dec.SetHeader(sp.header, sp.headerLine); err != nil {
		return nil, err
	}
	if err := dec.Select(sp.names, sp.text); err != nil {
		return nil, err
	}
	dec.SetOffset(int64(pt.off), pt.line)
	ds := slot
	ds.tvals = make([][]string, sp.groups)
	vals := ds.vals
	_, err := dec.Feed(buf[pt.off:pt.end], true, func(r decode.Record) error {
		ds.total++
		if r.Err != nil {
			rj := rowErrorRejected(r.Err, ds.total)
			if sp.idAt >= 0 {
				// The decoder keeps no text of a refused row: find the
				// id cell in the record as written, when it is there.
				if k := slices.Index(sp.header, sp.text[sp.idAt]); k >= 0 {
					rj.ID = strings.TrimSpace(fieldText(r.Raw, sp.dialect.Delimiter, k))
				}
			}
			ds.rejected = append(ds.rejected, rj)
			return nil
		}
		if sp.keep != nil && !sp.keep[strings.TrimSpace(r.Text[sp.filterAt])] {
			ds.filtered++ // left out on purpose, whatever else it holds
			return nil
		}
		miss := -1 // index in names, then the group columns
		if r.Missing != nil {
			miss = slices.Index(sp.names, r.Missing.Name)
		} else {
			for g, v := range r.Text[:sp.groups] {
				if sp.missingText(v) {
					miss = len(sp.names) + g
					break
				}
			}
		}
		if r.Missing != nil || miss >= 0 {
			ds.missing++
			if ds.missingCols == nil {
				ds.missingCols = make([]int, len(sp.names)+sp.groups)
			}
			if miss >= 0 {
				ds.missingCols[miss]++
			}
			return nil
		}
		for i, v := range r.Values {
			vals[i] = append(vals[i], v)
		}
		for i, v := range r.Text[:sp.groups] {
			ds.tvals[i] = append(ds.tvals[i], v)
		}
		ds.rowNo = append(ds.rowNo, ds.total)
		ds.line = append(ds.line, r.Line)
		if sp.idAt >= 0 {
			ds.labels = append(ds.labels, strings.TrimSpace(r.Text[sp.idAt]))
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	ds.vals = vals
	return ds, nil
}

// quoteTrouble reports a rejected row whose cause can shift record ends.
func quoteTrouble(parts []*inspectData) bool {
	for _, p := range parts {
		for _, r := range p.rejected {
			if errors.Is(r.err, decode.ErrBareQuote) || errors.Is(r.err, decode.ErrQuote) || errors.Is(r.err, decode.ErrLineTooLong) {
				return true
			}
		}
	}
	return false
}

// rejectLogDomain sets aside, before the design is built, the rows where a
// log() factor meets a value <= 0, so that one such row does not stop the
// fit.
func (ds *inspectData) rejectLogDomain(m engine.Model, delim byte) {
	var logCols []string
	seen := map[string]bool{}
	for _, t := range m.Terms {
		for _, f := range t.Factors {
			if f.Log && !seen[f.Column] {
				seen[f.Column] = true
				logCols = append(logCols, f.Column)
			}
		}
	}
	if len(logCols) == 0 {
		return
	}
	var drop []int
	var why []string
	for i := range ds.rowNo {
		for _, c := range logCols {
			if ds.cols[c][i] <= 0 {
				drop = append(drop, i)
				why = append(why, c)
				break
			}
		}
	}
	for k, i := range drop {
		ds.reject(i, why[k], "log() of a value that is zero or negative", delim)
	}
	ds.drop(drop)
}

// reject records kept row i as rejected because of column col.
func (ds *inspectData) reject(i int, col, reason string, delim byte) {
	line, column := ds.line[i], 0
	field, fieldNo := "", 0
	for k, h := range ds.header {
		if h == col {
			line, column = fieldPosition(ds.lineText(ds.line[i]), ds.line[i], delim, k)
			field, fieldNo = col, k+1
			break
		}
	}
	ds.rejected = append(ds.rejected, rejectedRow{
		File: ds.file, Row: ds.rowNo[i], ID: ds.label(i), Line: line, Column: column, Field: field, FieldNo: fieldNo, Reason: reason,
	})
}

// drop removes the kept rows at the given ascending indices.
func (ds *inspectData) drop(idx []int) {
	if len(idx) == 0 {
		return
	}
	keep := func(i int) bool {
		k := sort.SearchInts(idx, i)
		return k == len(idx) || idx[k] != i
	}
	w := 0
	for i := range ds.rowNo {
		if !keep(i) {
			continue
		}
		ds.rowNo[w], ds.line[w] = ds.rowNo[i], ds.line[i]
		if ds.labels != nil {
			ds.labels[w] = ds.labels[i]
		}
		for _, n := range ds.names {
			ds.cols[n][w] = ds.cols[n][i]
		}
		for _, n := range ds.tnames {
			ds.text[n][w] = ds.text[n][i]
		}
		w++
	}
	ds.rowNo, ds.line = ds.rowNo[:w], ds.line[:w]
	if ds.labels != nil {
		ds.labels = ds.labels[:w]
	}
	for _, n := range ds.names {
		ds.cols[n] = ds.cols[n][:w]
	}
	for _, n := range ds.tnames {
		ds.text[n] = ds.text[n][:w]
	}
	sort.Slice(ds.rejected, func(a, b int) bool { return ds.rejected[a].Row < ds.rejected[b].Row })
}

// leftOutWords says, after a count of rows, which were left out and why:
// " (3 unreadable, 42 with a missing value, 5 left out by --filter)".
func (ds *inspectData) leftOutWords() string {
	var parts []string
	if k := len(ds.rejected); k > 0 {
		parts = append(parts, fmt.Sprintf("%d unreadable", k))
	}
	if ds.missing > 0 {
		parts = append(parts, fmt.Sprintf("%d with a missing value", ds.missing))
	}
	if ds.filtered > 0 {
		parts = append(parts, fmt.Sprintf("%d left out by --filter", ds.filtered))
	}
	if len(parts) == 0 {
		return ""
	}
	return " (" + strings.Join(parts, ", ") + ")"
}

// label is kept row i's --id-column text ("" without one).
func (ds *inspectData) label(i int) string {
	if ds.labels == nil {
		return ""
	}
	return ds.labels[i]
}

// lineText returns the file from the start of 1-based line l on, or nil
// if the file let go after loading cannot be read again as it was.
func (ds *inspectData) lineText(l int) []byte {
	if ds.buf == nil && ds.reread != "" {
		b, err := os.ReadFile(ds.reread)
		if err != nil || len(b) != ds.size {
			return nil // changed since: the row keeps its line, without a column
		}
		ds.buf = b
	}
	if ds.starts == nil {
		ds.starts = []int{0}
		for i, c := range ds.buf {
			if c == '\n' {
				ds.starts = append(ds.starts, i+1)
			}
		}
	}
	if l < 1 || l > len(ds.starts) {
		return nil
	}
	return ds.buf[ds.starts[l-1]:]
}

// fieldText returns field k (0-based) of one CSV record, unquoted ("" if
// the record has fewer fields). A delimiter of 0 means ','.
func fieldText(rec string, delim byte, k int) string {
	if delim == 0 {
		delim = ','
	}
	field, inQuote := 0, false
	var b strings.Builder
	for i := 0; i < len(rec); i++ {
		c := rec[i]
		switch {
		case c == '"' && inQuote && i+1 < len(rec) && rec[i+1] == '"':
			if field == k {
				b.WriteByte('"')
			}
			i++
		case c == '"':
			inQuote = !inQuote
		case c == delim && !inQuote:
			if field == k {
				return b.String()
			}
			field++
		default:
			if field == k {
				b.WriteByte(c)
			}
		}
	}
	if field == k {
		return b.String()
	}
	return ""
}

// fieldPosition finds where field k (0-based) of the record at the start
// of text begins; the record starts on line. It returns that field's line
// and 1-based byte column, or column 0 if the record has no field k.
func fieldPosition(text []byte, line int, delim byte, k int) (int, int) {
	if k == 0 {
		return line, 1
	}
	field, inQuote, lineStart := 0, false, 0
	for i := 0; i < len(text); i++ {
		switch c := text[i]; {
		case c == '"':
			inQuote = !inQuote
		case c == '\n':
			if !inQuote {
				return line, 0
			}
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
