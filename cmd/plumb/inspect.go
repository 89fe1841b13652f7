package main

// plumb inspect: fit one CSV file once and print every row's leverage and
// influence, as a table for people, as JSON for programs, or as CSV.

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"unicode/utf8"

	"plumb/cmd/plumb/internal/analysis"
	"plumb/cmd/plumb/internal/numfmt"
	"plumb/engine"
	"plumb/watcher/decode"
)

func init() {
	register(command{
		name:    "inspect",
		summary: "fit one CSV file and show each row's leverage and influence",
		run:     runInspect,
	})
}

const inspectSynopsis = `FILE.csv --response COL --terms "a, b, a^2" [flags]`

const inspectDescription = `Reads one CSV file (RFC 4180, a header row, comma-separated unless
--delimiter says otherwise), fits the response on the terms by least
squares, and reports for every row its leverage, residuals, Cook's
distance, DFFITS, DFBETAS, COVRATIO and outlier test, with the rows that
cross a cutoff listed first. FILE may be "-" for standard input.

Terms are separated by commas (commas inside double quotes belong to the
name). A term is a product of factors joined by "*"; a factor is a column
name, optionally raised to a power 1-9 with "^", or log(name). Names that
are not plain identifiers (letters, digits, "_", ".") are double-quoted:
  --terms "emf_mv, emf_mv^2, log(\"flow rate (l/min)\"), emf_mv*bath_c"
An intercept is included unless --no-intercept is given. Columns the model
does not use, text columns included, are ignored.

Rows that cannot be used (a field that is not a number, a wrong number of
fields, log of a value <= 0, ...) are left out of the fit and listed with
file:line:column and the reason: on standard error for the table and csv
formats, in a "rejected" array for json. --strict refuses the whole file
instead.

Rows are named by their data row (counting every record after the header,
unreadable ones included) and by the file line on which they start.

Output formats:
  table  for people: rows worth a look first, the fit, then every row
  json   the full result; undefined values (leverage 1) are null
  csv    one line per row with every measure, numbers to 10 significant
         digits, undefined values as empty fields; the flags column lists
         the crossed cutoffs as family:measure[term] joined by ";"

--fragility searches for the fewest rows whose removal, together,
changes the sign or the significance (at 0.05) of a term, or moves a
--checkpoint prediction by more than its tolerance. --suggest proposes
where in the operating region (--region, else the observed range) new
readings would lower the influence of the worst rows and the fragility.
With --format csv both are written to standard error.

Exit status: 0 when the report was written, 1 when the file cannot be
read or fitted (or a row is bad under --strict), 2 for a bad command line.

plumb flags rows; it never alters a measurement. Decisions stay with
qualified staff under local quality procedures.`

// inspectOptions are the parsed flags of one inspect run.
type inspectOptions struct {
	file        string
	response    string
	terms       string
	noIntercept bool
	format      string
	delimiter   byte
	strict      bool
	cutoffs     engine.Cutoffs

	fragility   bool
	maxRemoved  int
	checkpoints []engine.Checkpoint
	suggest     bool
	region      engine.Region // columns given with --region
	replicates  int
}

func runInspect(ctx context.Context, e *env, args []string) error {
	opt, err := parseInspectFlags(e, args)
	if err != nil {
		return err
	}
	m, err := inspectModel(opt)
	if err != nil {
		return err
	}
	ds, err := loadInspectData(e, opt, m)
	if err != nil {
		return err
	}
	if len(ds.rejected) > 0 && (opt.strict || opt.format != "json") {
		for _, r := range ds.rejected {
			fmt.Fprintf(e.stderr, "%s: row left out: %s\n", r.where(), r.Reason)
		}
	}
	if opt.strict && len(ds.rejected) > 0 {
		return &exitError{code: 1, err: fmt.Errorf("inspect: %s: %d %s could not be used; --strict refuses the file",
			ds.file, len(ds.rejected), plural(len(ds.rejected), "row", "rows"))}
	}
	res, err := analyze(ctx, opt, m, ds)
	if err != nil {
		return err
	}
	switch opt.format {
	case "json":
		return writeInspectJSON(e.stdout, res)
	case "csv":
		if err := writeInspectCSV(e.stdout, res); err != nil {
			return err
		}
		// The csv format is one line per row; the fragility and the
		// suggestions go to standard error in words.
		if res.Fragility != nil {
			for _, l := range res.fragilityLines() {
				fmt.Fprintln(e.stderr, "fragility:", l)
			}
		}
		if res.Suggested {
			for _, l := range res.suggestionLines() {
				fmt.Fprintln(e.stderr, "suggestion:", l)
			}
		}
		return nil
	default:
		return writeInspectTable(e.stdout, res)
	}
}

