package main

import (
	"bufio"
	"io"
	"math"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"

	"plumb/cmd/plumb/internal/numfmt"
	"plumb/engine"
)

// ---------------------------------------------------------------- CSV

// csvDigits is the number of significant digits of every number in the
// csv format: ten is far more than any cutoff decision needs, and it
// formats about a fifth faster than the shortest exact form. The json
// format carries full precision.
const csvDigits = 10

// csvChunk is the number of rows one worker formats at a time.
const csvChunk = 2048

// appendCSVField appends s as one CSV field, quoted if it holds the
// delimiter, a quote or a line break (RFC 4180).
func appendCSVField(dst []byte, s string) []byte {
	if !strings.ContainsAny(s, ",\"\r\n") {
		return append(dst, s...)
	}
	dst = append(dst, '"')
	for i := 0; i < len(s); i++ {
		if s[i] == '"' {
			dst = append(dst, '"')
		}
		dst = append(dst, s[i])
	}
	return append(dst, '"')
}

// appendCSVNum appends x with csvDigits significant digits, as
// strconv.AppendFloat(dst, x, 'g', csvDigits, 64) would (numfmt.AppendG is
// byte for byte the same, in less than half the time); NaN and ±Inf give an
// empty field.
func appendCSVNum(dst []byte, x float64) []byte {
	switch {
	case math.IsNaN(x) || math.IsInf(x, 0):
		return dst
	case x == 1: // most Bonferroni p-values
		return append(dst, '1')
	}
	return numfmt.AppendG(dst, x, csvDigits)
}

// appendCSVNums appends each number as a field, each after a comma.
func appendCSVNums(dst []byte, xs ...float64) []byte {
	for _, x := range xs {
		dst = append(dst, ',')
		dst = appendCSVNum(dst, x)
	}
	return dst
}

func (r *inspectResult) csvHeader() []byte {
	var b []byte
	b = append(b, "row,"...)
	if r.ds.labels != nil {
		b = append(b, "id,"...) // as in the json format; the table names the column
	}
	b = append(b, "line,verdict,outlier,influential,leverage,residual,studentized_internal,studentized_external,cooks_distance,dffits"...)
	for _, n := range r.names {
		b = append(b, ',')
		b = appendCSVField(b, "dfbetas["+n+"]")
	}
	b = append(b, ",covratio,outlier_p,outlier_p_bonferroni,flags\n"...)
	return b
}

// appendCSVRows formats rows [lo, hi) onto dst.
func (r *inspectResult) appendCSVRows(dst []byte, lo, hi int) []byte {
	for i := lo; i < hi; i++ {
		o := &r.Influence.Rows[i]
		v := &r.Verdicts[i]
		dst = strconv.AppendInt(dst, int64(r.ds.rowNo[i]), 10)
		dst = append(dst, ',')
		if r.ds.labels != nil {
			dst = appendCSVField(dst, r.ds.labels[i])
			dst = append(dst, ',')
		}
		dst = strconv.AppendInt(dst, int64(r.ds.line[i]), 10)
		dst = append(dst, ',')
		dst = append(dst, v.Word()...)
		dst = append(dst, ',')
		dst = strconv.AppendBool(dst, v.Outlier)
		dst = append(dst, ',')
		dst = strconv.AppendBool(dst, v.Influential)
		dst = appendCSVNums(dst, o.Leverage, o.Residual, o.StudentInternal, o.StudentExternal, o.Cook, o.DFFITS)
		dst = appendCSVNums(dst, r.Influence.DFBETASRow(i)...)
		dst = appendCSVNums(dst, o.COVRATIO, o.OutlierP, o.BonferroniP)
		dst = append(dst, ',')
		if len(v.Flags) > 0 {
			dst = r.appendFlagList(dst, v.Flags)
		}
		dst = append(dst, '\n')
	}
	return dst
}

// appendFlagList writes the crossed cutoffs as one CSV field, each as
// family:measure or family:measure[term], joined by ";", e.g.
// "absolute:dffits;size_adjusted:dfbetas[x];test:outlier_p_bonferroni".
func (r *inspectResult) appendFlagList(dst []byte, flags []engine.Flag) []byte {
	start := len(dst)
	needQuote := false
	for k, fl := range flags {
		if k > 0 {
			dst = append(dst, ';')
		}
		dst = append(dst, fl.Family...)
		dst = append(dst, ':')
		dst = append(dst, fl.Measure...)
		if fl.Term != "" {
			dst = append(dst, '[')
			dst = append(dst, fl.Term...)
			dst = append(dst, ']')
			needQuote = needQuote || strings.ContainsAny(fl.Term, ",\"\r\n")
		}
	}
	if !needQuote {
		return dst
	}
	s := string(dst[start:])
	return appendCSVField(dst[:start], s)
}

// writeInspectCSV writes the csv format through writeRowBlocks; no
// allocation happens per field.
func writeInspectCSV(w io.Writer, r *inspectResult) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	bw.Write(r.csvHeader())
	if err := writeRowBlocks(bw, len(r.Influence.Rows), 20*(len(r.names)+12), r.appendCSVRows); err != nil {
		return err
	}
	return bw.Flush()
}

// writeRowBlocks writes the text of rows [0, n) to bw in order. The rows
// are formatted in blocks of csvChunk rows by GOMAXPROCS workers, each
// block by format(dst, lo, hi), which appends rows [lo, hi) to dst;
// rowBytes is a guess of one row's length. Only a few blocks are held at
// a time, so the output is streamed whatever the number of rows.
func writeRowBlocks(bw *bufio.Writer, n, rowBytes int, format func(dst []byte, lo, hi int) []byte) error {
	chunks := (n + csvChunk - 1) / csvChunk
	workers := min(runtime.GOMAXPROCS(0), chunks)
	if workers <= 1 {
		buf := make([]byte, 0, 64*1024)
		for lo := 0; lo < n; lo += csvChunk {
			buf = format(buf[:0], lo, min(lo+csvChunk, n))
			if _, err := bw.Write(buf); err != nil {
				return err
			}
		}
		return nil
	}
	// At most inFlight chunks are formatted but not yet written; chunks are
	// claimed in order, so the one the writer waits for is always being
	// worked on.
	inFlight := 2 * workers
	done := make([]chan []byte, chunks)
	for i := range done {
		done[i] = make(chan []byte, 1)
	}
	free := make(chan []byte, inFlight)
	for i := 0; i < inFlight; i++ {
		free <- make([]byte, 0, csvChunk*rowBytes)
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for k := 0; k < workers; k++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				buf, ok := <-free
				if !ok {
					return
				}
				c := int(next.Add(1) - 1)
				if c >= chunks {
					return
				}
				lo := c * csvChunk
				done[c] <- format(buf[:0], lo, min(lo+csvChunk, n))
			}
		}()
	}
	var werr error
	for c := 0; c < chunks; c++ {
		buf := <-done[c]
		if werr == nil {
			_, werr = bw.Write(buf)
		}
		free <- buf
	}
	close(free)
	wg.Wait()
	return werr
}
