package main

// plumb inspect: fit one CSV file once and print every row's leverage and
// influence, as a table for people, as JSON for programs, or as CSV.

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"

	"plumb/cmd/plumb/internal/config"
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
name, optionally raised to a power 1-20 with "^", or log(name). Names that
are not plain identifiers (letters, digits, "_", ".") are double-quoted:
  --terms "emf_mv, emf_mv^2, log(\"flow rate (l/min)\"), emf_mv*bath_c"
An intercept is included unless --no-intercept is given. Columns the model
does not use, text columns included, are ignored.

The file's dialect takes the flags the config's keys are (same names
with '-' for '_', same values): --delimiter, --decimal-comma, --comment,
--missing, --id-column, --filter. A file saved by a spreadsheet with a
decimal comma reads with --delimiter ";" --decimal-comma.

A row with a --missing text (e.g. NA, or "" for an empty cell) in a
column the model uses is left out and counted as missing ("missing" in
json), not listed as unreadable; one in a column the model does not use
costs nothing. Rows that cannot be used (a field that is not a number, a
wrong number of fields, log of a value <= 0, ...) are left out of the fit
and listed with file:line:column, the column's name and its position, and
the reason: on standard error for the table and csv formats, in a
"rejected" array for json. --strict refuses the whole file instead.

Rows are named by their data row (counting every record after the header,
unreadable ones included) and by the file line on which they start, and
with --id-column by that column's text (a serial number, a sample id):
"id" in json and csv, the column's name in the table.

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

--at COL=X gives the fitted value there with its standard error, the
confidence interval of the mean and the prediction interval of a new
reading (or of the mean of --readings-averaged M readings), at --level.
--reading Y converts a reading back: the predictor value it stands for,
its standard uncertainty and the values consistent with it, saying so
when there is no single answer or the interval reaches the end of the
calibrated range. --unit COL=UNIT labels a column's values. The json
format has them as "predictions" and "inverse"; with --format csv they
go to standard error in words.

` + inspectFormDescription + `

Exit status: 0 when the report was written, 1 when the file cannot be
read or fitted (or a row is bad under --strict), 2 for a bad command line.

--leave-out LIST leaves out of the fit the rows a list names (rows that
qualified staff have set aside), one a line: a data row number or
FILE:LINE, then an optional note; "#" starts a comment. They are listed as
left out: in a "left_out" array for json, on standard error otherwise, and
counted in the table's heading. The file is not changed.