func parseInspectFlags(e *env, args []string) (*inspectOptions, error) {
	fs := newFlags(e, "inspect", inspectSynopsis, inspectDescription)
	def := engine.DefaultCutoffs()
	var (
		opt       inspectOptions
		delim     string
		alpha     float64
		family    string
		cookRule  string
		outlierTs string
	)
	fs.StringVar(&opt.response, "response", "", "the response `column` (required)")
	fs.StringVar(&opt.terms, "terms", "", "comma-separated model `terms` (required), e.g. \"a, b, a^2, log(c)\"")
	fs.BoolVar(&opt.noIntercept, "no-intercept", false, "fit without an intercept (through the origin)")
	fs.StringVar(&opt.format, "format", "table", "output `format`: table, json or csv")
	fs.StringVar(&delim, "delimiter", ",", "field delimiter, one `character` (\\t for tab)")
	fs.BoolVar(&opt.strict, "strict", false, "refuse the file (exit 1) if any row cannot be used")
	fs.Float64Var(&alpha, "alpha", def.Alpha, "significance `level` of the outlier test")
	fs.StringVar(&family, "cutoffs", familyName(def.Family), "cutoff `family`: absolute or size-adjusted")
	fs.StringVar(&cookRule, "cook-rule", cookRuleName(def.Cook), "Cook's distance `rule`: fmedian (the median of F(p, n-p)) or one (D > 1)")
	fs.StringVar(&outlierTs, "outlier-test", outlierTestName(def.Test), "outlier `test`: bonferroni (studentized residuals) or grubbs")
	fs.BoolVar(&opt.fragility, "fragility", false, "search for the fewest rows whose removal changes a conclusion (sign or significance of a coefficient, or a --checkpoint)")
	fs.IntVar(&opt.maxRemoved, "max-removed", engine.DefaultMaxRemoved, "with --fragility: the most rows removed together")
	var checkpoints, region []string
	fs.Func("checkpoint", "with --fragility: a prediction that must hold, `COL=X[,COL=X...]:TOL` (tolerance in the response's units); may be repeated", func(v string) error {
		checkpoints = append(checkpoints, v)
		return nil
	})
	fs.BoolVar(&opt.suggest, "suggest", false, "propose where to take more readings (and what they would do)")
	fs.Func("region", "with --suggest: the operating region, `COL=LO:HI[,COL=LO:HI...]` (other columns: their observed range); may be repeated", func(v string) error {
		region = append(region, v)
		return nil
	})
	fs.IntVar(&opt.replicates, "replicates", engine.DefaultReplicates, "with --suggest: readings proposed at each point")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return nil, err
	}
	bad := func(format string, a ...any) error {
		return fmt.Errorf("inspect: %w: %s", errUsage, fmt.Sprintf(format, a...))
	}
	switch len(pos) {
	case 0:
		return nil, bad("no CSV file given (usage: plumb inspect %s)", inspectSynopsis)
	case 1:
		opt.file = pos[0]
	default:
		return nil, bad("one CSV file at a time, got %d: %s", len(pos), strings.Join(pos, " "))
	}
	if strings.TrimSpace(opt.response) == "" {
		return nil, bad("--response is required (the column to explain)")
	}
	opt.response = unquoteName(strings.TrimSpace(opt.response))
	if strings.TrimSpace(opt.terms) == "" {
		return nil, bad("--terms is required (the model's terms, e.g. --terms \"x, x^2\")")
	}
	switch opt.format {
	case "table", "json", "csv":
	default:
		return nil, bad("--format %q: want table, json or csv", opt.format)
	}
	switch delim {
	case `\t`, "tab":
		opt.delimiter = '\t'
	default:
		if len(delim) != 1 {
			return nil, bad("--delimiter %q: want a single ASCII character", delim)
		}
		opt.delimiter = delim[0]
	}
	if err := (decode.Dialect{Delimiter: opt.delimiter}).Validate(); err != nil {
		return nil, bad("--delimiter %q: %v", delim, err)
	}
	if !(alpha > 0 && alpha < 1) {
		return nil, bad("--alpha %v: want a level strictly between 0 and 1", alpha)
	}
	c := def
	c.Alpha = alpha
	switch family {
	case "absolute":
		c.Family = engine.Absolute
	case "size-adjusted":
		c.Family = engine.SizeAdjusted
	default:
		return nil, bad("--cutoffs %q: want absolute or size-adjusted", family)
	}
	switch cookRule {
	case "fmedian":
		c.Cook = engine.CookFMedian
	case "one":
		c.Cook = engine.CookOne
	default:
		return nil, bad("--cook-rule %q: want fmedian or one", cookRule)
	}
	switch outlierTs {
	case "bonferroni":
		c.Test = engine.BonferroniTest
	case "grubbs":
		c.Test = engine.GrubbsTest
	default:
		return nil, bad("--outlier-test %q: want bonferroni or grubbs", outlierTs)
	}
	opt.cutoffs = c
	if opt.maxRemoved < 1 {
		return nil, bad("--max-removed %d: want at least 1", opt.maxRemoved)
	}
	if opt.replicates < 1 {
		return nil, bad("--replicates %d: want at least 1", opt.replicates)
	}
	for _, v := range checkpoints {
		cp, err := parseCheckpoint(v)
		if err != nil {
			return nil, bad("--checkpoint %q: %v", v, err)
		}
		opt.checkpoints = append(opt.checkpoints, cp)
	}
	for _, v := range region {
		if opt.region == nil {
			opt.region = engine.Region{}
		}
		if err := parseRegion(v, opt.region); err != nil {
			return nil, bad("--region %q: %v", v, err)
		}
	}
	if len(opt.checkpoints) > 0 && !opt.fragility && !opt.suggest {
		return nil, bad("--checkpoint needs --fragility or --suggest")
	}
	if opt.region != nil && !opt.suggest {
		return nil, bad("--region needs --suggest")
	}
	return &opt, nil
}

// splitPairs splits "a=1,b=2" at commas outside quotes into name and value
// (names may be quoted as in --terms).
func splitPairs(s string) ([][2]string, error) {
	spans, err := splitTerms(s)
	if err != nil {
		return nil, errors.New("a quote is never closed")
	}
	var out [][2]string
	for _, sp := range spans {
		t := strings.TrimSpace(sp.text)
		k := strings.LastIndexByte(t, '=')
		if k <= 0 {
			return nil, fmt.Errorf("%q: want COLUMN=VALUE", t)
		}
		name := unquoteName(strings.TrimSpace(t[:k]))
		if name == "" {
			return nil, fmt.Errorf("%q: empty column name", t)
		}
		out = append(out, [2]string{name, strings.TrimSpace(t[k+1:])})
	}
	return out, nil
}

func parseFinite(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%q is not a finite number", s)
	}
	return v, nil
}

// parseCheckpoint reads "emf_mv=48.2:0.5" or "a=1,b=2:0.5".
func parseCheckpoint(v string) (engine.Checkpoint, error) {
	k := strings.LastIndexByte(v, ':')
	if k < 0 {
		return engine.Checkpoint{}, errors.New("want COLUMN=VALUE[,COLUMN=VALUE...]:TOLERANCE")
	}
	tol, err := parseFinite(strings.TrimSpace(v[k+1:]))
	if err != nil {
		return engine.Checkpoint{}, fmt.Errorf("tolerance: %v", err)
	}
	if tol <= 0 {
		return engine.Checkpoint{}, fmt.Errorf("tolerance %v: want a positive number", tol)
	}
	pairs, err := splitPairs(v[:k])
	if err != nil {
		return engine.Checkpoint{}, err
	}
	cp := engine.Checkpoint{At: map[string]float64{}, Tolerance: tol}
	for _, pr := range pairs {
		x, err := parseFinite(pr[1])
		if err != nil {
			return engine.Checkpoint{}, fmt.Errorf("%s: %v", pr[0], err)
		}
		cp.At[pr[0]] = x
	}
	return cp, nil
}

// parseRegion reads "emf_mv=0:50[,bath_c=15:35]" into r.
func parseRegion(v string, r engine.Region) error {
	pairs, err := splitPairs(v)
	if err != nil {
		return err
	}
	for _, pr := range pairs {
		lohi := strings.Split(pr[1], ":")
		if len(lohi) != 2 {
			return fmt.Errorf("%s: want LO:HI", pr[0])
		}
		lo, err := parseFinite(strings.TrimSpace(lohi[0]))
		if err != nil {
			return fmt.Errorf("%s: %v", pr[0], err)
		}
		hi, err := parseFinite(strings.TrimSpace(lohi[1]))
		if err != nil {
			return fmt.Errorf("%s: %v", pr[0], err)
		}
		if lo > hi {
			return fmt.Errorf("%s: lower bound %v above upper bound %v", pr[0], lo, hi)
		}
		r[pr[0]] = [2]float64{lo, hi}
	}
	return nil
}

func familyName(f engine.Family) string {
	if f == engine.Absolute {
		return "absolute"
	}
	return "size-adjusted"
}

func cookRuleName(r engine.CookRule) string {
	if r == engine.CookOne {
		return "one"
	}
	return "fmedian"
}

func outlierTestName(t engine.OutlierTest) string {
	if t == engine.GrubbsTest {
		return "grubbs"
	}
	return "bonferroni"
}

