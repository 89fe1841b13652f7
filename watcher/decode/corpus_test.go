package decode

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

const corpusDir = "../../testdata/badinput"

// causeNames maps the manifest's cause names to sentinels.
var causeNames = map[string]error{
	"field_count":      ErrFieldCount,
	"not_number":       ErrNotNumber,
	"non_finite":       ErrNonFinite,
	"empty_field":      ErrEmptyField,
	"bare_quote":       ErrBareQuote,
	"quote":            ErrQuote,
	"line_too_long":    ErrLineTooLong,
	"binary":           ErrBinary,
	"header":           ErrHeader,
	"unknown_column":   ErrUnknownColumn,
	"duplicate_column": ErrDuplicateColumn,
}

func causeName(err error) string {
	// ErrHeader wraps the row cause too: report it first.
	if errors.Is(err, ErrHeader) {
		return "header"
	}
	for name, s := range causeNames {
		if errors.Is(err, s) {
			return name
		}
	}
	return "unknown(" + err.Error() + ")"
}

type corpusCase struct {
	file     string
	dialect  Dialect
	numeric  []string
	text     []string
	header   int
	accepted string
	rejected string
	fatal    string
}

func parseDialect(tb testing.TB, s string) Dialect {
	tb.Helper()
	var d Dialect
	if s == "-" {
		return d
	}
	for _, f := range strings.Fields(s) {
		k, v, _ := strings.Cut(f, "=")
		switch k {
		case "delim":
			d.Delimiter = map[string]byte{"comma": ',', "semicolon": ';', "tab": '\t'}[v]
		case "comment":
			d.Comment = v
		case "decimalcomma":
			d.DecimalComma = true
		default:
			tb.Fatalf("manifest: unknown dialect key %q", k)
		}
	}
	return d
}

func list(s string) []string {
	if s == "-" {
		return nil
	}
	return strings.Split(s, "|")
}

func readManifest(tb testing.TB) []corpusCase {
	tb.Helper()
	f, err := os.Open(filepath.Join(corpusDir, "MANIFEST.tsv"))
	if err != nil {
		tb.Fatal(err)
	}
	defer f.Close()
	var cases []corpusCase
	sc := bufio.NewScanner(f)
	first := true
	for sc.Scan() {
		line := sc.Text()
		if strings.HasPrefix(line, "#") || line == "" {
			continue
		}
		if first { // column names
			first = false
			continue
		}
		c := strings.Split(line, "\t")
		if len(c) != 8 {
			tb.Fatalf("manifest line %q: %d columns, want 8", line, len(c))
		}
		h, err := strconv.Atoi(c[4])
		if err != nil {
			tb.Fatal(err)
		}
		cases = append(cases, corpusCase{file: c[0], dialect: parseDialect(tb, c[1]), numeric: list(c[2]), text: list(c[3]),
			header: h, accepted: c[5], rejected: c[6], fatal: c[7]})
	}
	if err := sc.Err(); err != nil {
		tb.Fatal(err)
	}
	return cases
}

// outcome decodes data and renders it in the manifest's notation. The
// data is fed twice: once without atEOF (the partial last line must stay
// unconsumed) and then the rest with atEOF.
func outcome(tb testing.TB, c corpusCase, data []byte) (header int, accepted, rejected, fatal string) {
	tb.Helper()
	d := NewDecoder(c.file, c.dialect)
	if err := d.Select(c.numeric, c.text); err != nil {
		tb.Fatal(err)
	}
	var acc, rej []string
	emit := func(r Record) error {
		if r.Err != nil {
			if r.Err.File != c.file || r.Err.Line < 1 || r.Err.Column < 1 {
				tb.Errorf("%s: badly positioned error %+v", c.file, r.Err)
			}
			rej = append(rej, fmt.Sprintf("%d:%d:%s", r.Err.Line, r.Err.Column, causeName(r.Err)))
			return nil
		}
		if len(r.Values) != len(c.numeric) || len(r.Text) != len(c.text) {
			tb.Errorf("%s:%d: %d values, %d texts", c.file, r.Line, len(r.Values), len(r.Text))
		}
		acc = append(acc, strconv.Itoa(r.Line))
		return nil
	}
	fatal = "-"
	n, err := d.Feed(data, false, emit)
	if err == nil {
		if rest := data[n:]; bytes.Count(rest, []byte{'\n'}) > 0 && len(rest) <= DefaultMaxRecordBytes {
			// Only an incomplete record (maybe with quoted newlines) may remain.
			if !bytes.Contains(rest, []byte{'"'}) {
				tb.Errorf("%s: %d bytes with newlines left unconsumed before EOF", c.file, len(rest))
			}
		}
		var m int
		m, err = d.Feed(data[n:], true, emit)
		if err == nil && n+m != len(data) {
			tb.Errorf("%s: consumed %d of %d bytes", c.file, n+m, len(data))
		}
	}
	if err != nil {
		fatal = causeName(err)
		var re *RowError
		var ce *ColumnError
		if !errors.As(err, &re) && !errors.As(err, &ce) {
			tb.Errorf("%s: fatal error %v is neither a RowError nor a ColumnError", c.file, err)
		}
		if !strings.HasPrefix(err.Error(), c.file+":") {
			tb.Errorf("%s: error %q does not name the file", c.file, err)
		}
	}
	join := func(s []string, sep string) string {
		if len(s) == 0 {
			return "-"
		}
		return strings.Join(s, sep)
	}
	return len(d.Header()), join(acc, ","), join(rej, " "), fatal
}

func TestCorpus(t *testing.T) {
	cases := readManifest(t)
	if len(cases) < 25 {
		t.Fatalf("manifest lists %d files, want at least 25", len(cases))
	}
	files, _ := filepath.Glob(filepath.Join(corpusDir, "*.csv"))
	if len(files) != len(cases) {
		t.Errorf("%d corpus files but %d manifest lines", len(files), len(cases))
	}
	for _, c := range cases {
		t.Run(c.file, func(t *testing.T) {
			data, err := os.ReadFile(filepath.Join(corpusDir, c.file))
			if err != nil {
				t.Fatal(err)
			}
			h, acc, rej, fatal := outcome(t, c, data)
			if h != c.header || acc != c.accepted || rej != c.rejected || fatal != c.fatal {
				t.Errorf("got\theader=%d accepted=%s rejected=%s fatal=%s\nwant\theader=%d accepted=%s rejected=%s fatal=%s",
					h, acc, rej, fatal, c.header, c.accepted, c.rejected, c.fatal)
			}
		})
	}
	// The 10 MB line is generated here rather than committed.
	t.Run("huge_line.csv", func(t *testing.T) {
		if testing.Short() {
			t.Skip("10 MB input")
		}
		data := append([]byte("x,y\n1,2\n3,"), bytes.Repeat([]byte("4"), 10<<20)...)
		data = append(data, "\n5,6\n"...)
		c := corpusCase{file: "huge_line.csv", numeric: []string{"x", "y"}}
		h, acc, rej, fatal := outcome(t, c, data)
		want := fmt.Sprintf("3:%d:line_too_long", DefaultMaxRecordBytes+1)
		if h != 2 || acc != "2,4" || rej != want || fatal != "-" {
			t.Errorf("got header=%d accepted=%s rejected=%s fatal=%s", h, acc, rej, fatal)
		}
	})
}