plumb flags; it never deletes or alters a measurement. Decisions to
keep, correct, re-measure or exclude a value stay with qualified staff
under local quality procedures and codes.`

// inspectOptions are the parsed flags of one inspect run.
type inspectOptions struct {
	file        string
	response    string
	terms       string
	noIntercept bool
	format      string
	delimiter   byte
	dialect     decode.Dialect // --delimiter, --decimal-comma, --comment, --missing
	idColumn    string         // --id-column: the column that labels each row
	filter      *config.Filter // --filter COLUMN=VALUE
	strict      bool
	cutoffs     engine.Cutoffs

	fragility   bool
	maxRemoved  int
	checkpoints []engine.Checkpoint
	suggest     bool
	region      engine.Region // columns given with --region
	replicates  int
	leaveOut    string // --leave-out list

	calibOptions // --at, --reading, --unit (inspect_calib.go)

	weights   string // --weights as given
	weighting engine.Weighting
	poolAlpha float64
	formLevel float64
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
			fmt.Fprintf(e.stderr, "%s: row left out: %s\n", r.where(), r.why())
		}
	}
	if opt.leaveOut != "" {
		if err := leaveOut(ds, opt.leaveOut); err != nil {
			return &exitError{code: 1, err: err}
		}
		if opt.format != "json" {
			for _, r := range ds.leftOut {
				fmt.Fprintf(e.stderr, "%s: row %d left out (%s)%s\n", r.where(), r.Row, r.Entry, noteSuffix(r.Note))
			}
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
		for _, l := range res.formLines() {
			fmt.Fprintln(e.stderr, "form:", l)
		}
		return res.answersTo(e.stderr)
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
	fs.StringVar(&delim, "delimiter", ",", "field delimiter, one `character` (tab or \\t for tab); as the config's delimiter")
	var (
		decimalComma bool
		comment      string
		missing      []string
		filters      []string
	)
	fs.BoolVar(&decimalComma, "decimal-comma", false, "numbers are written with a decimal comma (\"3,14\"); needs another --delimiter, usually \";\"")
	fs.StringVar(&comment, "comment", "", "skip lines starting with this `prefix` (e.g. \"#\")")
	fs.Func("missing", "a cell `text` that means no value (\"NA\", \"\" for an empty cell); may be repeated. A row with one in a column the model uses is left out and counted as missing", func(v string) error {
		missing = append(missing, v)
		return nil
	})
	fs.StringVar(&opt.idColumn, "id-column", "", "a `column` whose text labels each row (serial number, sample id) in every output")
	fs.Func("filter", "keep only rows whose column holds the value, `COLUMN=VALUE`; repeat with the same column for more values", func(v string) error {
		filters = append(filters, v)
		return nil
	})
	fs.BoolVar(&opt.strict, "strict", false, "refuse the file (exit 1) if any row cannot be used")
	fs.Float64Var(&alpha, "alpha", def.Alpha, "significance `level` of the outlier test")
	fs.StringVar(&family, "cutoffs", familyName(def.Family), "cutoff `family`: absolute or size_adjusted")
	fs.StringVar(&cookRule, "cook-rule", cookRuleName(def.Cook), "Cook's distance `rule`: f_median (the median of F(p, n-p)) or one (D > 1)")
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
	calib := addCalibFlags(fs)
	fs.StringVar(&opt.leaveOut, "leave-out", "", "leave out the rows a `LIST` file names, one a line: a data row number or FILE:LINE, then an optional note; they are listed in the output")
	checkForm := formFlags(fs, &opt)
	pos, err := parseFlags(fs, args)
	if err != nil {
		return nil, err
	}
	if err := checkForm(); err != nil {
		return nil, err
	}
	bad := func(format string, a ...any) error {
		return usageErr("inspect", fmt.Sprintf(format, a...))
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
	if err := config.CheckDialect(delim, decimalComma, comment, missing); err != nil {
		var de *config.DialectError
		if errors.As(err, &de) {
			return nil, bad("--%s: %v", strings.ReplaceAll(de.Key, "_", "-"), de.Err)
		}
		return nil, bad("%v", err)
	}
	opt.delimiter, _ = config.ParseDelimiter(delim)
	opt.dialect = decode.Dialect{Delimiter: opt.delimiter, Comment: comment, DecimalComma: decimalComma, Missing: missing}
	opt.idColumn = unquoteName(strings.TrimSpace(opt.idColumn))
	for _, v := range filters {
		k := strings.IndexByte(v, '=')
		if k <= 0 {
			return nil, bad("--filter %q: want COLUMN=VALUE", v)
		}
		col := unquoteName(strings.TrimSpace(v[:k]))
		val := strings.TrimSpace(v[k+1:])
		if opt.filter == nil {
			opt.filter = &config.Filter{Column: col}
		} else if opt.filter.Column != col {
			return nil, bad("--filter %q: one filter column at a time (already %q), as in the config", v, opt.filter.Column)
		}
		opt.filter.Values = append(opt.filter.Values, val)
	}
	if !(alpha > 0 && alpha < 1) {
		return nil, bad("--alpha %v: want a level strictly between 0 and 1", alpha)
	}
	c := def
	c.Alpha = alpha
	var ok, old bool
	if c.Family, old, ok = config.CutoffWords.Parse(family); !ok {
		return nil, bad("--cutoffs %q: want %s", family, config.CutoffWords.Choices())
	} else if old {
		fmt.Fprintf(e.stderr, "plumb inspect: note: --cutoffs %s is the old spelling; write --cutoffs %s, as the config's cutoffs key does\n", family, familyName(c.Family))
	}
	if c.Cook, old, ok = config.CookRuleWords.Parse(cookRule); !ok {
		return nil, bad("--cook-rule %q: want %s", cookRule, config.CookRuleWords.Choices())
	} else if old {
		fmt.Fprintf(e.stderr, "plumb inspect: note: --cook-rule %s is the old spelling; write --cook-rule %s, as the config's cook_rule key does\n", cookRule, cookRuleName(c.Cook))
	}
	if c.Test, _, ok = config.OutlierTestWords.Parse(outlierTs); !ok {
		return nil, bad("--outlier-test %q: want %s", outlierTs, config.OutlierTestWords.Choices())
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
	if err := calib.parse(&opt); err != nil {
		return nil, bad("%v", err)
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

// The words of the judgement flags are the config's (config.CutoffWords
// and the others).
func familyName(f engine.Family) string           { return config.CutoffWords.Name(f) }
func cookRuleName(r engine.CookRule) string       { return config.CookRuleWords.Name(r) }
func outlierTestName(t engine.OutlierTest) string { return config.OutlierTestWords.Name(t) }

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
	m.Weight = opt.weighting
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