// unquoteName accepts a response given in the term notation's quoted form
// ("flow rate (l/min)" with its quotes) as well as the bare column name.
func unquoteName(s string) string {
	if len(s) >= 2 && s[0] == '"' && s[len(s)-1] == '"' {
		inner := s[1 : len(s)-1]
		if !strings.Contains(strings.ReplaceAll(inner, `""`, ""), `"`) {
			return strings.ReplaceAll(inner, `""`, `"`)
		}
	}
	return s
}

// termSpan is one comma-separated piece of --terms and where it starts.
type termSpan struct {
	text  string
	start int // byte offset in the --terms string
}

// splitTerms splits s at commas outside double quotes. A quote is doubled
// ("") inside a quoted name, as in the term grammar, which needs no special
// case here: the two quotes close and reopen the quoted run. A quote left
// open is an error pointing at it.
func splitTerms(s string) ([]termSpan, error) {
	var out []termSpan
	start, open, inQuote := 0, -1, false
	for i := 0; i < len(s); i++ {
		switch s[i] {
		case '"':
			inQuote = !inQuote
			if inQuote {
				open = i
			}
		case ',':
			if !inQuote {
				out = append(out, termSpan{s[start:i], start})
				start = i + 1
			}
		}
	}
	if inQuote {
		return nil, &termsError{terms: s, pos: open, msg: "this quote is never closed"}
	}
	out = append(out, termSpan{s[start:], start})
	return out, nil
}

// termsError is a malformed --terms value, shown with a caret under the
// offending character of the whole --terms string.
type termsError struct {
	terms string
	pos   int
	msg   string
	err   error // the engine's *TermError, when it found the fault
}

func (e *termsError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "inspect: --terms: %s (character %d)\n  ", e.msg, utf8.RuneCountInString(e.terms[:min(e.pos, len(e.terms))])+1)
	b.WriteString(strings.Map(func(r rune) rune {
		if r == '\t' || r == '\n' || r == '\r' {
			return ' '
		}
		return r
	}, e.terms))
	b.WriteString("\n  ")
	b.WriteString(strings.Repeat(" ", utf8.RuneCountInString(e.terms[:min(e.pos, len(e.terms))])))
	b.WriteByte('^')
	return b.String()
}

func (e *termsError) Unwrap() []error {
	if e.err != nil {
		return []error{errUsage, e.err}
	}
	return []error{errUsage}
}

// inspectModel builds the engine model from --response, --terms and
// --no-intercept, pointing term errors at the character in --terms.
func inspectModel(opt *inspectOptions) (engine.Model, error) {
	var spans []termSpan
	if strings.TrimSpace(opt.terms) != "" {
		var err error
		if spans, err = splitTerms(opt.terms); err != nil {
			return engine.Model{}, err
		}
	}
	texts := make([]string, len(spans))
	for i, sp := range spans {
		texts[i] = sp.text
	}
	// Syntax first, term by term, so that an error points into the
	// right piece even when two pieces read the same.
	for _, sp := range spans {
		if _, err := engine.ParseTerm(sp.text); err != nil {
			return engine.Model{}, termsErrorAt(opt.terms, sp, err)
		}
	}
	m, err := engine.NewModel(opt.response, texts, !opt.noIntercept)
	if err != nil {
		var te *engine.TermError
		if errors.As(err, &te) {
			// A term that repeats an earlier one is reported at the
			// later piece; other faults at the first piece that has them.
			var at *termSpan
			for i := range spans {
				if spans[i].text == te.Term {
					at = &spans[i]
					if !strings.HasPrefix(te.Msg, "same as") {
						break
					}
				}
			}
			if at != nil {
				return engine.Model{}, termsErrorAt(opt.terms, *at, err)
			}
		}
		return engine.Model{}, fmt.Errorf("inspect: %w: %v", errUsage, err)
	}
	return m, nil
}

