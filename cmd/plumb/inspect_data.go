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
	"sort"
	"sync"

	"plumb/engine"
	"plumb/watcher/decode"
)

// rejectedRow is a data row left out of the fit, with where and why.
type rejectedRow struct {
	File   string `json:"file"`
	Row    int    `json:"row"` // 1-based data row (0 if not known)
	Line   int    `json:"line"`
	Column int    `json:"column"`          // 1-based byte column in Line, 0 if none
	Field  string `json:"field,omitempty"` // header name of the field concerned
	Reason string `json:"reason"`

	err error // the decoder's *RowError, if it found the fault
}

func (r rejectedRow) where() string {
	if r.Column > 0 {
		return fmt.Sprintf("%s:%d:%d", r.File, r.Line, r.Column)
	}
	return fmt.Sprintf("%s:%d", r.File, r.Line)
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
	buf      []byte // the whole file, to find a field of a rejected row
	starts   []int  // byte offset of each line's start, built on first use
	total    int    // data rows in the file, good and bad
	rejected []rejectedRow
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
	dialect := decode.Dialect{Delimiter: opt.delimiter}

	// The header first, alone, so that the rest can be cut into parts.
	hdr := decode.NewDecoder(name, dialect)
	if err := hdr.Select(names, tnames); err != nil {
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

	parts := splitRecords(buf, int(off), line, runtime.GOMAXPROCS(0))
	store := newRowStore(len(names), buf, parts)
	results := make([]*inspectData, len(parts))
	if len(parts) == 1 {
		results[0], err = decodePart(name, dialect, header, hdr.HeaderLine(), names, tnames, buf, parts[0], store.slot(0))
	} else {
		errs := make([]error, len(parts))
		var wg sync.WaitGroup
		for k := range parts {
			wg.Add(1)
			go func() {
				defer wg.Done()
				results[k], errs[k] = decodePart(name, dialect, header, hdr.HeaderLine(), names, tnames, buf, parts[k], store.slot(k))
			}()
		}
		wg.Wait()
		err = errors.Join(errs...)
		if err == nil && quoteTrouble(results) {
			// A malformed quote may end a record elsewhere than quote
			// parity says: decode the file in one piece after all.
			whole := []part{{off: int(off), end: len(buf), line: line}}
			store = newRowStore(len(names), buf, whole)
			results = results[:1]
			results[0], err = decodePart(name, dialect, header, hdr.HeaderLine(), names, tnames, buf, whole[0], store.slot(0))
		}
	}
	if err != nil {
		return nil, fmt.Errorf("inspect: %w", err)
	}
	ds := store.merge(results)
	ds.file, ds.header, ds.buf, ds.names = name, header, buf, names
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
	cols  [][]float64
	rowNo []int
	line  []int
	base  []int
	room  []int
}

func newRowStore(ncols int, buf []byte, parts []part) *rowStore {
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
	return st
}

// slot is part k's share of the arrays, as zero-length slices with the
// part's room as capacity.
func (st *rowStore) slot(k int) *inspectData {
	b, e := st.base[k], st.base[k]+st.room[k]
	ds := &inspectData{}
	ds.rowNo = st.rowNo[b:b:e]
	ds.line = st.line[b:b:e]
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
		w += n
	}
	ds.rowNo, ds.line = st.rowNo[:w], st.line[:w]
	ds.vals = make([][]float64, len(st.cols))
	for i := range st.cols {
		ds.vals[i] = st.cols[i][:w]
	}
	return ds
}

// decodePart decodes the records of one part with its own decoder into
// slot (see rowStore).
func decodePart(name string, dialect decode.Dialect, header []string, headerLine int, names, tnames []string, buf []byte, pt part, slot *inspectData) (*inspectData, error) {
	dec := decode.NewDecoder(name, dialect)
	if err := dec.SetHeader(header, headerLine); err != nil {
		return nil, err
	}
	if err := dec.Select(names, tnames); err != nil {
		return nil, err
	}
	dec.SetOffset(int64(pt.off), pt.line)
	ds := slot
	ds.tvals = make([][]string, len(tnames))
	vals := ds.vals
	_, err := dec.Feed(buf[pt.off:pt.end], true, func(r decode.Record) error {
		ds.total++
		if r.Err != nil {
			ds.rejected = append(ds.rejected, rejectedRow{
				File: r.Err.File, Row: ds.total, Line: r.Err.Line, Column: r.Err.Column,
				Field: r.Err.Name, Reason: r.Err.Err.Error(), err: r.Err,
			})
			return nil
		}
		for i, v := range r.Values {
			vals[i] = append(vals[i], v)
		}
		for i, v := range r.Text {
			ds.tvals[i] = append(ds.tvals[i], v)
		}
		ds.rowNo = append(ds.rowNo, ds.total)
		ds.line = append(ds.line, r.Line)
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
	field := ""
	for k, h := range ds.header {
		if h == col {
			line, column = fieldPosition(ds.lineText(ds.line[i]), ds.line[i], delim, k)
			field = col
			break
		}
	}
	ds.rejected = append(ds.rejected, rejectedRow{
		File: ds.file, Row: ds.rowNo[i], Line: line, Column: column, Field: field, Reason: reason,
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
		for _, n := range ds.names {
			ds.cols[n][w] = ds.cols[n][i]
		}
		for _, n := range ds.tnames {
			ds.text[n][w] = ds.text[n][i]
		}
		w++
	}
	ds.rowNo, ds.line = ds.rowNo[:w], ds.line[:w]
	for _, n := range ds.names {
		ds.cols[n] = ds.cols[n][:w]
	}
	for _, n := range ds.tnames {
		ds.text[n] = ds.text[n][:w]
	}
	sort.Slice(ds.rejected, func(a, b int) bool { return ds.rejected[a].Row < ds.rejected[b].Row })
}

// lineText returns the file from the start of 1-based line l on.
func (ds *inspectData) lineText(l int) []byte {
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