// termsErrorAt places an engine *TermError found in piece sp of --terms.
func termsErrorAt(terms string, sp termSpan, err error) error {
	var te *engine.TermError
	if !errors.As(err, &te) {
		return fmt.Errorf("inspect: %w: --terms: %v", errUsage, err)
	}
	return &termsError{terms: terms, pos: sp.start + te.Pos, msg: te.Msg, err: err}
}

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
	names := append([]string{m.Response}, m.Columns()...)
	dialect := decode.Dialect{Delimiter: opt.delimiter}

	// The header first, alone, so that the rest can be cut into parts.
	hdr := decode.NewDecoder(name, dialect)
	if err := hdr.Select(names, nil); err != nil {
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
		results[0], err = decodePart(name, dialect, header, hdr.HeaderLine(), names, buf, parts[0], store.slot(0))
	} else {
		errs := make([]error, len(parts))
		var wg sync.WaitGroup
		for k := range parts {
			wg.Add(1)
			go func() {
				defer wg.Done()
				results[k], errs[k] = decodePart(name, dialect, header, hdr.HeaderLine(), names, buf, parts[k], store.slot(k))
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
			results[0], err = decodePart(name, dialect, header, hdr.HeaderLine(), names, buf, whole[0], store.slot(0))
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
	if ds.total == 0 {
		return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: the file has a header (line %d) but no data rows", name, hdr.HeaderLine())}
	}
	ds.rejectLogDomain(m, opt.delimiter)
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
func decodePart(name string, dialect decode.Dialect, header []string, headerLine int, names []string, buf []byte, pt part, slot *inspectData) (*inspectData, error) {
	dec := decode.NewDecoder(name, dialect)
	if err := dec.SetHeader(header, headerLine); err != nil {
		return nil, err
	}
	if err := dec.Select(names, nil); err != nil {
		return nil, err
	}
	dec.SetOffset(int64(pt.off), pt.line)
	ds := slot
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
		w++
	}
	ds.rowNo, ds.line = ds.rowNo[:w], ds.line[:w]
	for _, n := range ds.names {
		ds.cols[n] = ds.cols[n][:w]
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

// inspectResult is everything the writers print: the analysis and the
// file's rows.
type inspectResult struct {
	*analysis.Result
	file    string
	ds      *inspectData
	model   engine.Model
	names   []string
	cutoffs engine.Cutoffs

	checkpoints []engine.Checkpoint
}

func analyze(ctx context.Context, opt *inspectOptions, m engine.Model, ds *inspectData) (*inspectResult, error) {
	if opt.suggest {
		cols := m.Columns()
		for c := range opt.region {
			if !slices.Contains(cols, c) {
				return nil, fmt.Errorf("inspect: %w: --region: %q is not a predictor column of the model (its columns: %s)", errUsage, c, strings.Join(cols, ", "))
			}
		}
	}
	res := &inspectResult{file: ds.file, ds: ds, model: m, names: m.Names(), cutoffs: opt.cutoffs, checkpoints: opt.checkpoints}
	conc := engine.DefaultConclusions()
	conc.Checkpoints = opt.checkpoints
	a := analysis.Analysis{Model: m, Options: analysis.Options{
		Cutoffs:          opt.cutoffs,
		Conclusions:      conc,
		Fragility:        opt.fragility,
		FragilityOptions: engine.FragilityOptions{MaxRemoved: opt.maxRemoved},
		Suggest:          opt.suggest,
		SuggestOptions:   engine.SuggestOptions{Replicates: opt.replicates},
		Region:           opt.region,
		Label:            res.rowLabel,
	}}
	for {
		if len(ds.rowNo) == 0 {
			return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: none of the %d data rows could be used", ds.file, ds.total)}
		}
		r, err := a.Run(ctx, ds.cols)
		var se *analysis.StepError
		if !errors.As(err, &se) {
			if err != nil {
				return nil, err // cancelled
			}
			res.Result = r
			break
		}
		var de *engine.DataError
		if se.Step == analysis.StepDesign && errors.As(se.Err, &de) && de.Row >= 0 && de.Row < len(ds.rowNo) {
			// A value the design cannot take (a power that overflows, say):
			// set the row aside like an unreadable one and build again.
			col := de.Column
			for _, t := range m.Terms {
				if t.Text == col && len(t.Factors) > 0 {
					col = t.Factors[0].Column
				}
			}
			ds.reject(de.Row, col, de.Err.Error(), opt.delimiter)
			ds.drop([]int{de.Row})
			continue
		}
		if se.Step == analysis.StepRefit && errors.Is(se.Err, engine.ErrTooFewRows) {
			return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: %d usable rows for %d coefficients: %w", ds.file, len(ds.rowNo), m.P(), se.Err)}
		}
		return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: %w", ds.file, se.Err)}
	}
	for _, p := range res.Problems {
		if p.Step == analysis.StepRegion {
			return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: %w", ds.file, p.Err)}
		}
		return nil, fmt.Errorf("inspect: %w: %v", errUsage, p.Err)
	}
	return res, nil
}

// rowLabel names the k-th fitted row (1-based, as the engine counts) by
// its data row and line in the file.
func (r *inspectResult) rowLabel(k int) string {
	if k < 1 || k > len(r.ds.rowNo) {
		return "row ?"
	}
	return fmt.Sprintf("row %d (line %d)", r.ds.rowNo[k-1], r.ds.line[k-1])
}

func (r *inspectResult) fileRow(k int) (row, line int) {
	if k < 1 || k > len(r.ds.rowNo) {
		return 0, 0
	}
	return r.ds.rowNo[k-1], r.ds.line[k-1]
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// ---------------------------------------------------------------- JSON

// jnum is a float that encodes NaN and ±Inf as null and anything else in
// the shortest form that reads back as the same float64.
type jnum float64

func (x jnum) MarshalJSON() ([]byte, error) {
	f := float64(x)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

// jmap is a JSON object of numbers keyed by term, in model order.
type jmap struct {
	keys []string
	vals []float64
}

func (m jmap) MarshalJSON() ([]byte, error) {
	var b bytes.Buffer
	b.WriteByte('{')
	for i, k := range m.keys {
		if i > 0 {
			b.WriteByte(',')
		}
		kb, _ := json.Marshal(k)
		b.Write(kb)
		b.WriteByte(':')
		vb, _ := jnum(m.vals[i]).MarshalJSON()
		b.Write(vb)
	}
	b.WriteByte('}')
	return b.Bytes(), nil
}

type jsonCoef struct {
	Term     string `json:"term"`
	Estimate jnum   `json:"estimate"`
	StdError jnum   `json:"std_error"`
	T        jnum   `json:"t"`
	P        jnum   `json:"p"`
	Lower95  jnum   `json:"lower_95"`
	Upper95  jnum   `json:"upper_95"`
}

type jsonFragility struct {
	Index        *int   `json:"index"`
	Searched     string `json:"searched"`
	RemovedRows  []int  `json:"removed_rows"`
	RemovedLines []int  `json:"removed_lines"`
	Conclusion   string `json:"conclusion"`
	Kind         string `json:"kind"`
	Term         string `json:"term"`
	Before       jnum   `json:"before"`
	After        jnum   `json:"after"`
	Fragile      bool   `json:"fragile"`
	MaxRemoved   int    `json:"max_removed"`
	Limit        int    `json:"limit"`
	Evaluated    int    `json:"evaluated"`
	Skipped      int    `json:"skipped"`
}

type jsonRowEffect struct {
	Row            int  `json:"row"`
	Line           int  `json:"line"`
	LeverageBefore jnum `json:"leverage_before"`
	LeverageAfter  jnum `json:"leverage_after"`
	CookBefore     jnum `json:"cooks_distance_before"`
	CookAfter      jnum `json:"cooks_distance_after"`
}

type jsonEffect struct {
	DetRatio        jnum            `json:"det_ratio"`
	Rows            []jsonRowEffect `json:"rows"`
	FragilityBefore *int            `json:"fragility_before"`
	FragilityAfter  *int            `json:"fragility_after"`
	FragileBefore   bool            `json:"fragile_before"`
	FragileAfter    bool            `json:"fragile_after"`
	EndsFragility   *int            `json:"ends_fragility"`
	Searched        string          `json:"searched"`
}

type jsonSuggestion struct {
	At         jmap       `json:"at"`
	Replicates int        `json:"replicates"`
	D          jnum       `json:"d"`
	DGain      jnum       `json:"d_gain"`
	Effect     jsonEffect `json:"effect"`
	Text       string     `json:"text"`
}

// indexOrNull maps the engine's 0 ("none found") to JSON null.
func indexOrNull(k int) *int {
	if k <= 0 {
		return nil
	}
	return &k
}

func (r *inspectResult) jsonFragility() *jsonFragility {
	fr := r.Fragility
	if fr == nil {
		return nil
	}
	j := &jsonFragility{
		Index: indexOrNull(fr.Index), Searched: fr.Searched, Conclusion: fr.Conclusion,
		Kind: fr.Kind, Term: fr.Term, Before: jnum(fr.Before), After: jnum(fr.After),
		Fragile: fr.Fragile, MaxRemoved: fr.MaxRemoved, Limit: fr.Limit,
		Evaluated: fr.Evaluated, Skipped: fr.Skipped,
		RemovedRows: []int{}, RemovedLines: []int{},
	}
	if fr.Index == 0 {
		j.Before, j.After = jnum(math.NaN()), jnum(math.NaN())
	}
	for _, k := range fr.RemovedRows {
		row, line := r.fileRow(k)
		j.RemovedRows = append(j.RemovedRows, row)
		j.RemovedLines = append(j.RemovedLines, line)
	}
	return j
}

func (r *inspectResult) jsonSuggestions() *[]jsonSuggestion {
	if !r.Suggested {
		return nil
	}
	out := []jsonSuggestion{}
	cols := r.model.Columns()
	for _, sg := range r.Suggestions {
		at := jmap{}
		for _, c := range cols {
			if v, ok := sg.At[c]; ok {
				at.keys = append(at.keys, c)
				at.vals = append(at.vals, v)
			}
		}
		ef := sg.Effect
		je := jsonEffect{
			DetRatio:        jnum(ef.DetRatio),
			Rows:            []jsonRowEffect{},
			FragilityBefore: indexOrNull(ef.FragilityBefore),
			FragilityAfter:  indexOrNull(ef.FragilityAfter),
			FragileBefore:   ef.FragileBefore,
			FragileAfter:    ef.FragileAfter,
			EndsFragility:   indexOrNull(ef.EndsFragility),
			Searched:        ef.Searched,
		}
		for _, re := range ef.Rows {
			row, line := r.fileRow(re.Row)
			je.Rows = append(je.Rows, jsonRowEffect{
				Row: row, Line: line,
				LeverageBefore: jnum(re.LeverageBefore), LeverageAfter: jnum(re.LeverageAfter),
				CookBefore: jnum(re.CookBefore), CookAfter: jnum(re.CookAfter),
			})
		}
		out = append(out, jsonSuggestion{At: at, Replicates: sg.Replicates, D: jnum(sg.D), DGain: jnum(sg.DGain), Effect: je, Text: sg.Text})
	}
	return &out
}

type jsonCutoffs struct {
	Family                    string `json:"family"`
	CookRule                  string `json:"cook_rule"`
	Alpha                     jnum   `json:"alpha"`
	OutlierTest               string `json:"outlier_test"`
	Leverage                  jnum   `json:"leverage"`
	CooksDistanceAbsolute     jnum   `json:"cooks_distance_absolute"`
	CooksDistanceSizeAdjusted jnum   `json:"cooks_distance_size_adjusted"`
	DFFITSAbsolute            jnum   `json:"dffits_absolute"`
	DFFITSSizeAdjusted        jnum   `json:"dffits_size_adjusted"`
	DFBETASAbsolute           jnum   `json:"dfbetas_absolute"`
	DFBETASSizeAdjusted       jnum   `json:"dfbetas_size_adjusted"`
	COVRATIO                  jnum   `json:"covratio"`
}

type jsonReport struct {
	File         string            `json:"file"`
	Response     string            `json:"response"`
	Terms        []string          `json:"terms"`
	Intercept    bool              `json:"intercept"`
	N            int               `json:"n"`
	P            int               `json:"p"`
	DF           int               `json:"df"`
	RowsInFile   int               `json:"rows_in_file"`
	Sigma        jnum              `json:"sigma"`
	RSquared     jnum              `json:"r_squared"`
	AdjRSquared  jnum              `json:"adj_r_squared"`
	FStatistic   jnum              `json:"f_statistic"`
	FDF1         int               `json:"f_df1"`
	FDF2         int               `json:"f_df2"`
	FP           jnum              `json:"f_p"`
	Condition    jnum              `json:"condition"`
	Coefficients []jsonCoef        `json:"coefficients"`
	VIF          *jmap             `json:"vif"`
	Cutoffs      jsonCutoffs       `json:"cutoffs"`
	Rejected     []rejectedRow     `json:"rejected"`
	Fragility    *jsonFragility    `json:"fragility,omitempty"`
	Suggestions  *[]jsonSuggestion `json:"suggestions,omitempty"`
	Caution      string            `json:"caution"`
}

const cautionText = "plumb flags rows; it never alters a measurement. Decisions stay with qualified staff under local quality procedures."

func writeInspectJSON(w io.Writer, r *inspectResult) error {
	f := r.Fit
	rep := jsonReport{
		File:        r.file,
		Response:    r.model.Response,
		Intercept:   r.model.Intercept,
		N:           f.N,
		P:           f.P,
		DF:          f.DF,
		RowsInFile:  r.ds.total,
		Sigma:       jnum(f.Sigma),
		RSquared:    jnum(f.RSquared),
		AdjRSquared: jnum(f.AdjRSquared),
		FStatistic:  jnum(f.FStat),
		FDF1:        f.FDF1,
		FDF2:        f.FDF2,
		FP:          jnum(f.FP),
		Condition:   jnum(f.Condition),
		Cutoffs: jsonCutoffs{
			Family:      strings.ReplaceAll(familyName(r.cutoffs.Family), "-", "_"),
			CookRule:    cookRuleName(r.cutoffs.Cook),
			Alpha:       jnum(r.cutoffs.Alpha),
			OutlierTest: outlierTestName(r.cutoffs.Test),

			Leverage:                  jnum(r.Limits.Leverage),
			CooksDistanceAbsolute:     jnum(r.Limits.CookAbsolute),
			CooksDistanceSizeAdjusted: jnum(r.Limits.CookSize),
			DFFITSAbsolute:            jnum(r.Limits.DFFITSAbsolute),
			DFFITSSizeAdjusted:        jnum(r.Limits.DFFITSSize),
			DFBETASAbsolute:           jnum(r.Limits.DFBETASAbsolute),
			DFBETASSizeAdjusted:       jnum(r.Limits.DFBETASSize),
			COVRATIO:                  jnum(r.Limits.COVRATIO),
		},
		Rejected:    r.ds.rejected,
		Fragility:   r.jsonFragility(),
		Suggestions: r.jsonSuggestions(),
		Caution:     cautionText,
	}
	rep.Terms = make([]string, len(r.model.Terms))
	for i, t := range r.model.Terms {
		rep.Terms[i] = t.Text
	}
	if rep.Rejected == nil {
		rep.Rejected = []rejectedRow{}
	}
	for _, c := range f.Coef {
		rep.Coefficients = append(rep.Coefficients, jsonCoef{
			Term: c.Term, Estimate: jnum(c.Estimate), StdError: jnum(c.StdError),
			T: jnum(c.T), P: jnum(c.P), Lower95: jnum(c.Lower95), Upper95: jnum(c.Upper95),
		})
	}
	rep.VIF = &jmap{}
	if f.VIF != nil {
		v := jmap{}
		for _, t := range r.model.Terms {
			if x, ok := f.VIF[t.Text]; ok {
				v.keys = append(v.keys, t.Text)
				v.vals = append(v.vals, x)
			}
		}
		rep.VIF = &v
	}
	head, err := json.MarshalIndent(rep, "", "  ")
	if err != nil {
		return err
	}
	// The rows are streamed after the rest, one compact object a line, so
	// that a large file needs no document-sized buffer.
	head = bytes.TrimRight(head, " \n}")
	bw := bufio.NewWriterSize(w, 1<<16)
	bw.Write(head)
	bw.WriteString(",\n  \"rows\": [")
	qnames := make([][]byte, len(r.names))
	for j, n := range r.names {
		qnames[j], _ = json.Marshal(n)
	}
	var buf []byte
	for i := range r.Influence.Rows {
		buf = buf[:0]
		if i > 0 {
			buf = append(buf, ',')
		}
		buf = append(buf, "\n    "...)
		buf = r.appendJSONRow(buf, i, qnames)
		bw.Write(buf)
	}
	if len(r.Influence.Rows) > 0 {
		bw.WriteString("\n  ")
	}
	bw.WriteString("]\n}\n")
	return bw.Flush()
}

func appendJSONNum(dst []byte, x float64) []byte {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return append(dst, "null"...)
	}
	return strconv.AppendFloat(dst, x, 'g', -1, 64)
}

func appendJSONString(dst []byte, s string) []byte {
	b, _ := json.Marshal(s)
	return append(dst, b...)
}

// appendJSONRow writes row i as one JSON object: row, line, fitted, the
// measures, dfbetas by term, the verdict and the crossed cutoffs.
func (r *inspectResult) appendJSONRow(dst []byte, i int, qnames [][]byte) []byte {
	o := &r.Influence.Rows[i]
	v := &r.Verdicts[i]
	num := func(key string, x float64) {
		dst = append(dst, ',', '"')
		dst = append(dst, key...)
		dst = append(dst, '"', ':')
		dst = appendJSONNum(dst, x)
	}
	flag := func(key string, b bool) {
		dst = append(dst, ',', '"')
		dst = append(dst, key...)
		dst = append(dst, '"', ':')
		dst = strconv.AppendBool(dst, b)
	}
	dst = append(dst, `{"row":`...)
	dst = strconv.AppendInt(dst, int64(r.ds.rowNo[i]), 10)
	dst = append(dst, `,"line":`...)
	dst = strconv.AppendInt(dst, int64(r.ds.line[i]), 10)
	num("fitted", r.Fit.Fitted[i])
	num("leverage", o.Leverage)
	num("residual", o.Residual)
	num("studentized_internal", o.StudentInternal)
	num("studentized_external", o.StudentExternal)
	num("cooks_distance", o.Cook)
	num("dffits", o.DFFITS)
	dst = append(dst, `,"dfbetas":{`...)
	for j, x := range r.Influence.DFBETASRow(i) {
		if j > 0 {
			dst = append(dst, ',')
		}
		dst = append(dst, qnames[j]...)
		dst = append(dst, ':')
		dst = appendJSONNum(dst, x)
	}
	dst = append(dst, '}')
	num("covratio", o.COVRATIO)
	num("outlier_p", o.OutlierP)
	num("outlier_p_bonferroni", o.BonferroniP)
	dst = append(dst, `,"verdict":"`...)
	dst = append(dst, v.Word()...)
	dst = append(dst, '"')
	flag("outlier", v.Outlier) // JSON keys
	flag("influential", v.Influential)
	flag("notable", v.Notable)
	dst = append(dst, `,"flags":[`...)
	for k, fl := range v.Flags {
		if k > 0 {
			dst = append(dst, ',')
		}
		dst = append(dst, `{"measure":`...)
		dst = appendJSONString(dst, fl.Measure)
		dst = append(dst, `,"family":`...)
		dst = appendJSONString(dst, fl.Family)
		dst = append(dst, `,"value":`...)
		dst = appendJSONNum(dst, fl.Value)
		dst = append(dst, `,"cutoff":`...)
		dst = appendJSONNum(dst, fl.Cutoff)
		dst = append(dst, `,"term":`...)
		if fl.Term == "" {
			dst = append(dst, "null"...)
		} else {
			dst = appendJSONString(dst, fl.Term)
		}
		dst = append(dst, `,"words":`...)
		dst = appendJSONString(dst, flagWords(fl))
		dst = append(dst, '}')
	}
	dst = append(dst, "]}"...)
	return dst
}

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

func (r *inspectResult) csvHeader() []byte {
	var b []byte
	b = append(b, "row,line,verdict,outlier,influential,leverage,residual,studentized_internal,studentized_external,cooks_distance,dffits"...)
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
		dst = strconv.AppendInt(dst, int64(r.ds.line[i]), 10)
		dst = append(dst, ',')
		dst = append(dst, v.Word()...)
		dst = append(dst, ',')
		dst = strconv.AppendBool(dst, v.Outlier)
		dst = append(dst, ',')
		dst = strconv.AppendBool(dst, v.Influential)
		dst = append(dst, ',')
		dst = appendCSVNum(dst, o.Leverage)
		dst = append(dst, ',')
		dst = appendCSVNum(dst, o.Residual)
		dst = append(dst, ',')
		dst = appendCSVNum(dst, o.StudentInternal)
		dst = append(dst, ',')
		dst = appendCSVNum(dst, o.StudentExternal)
		dst = append(dst, ',')
		dst = appendCSVNum(dst, o.Cook)
		dst = append(dst, ',')
		dst = appendCSVNum(dst, o.DFFITS)
		for _, x := range r.Influence.DFBETASRow(i) {
			dst = append(dst, ',')
			dst = appendCSVNum(dst, x)
		}
		dst = append(dst, ',')
		dst = appendCSVNum(dst, o.COVRATIO)
		dst = append(dst, ',')
		dst = appendCSVNum(dst, o.OutlierP)
		dst = append(dst, ',')
		dst = appendCSVNum(dst, o.BonferroniP)
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

// writeInspectCSV writes the csv format. Rows are formatted in chunks by
// GOMAXPROCS workers and written in order through one bufio.Writer; no
// allocation happens per field.
func writeInspectCSV(w io.Writer, r *inspectResult) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	bw.Write(r.csvHeader())
	n := len(r.Influence.Rows)
	chunks := (n + csvChunk - 1) / csvChunk
	workers := min(runtime.GOMAXPROCS(0), chunks)
	if workers <= 1 {
		buf := make([]byte, 0, 64*1024)
		for lo := 0; lo < n; lo += csvChunk {
			buf = r.appendCSVRows(buf[:0], lo, min(lo+csvChunk, n))
			bw.Write(buf)
		}
		return bw.Flush()
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
		free <- make([]byte, 0, csvChunk*(20*(len(r.names)+12)))
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
				done[c] <- r.appendCSVRows(buf[:0], lo, min(lo+csvChunk, n))
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
	if werr != nil {
		return werr
	}
	return bw.Flush()
}

// ---------------------------------------------------------------- table

// measureWords names each measure in the table.
var measureWords = map[string]string{
	"leverage":             "leverage",
	"cooks_distance":       "Cook's distance",
	"dffits":               "DFFITS",
	"dfbetas":              "DFBETAS",
	"covratio":             "COVRATIO",
	"outlier_p_bonferroni": "Bonferroni outlier p",
	"grubbs":               "Grubbs statistic",
}

// flagWords says in plain words which cutoff a flag crosses.
func flagWords(fl engine.Flag) string {
	name := measureWords[fl.Measure]
	if name == "" {
		name = fl.Measure
	}
	if fl.Term != "" {
		name += " for " + fl.Term
	}
	family := strings.ReplaceAll(fl.Family, "_", "-")
	v, c := num4(fl.Value), num4(fl.Cutoff)
	switch fl.Measure {
	case "outlier_p_bonferroni":
		return fmt.Sprintf("%s is %s, below the significance level %s", name, v, c)
	case "covratio":
		return fmt.Sprintf("%s is %s, more than %s away from 1 (%s cutoff)", name, v, c, family)
	case "dffits", "dfbetas":
		return fmt.Sprintf("%s is %s, beyond ±%s (%s cutoff)", name, v, c, family)
	case "grubbs":
		return fmt.Sprintf("%s is %s, above the critical value %s", name, v, c)
	default:
		return fmt.Sprintf("%s is %s, above %s (%s cutoff)", name, v, c, family)
	}
}

// num4 formats a number to 4 significant digits for people.
func num4(x float64) string {
	switch {
	case math.IsNaN(x):
		return "undefined"
	case math.IsInf(x, 0):
		return "infinite"
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}

// pval formats a p-value.
func pval(p float64) string {
	switch {
	case math.IsNaN(p):
		return "undefined"
	case p < 1e-300:
		return "< 1e-300"
	case p < 1e-4:
		return strconv.FormatFloat(p, 'e', 1, 64)
	}
	return strconv.FormatFloat(p, 'g', 3, 64)
}

// grid lays out columns with two spaces between them: numbers
// right-aligned, the columns marked in left (by index) left-aligned.
type grid struct {
	rows  [][]string
	left  map[int]bool
	width []int
}

func (g *grid) add(cells ...string) {
	for len(g.width) < len(cells) {
		g.width = append(g.width, 0)
	}
	for i, c := range cells {
		if n := utf8.RuneCountInString(c); n > g.width[i] {
			g.width[i] = n
		}
	}
	g.rows = append(g.rows, cells)
}

func (g *grid) write(w *bufio.Writer, indent string) {
	var line []byte
	for _, r := range g.rows {
		line = append(line[:0], indent...)
		for i, c := range r {
			pad := g.width[i] - utf8.RuneCountInString(c)
			if i > 0 {
				line = append(line, "  "...)
			}
			if g.left[i] {
				line = append(line, c...)
				line = appendSpaces(line, pad)
			} else {
				line = appendSpaces(line, pad)
				line = append(line, c...)
			}
		}
		line = bytes.TrimRight(line, " ")
		line = append(line, '\n')
		w.Write(line)
	}
}

func appendSpaces(b []byte, n int) []byte {
	for ; n > 0; n-- {
		b = append(b, ' ')
	}
	return b
}

// verdictWords turns the engine's verdict into the table's words.
func verdictWords(v engine.Verdict) string {
	switch v.Word() {
	case engine.WordSuspect:
		return "SUSPECT: an outlier that also sways the fit"
	case engine.WordInfluential:
		return "sways the fit"
	case engine.WordOutlier:
		return "does not follow the fit (outlier)"
	case engine.WordNotable:
		return "worth a second glance"
	}
	return string(v.Word())
}

func shortVerdict(v engine.Verdict) string {
	switch v.Word() {
	case engine.WordOrdinary:
		return "-"
	case engine.WordInfluential:
		return "sways fit"
	}
	return string(v.Word())
}

// maxLookRows bounds the "worth a look" list of the table.
const maxLookRows = 40

func writeInspectTable(w io.Writer, r *inspectResult) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	f := r.Fit
	terms := make([]string, len(r.model.Terms))
	for i, t := range r.model.Terms {
		terms[i] = t.Text
	}
	explained := strings.Join(terms, " + ")
	switch {
	case r.model.Intercept && explained == "":
		explained = "a constant"
	case r.model.Intercept:
		explained = "a constant + " + explained
	default:
		explained += " (through the origin, no constant)"
	}
	fmt.Fprintf(bw, "%s: %s explained by %s\n", r.file, r.model.Response, explained)
	fmt.Fprintf(bw, "%d of %d data rows used", f.N, r.ds.total)
	if k := len(r.ds.rejected); k > 0 {
		fmt.Fprintf(bw, "; %d set aside as unreadable (listed on standard error)", k)
	}
	bw.WriteString("\n\n")

	// Worth a look.
	var look []int
	for i, v := range r.Verdicts {
		if v.Outlier || v.Influential || v.Notable {
			look = append(look, i)
		}
	}
	sort.SliceStable(look, func(a, b int) bool {
		va, vb := r.Verdicts[look[a]], r.Verdicts[look[b]]
		if rank(va) != rank(vb) {
			return rank(va) > rank(vb)
		}
		return len(va.Flags) > len(vb.Flags)
	})
	if len(look) == 0 {
		fmt.Fprintf(bw, "== Worth a look: none of the %d rows crosses a cutoff ==\n", f.N)
		r.writeLegend(bw)
		bw.WriteByte('\n')
	} else {
		fmt.Fprintf(bw, "== Worth a look: %d of %d rows, most serious first ==\n", len(look), f.N)
		r.writeLegend(bw)
		shown := look
		if len(shown) > maxLookRows {
			shown = shown[:maxLookRows]
		}
		for _, i := range shown {
			v := r.Verdicts[i]
			fmt.Fprintf(bw, "  row %d (line %d): %s\n", r.ds.rowNo[i], r.ds.line[i], verdictWords(v))
			for _, fl := range v.Flags {
				fmt.Fprintf(bw, "      - %s\n", flagWords(fl))
			}
		}
		if rest := look[len(shown):]; len(rest) > 0 {
			count := map[engine.Word]int{}
			for _, i := range rest {
				count[r.Verdicts[i].Word()]++
			}
			var parts []string
			for _, w := range []engine.Word{engine.WordSuspect, engine.WordInfluential, engine.WordOutlier, engine.WordNotable} {
				if count[w] > 0 {
					parts = append(parts, fmt.Sprintf("%d %s", count[w], w))
				}
			}
			fmt.Fprintf(bw, "  ... and %d more (%s): see the verdict column below, or --format csv.\n", len(rest), strings.Join(parts, ", "))
		}
		bw.WriteByte('\n')
	}

	// The fit.
	bw.WriteString("== The fit ==\n")
	g := grid{left: map[int]bool{0: true}}
	g.add("coefficient", "estimate", "std error", "t", "p", "95% from", "95% to")
	for _, c := range f.Coef {
		g.add(c.Term, num4(c.Estimate), num4(c.StdError), num4(c.T), pval(c.P), num4(c.Lower95), num4(c.Upper95))
	}
	g.write(bw, "  ")
	bw.WriteByte('\n')
	fmt.Fprintf(bw, "  residual sigma %s on %d degrees of freedom\n", num4(f.Sigma), f.DF)
	fmt.Fprintf(bw, "  R-squared %s, adjusted %s\n", strconv.FormatFloat(f.RSquared, 'f', 5, 64), strconv.FormatFloat(f.AdjRSquared, 'f', 5, 64))
	if f.FDF1 > 0 {
		fmt.Fprintf(bw, "  F %s on %d and %d degrees of freedom, p %s\n", num4(f.FStat), f.FDF1, f.FDF2, pval(f.FP))
	}
	fmt.Fprintf(bw, "  condition number of the scaled design %s\n", num4(f.Condition))
	if f.VIF != nil {
		var parts []string
		for _, t := range terms {
			if x, ok := f.VIF[t]; ok {
				parts = append(parts, t+" "+num4(x))
			}
		}
		fmt.Fprintf(bw, "  variance inflation: %s\n", strings.Join(parts, ", "))
	}
	bw.WriteByte('\n')

	if r.Fragility != nil {
		bw.WriteString("== How fragile the conclusions are ==\n")
		for _, l := range r.fragilityLines() {
			bw.WriteString("  " + l + "\n")
		}
		bw.WriteByte('\n')
	}
	if r.Suggested {
		bw.WriteString("== Where more readings would help ==\n")
		for _, l := range r.suggestionLines() {
			bw.WriteString("  " + l + "\n")
		}
		bw.WriteByte('\n')
	}

	// Every row.
	fmt.Fprintf(bw, "== Every row, in file order ==\n")
	g = grid{left: map[int]bool{9: true, 12: true}}
	g.add("row", "line", "leverage", "residual", "stud. int.", "stud. ext.", "Cook's D", "DFFITS", "largest DFBETAS", "(term)", "COVRATIO", "Bonferroni p", "verdict")
	for i, o := range r.Influence.Rows {
		big, bigAt := math.NaN(), -1
		for j, x := range r.Influence.DFBETASRow(i) {
			if bigAt < 0 || math.Abs(x) > math.Abs(big) {
				big, bigAt = x, j
			}
		}
		dfb, dfbTerm := "undefined", ""
		if bigAt >= 0 && !math.IsNaN(big) {
			dfb, dfbTerm = num4(big), r.names[bigAt]
		}
		g.add(strconv.Itoa(r.ds.rowNo[i]), strconv.Itoa(r.ds.line[i]), num4(o.Leverage), num4(o.Residual),
			num4(o.StudentInternal), num4(o.StudentExternal), num4(o.Cook), num4(o.DFFITS), dfb, dfbTerm,
			num4(o.COVRATIO), pval(o.BonferroniP), shortVerdict(r.Verdicts[i]))
	}
	g.write(bw, "  ")
	bw.WriteByte('\n')
	bw.WriteString("Caution: " + cautionText + "\n")
	return bw.Flush()
}

// writeLegend says which cutoffs decide, in words.
func (r *inspectResult) writeLegend(bw *bufio.Writer) {
	l := r.Limits
	abs := fmt.Sprintf("Cook's distance above %s, |DFFITS| above %s, |DFBETAS| above %s", num4(l.CookAbsolute), num4(l.DFFITSAbsolute), num4(l.DFBETASAbsolute))
	size := fmt.Sprintf("leverage above %s, Cook's distance above %s, |DFFITS| above %s, |DFBETAS| above %s, COVRATIO more than %s from 1",
		num4(l.Leverage), num4(l.CookSize), num4(l.DFFITSSize), num4(l.DFBETASSize), num4(l.COVRATIO))
	deciding, other := "absolute", "size-adjusted"
	decidingRule, otherRule := abs, size
	if r.cutoffs.Family == engine.SizeAdjusted {
		deciding, other = other, deciding
		decidingRule, otherRule = otherRule, decidingRule
	}
	test := fmt.Sprintf("Bonferroni-adjusted p of the studentized residual below %s", num4(r.cutoffs.Alpha))
	if r.cutoffs.Test == engine.GrubbsTest {
		test = fmt.Sprintf("Grubbs test on the residuals at level %s", num4(r.cutoffs.Alpha))
	}
	article := "a"
	if deciding == "absolute" {
		article = "an"
	}
	fmt.Fprintf(bw, "  A row sways the fit when it crosses %s %s cutoff (%s).\n", article, deciding, decidingRule)
	fmt.Fprintf(bw, "  It is worth a second glance when it crosses only %s ones (%s).\n", other, otherRule)
	fmt.Fprintf(bw, "  It does not follow the fit (outlier) by the %s.\n", test)
}

func (r *inspectResult) rowList(ks []int) string {
	parts := make([]string, len(ks))
	for i, k := range ks {
		parts[i] = r.rowLabel(k)
	}
	if len(parts) <= 2 {
		return strings.Join(parts, " and ")
	}
	return strings.Join(parts[:len(parts)-1], ", ") + " and " + parts[len(parts)-1]
}

// fragilityLines says in words what the fragility search found.
func (r *inspectResult) fragilityLines() []string {
	fr := r.Fragility
	var out []string
	if fr.Index == 0 {
		out = append(out, fmt.Sprintf("No set of up to %d rows, left out together, breaks a conclusion.", fr.MaxRemoved))
	} else {
		what := "value"
		switch fr.Kind {
		case "sign", "band":
			what = "estimate"
		case "significance":
			what = "p"
		case "checkpoint":
			what = "prediction"
		}
		together := ""
		if fr.Index > 1 {
			together = " together"
		}
		out = append(out, fmt.Sprintf("Leaving out %s%s breaks the conclusion %q:", r.rowList(fr.RemovedRows), together, fr.Conclusion))
		out = append(out, fmt.Sprintf("  %s %s with every row, %s without %s.", what, num4(fr.Before), num4(fr.After), plural(fr.Index, "it", "them")))
		if fr.Fragile {
			out = append(out, fmt.Sprintf("The fit is FRAGILE: a conclusion rests on %d %s (plumb calls a fit fragile when %d or fewer rows decide one).", fr.Index, plural(fr.Index, "row", "rows"), fr.Limit))
		} else {
			out = append(out, fmt.Sprintf("Not fragile by plumb's limit: it takes more than %d rows to break a conclusion.", fr.Limit))
		}
	}
	out = append(out, fmt.Sprintf("Conclusions checked: the sign and the significance at 0.05 of each term%s.", r.checkpointWords()))
	out = append(out, fmt.Sprintf("Search: %s; %d row sets evaluated, %d left no fit.", fr.Searched, fr.Evaluated, fr.Skipped))
	return out
}

func (r *inspectResult) checkpointWords() string {
	if r.Fragility == nil && !r.Suggested {
		return ""
	}
	var parts []string
	for _, cp := range r.checkpoints {
		var at []string
		for _, c := range r.model.Columns() {
			if v, ok := cp.At[c]; ok {
				at = append(at, c+" = "+num4(v))
			}
		}
		parts = append(parts, fmt.Sprintf("the prediction at %s within %s", strings.Join(at, ", "), num4(cp.Tolerance)))
	}
	if len(parts) == 0 {
		return ""
	}
	return ", and " + strings.Join(parts, "; ")
}

// suggestionLines lists the proposed readings.
func (r *inspectResult) suggestionLines() []string {
	if len(r.Suggestions) == 0 {
		return []string{"No point of the operating region would improve the fit."}
	}
	var out []string
	for i, sg := range r.Suggestions {
		out = append(out, fmt.Sprintf("%d. %s", i+1, sg.Text))
	}
	out = append(out, "Proposals only: where and whether to measure is for qualified staff to decide.")
	return out
}

func rank(v engine.Verdict) int {
	switch {
	case v.Outlier && v.Influential:
		return 3
	case v.Influential:
		return 2
	case v.Outlier:
		return 1
	}
	return 0
}
