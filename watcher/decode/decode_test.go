package decode

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// decodeAll feeds in in one call with atEOF and returns the records.
func decodeAll(tb testing.TB, d *Decoder, in string) ([]Record, error) {
	tb.Helper()
	var recs []Record
	n, err := d.Feed([]byte(in), true, func(r Record) error {
		recs = append(recs, r)
		return nil
	})
	if err == nil && n != len(in) {
		tb.Fatalf("consumed %d of %d bytes at EOF", n, len(in))
	}
	return recs, err
}

// feedChunks feeds in split at the given cut points, keeping the
// unconsumed tail as a caller would, and says atEOF on the last call;
// bytes left unconsumed at EOF fail the test.
func feedChunks(tb testing.TB, d *Decoder, in []byte, cuts []int) ([]Record, error) {
	tb.Helper()
	recs, err := feedChunksNoFatal(d, in, cuts)
	if errors.Is(err, errLeftover) {
		tb.Fatal(err)
	}
	return recs, err
}

type wantRec struct {
	line   int
	values []float64
	text   []string
	err    error // sentinel
	errPos [2]int
}

func TestFeed(t *testing.T) {
	tests := []struct {
		name    string
		dialect Dialect
		num     []string
		text    []string
		in      string
		want    []wantRec
		wantErr error
	}{
		{name: "plain", num: []string{"a", "b"}, in: "a,b\n1,2\n3,4\n",
			want: []wantRec{{line: 2, values: []float64{1, 2}}, {line: 3, values: []float64{3, 4}}}},
		{name: "select order", num: []string{"b", "a"}, in: "a,b\n1,2\n",
			want: []wantRec{{line: 2, values: []float64{2, 1}}}},
		{name: "crlf", num: []string{"a", "b"}, in: "a,b\r\n1,2\r\n3,4",
			want: []wantRec{{line: 2, values: []float64{1, 2}}, {line: 3, values: []float64{3, 4}}}},
		{name: "bom", num: []string{"a"}, in: "\xEF\xBB\xBFa\n5\n",
			want: []wantRec{{line: 2, values: []float64{5}}}},
		{name: "blank and comment lines", dialect: Dialect{Comment: "#"}, num: []string{"a"},
			in:   "# made by rig 3\n\na\n\r\n# pause\n7\n",
			want: []wantRec{{line: 6, values: []float64{7}}}},
		{name: "quoted with newline and doubled quote", num: []string{"a"}, text: []string{"note"},
			in: "note,a\n\"say \"\"hi\"\"\nthere\",1\n2x,2\n",
			want: []wantRec{
				{line: 2, values: []float64{1}, text: []string{"say \"hi\"\nthere"}},
				{line: 4, values: []float64{2}, text: []string{"2x"}},
			}},
		{name: "embedded delimiter", num: []string{"a"}, text: []string{"t"}, in: "t,a\n\"x,y\",1\n",
			want: []wantRec{{line: 2, values: []float64{1}, text: []string{"x,y"}}}},
		{name: "decimal comma", dialect: Dialect{Delimiter: ';', DecimalComma: true}, num: []string{"a", "b"},
			in:   "a;b\n3,14;-2\n1.5;2\n",
			want: []wantRec{{line: 2, values: []float64{3.14, -2}}, {line: 3, err: ErrNotNumber, errPos: [2]int{3, 1}}}},
		{name: "trimmed header names", num: []string{" emf_mv"}, in: " t , emf_mv \n1, 2.5 \n",
			want: []wantRec{{line: 2, values: []float64{2.5}}}},
		{name: "not a number", num: []string{"x", "emf_mv"}, in: "x,emf_mv\n1,12..4\n",
			want: []wantRec{{line: 2, err: ErrNotNumber, errPos: [2]int{2, 3}}}},
		{name: "nan inf", num: []string{"a"}, in: "a\nNaN\n-Inf\ninfinity\n1e999\n",
			want: []wantRec{
				{line: 2, err: ErrNonFinite, errPos: [2]int{2, 1}},
				{line: 3, err: ErrNonFinite, errPos: [2]int{3, 1}},
				{line: 4, err: ErrNonFinite, errPos: [2]int{4, 1}},
				{line: 5, err: ErrNonFinite, errPos: [2]int{5, 1}},
			}},
		{name: "empty cell", num: []string{"a", "b"}, in: "a,b\n1,\n",
			want: []wantRec{{line: 2, err: ErrEmptyField, errPos: [2]int{2, 3}}}},
		{name: "ragged", num: []string{"a"}, in: "a,b\n1\n1,2,3\n",
			want: []wantRec{
				{line: 2, err: ErrFieldCount, errPos: [2]int{2, 2}},
				{line: 3, err: ErrFieldCount, errPos: [2]int{3, 5}},
			}},
		{name: "bare quote", num: []string{"a"}, in: "a,b\n1,x\"y\n2,3\n",
			want: []wantRec{{line: 2, err: ErrBareQuote, errPos: [2]int{2, 4}}, {line: 3, values: []float64{2}}}},
		{name: "text after closing quote", num: []string{"a"}, in: "a,b\n\"1\"x,2\n",
			want: []wantRec{{line: 2, err: ErrBareQuote, errPos: [2]int{2, 4}}}},
		{name: "unterminated quote", num: []string{"a"}, in: "a,b\n1,2\n3,\"abc\n4,5\n",
			want: []wantRec{{line: 2, values: []float64{1}}, {line: 3, err: ErrQuote, errPos: [2]int{3, 3}}}},
		{name: "binary", num: []string{"a"}, in: "a,b\n1,x\x00y\n2,\xff\n3,é\n",
			want: []wantRec{
				{line: 2, err: ErrBinary, errPos: [2]int{2, 4}},
				{line: 3, err: ErrBinary, errPos: [2]int{3, 3}},
				{line: 4, values: []float64{3}},
			}},
		{name: "error on second line of record", num: []string{"a", "b"}, in: "t,a,b\n\"x\ny\",1,zz\n",
			want: []wantRec{{line: 2, err: ErrNotNumber, errPos: [2]int{3, 6}}}},
		{name: "unknown column", num: []string{"nope"}, in: "a,b\n1,2\n", wantErr: ErrUnknownColumn},
		{name: "duplicate column", num: []string{"a"}, in: "a,a\n1,2\n", wantErr: ErrDuplicateColumn},
		{name: "duplicate unselected column is fine", num: []string{"b"}, in: "a,a,b\n1,2,3\n",
			want: []wantRec{{line: 2, values: []float64{3}}}},
		{name: "bad header", num: []string{"a"}, in: "a,\"b\n", wantErr: ErrHeader},
		{name: "bad dialect", dialect: Dialect{DecimalComma: true}, in: "a\n", wantErr: ErrDialect},
		{name: "negative zero and plus", num: []string{"a"}, in: "a\n-0\n+1.5\n",
			want: []wantRec{{line: 2, values: []float64{math.Copysign(0, -1)}}, {line: 3, values: []float64{1.5}}}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d := NewDecoder("feed.csv", tt.dialect)
			if err := d.Select(tt.num, tt.text); err != nil {
				t.Fatal(err)
			}
			recs, err := decodeAll(t, d, tt.in)
			if !errors.Is(err, tt.wantErr) {
				t.Fatalf("Feed error = %v, want %v", err, tt.wantErr)
			}
			if tt.wantErr != nil {
				return
			}
			if len(recs) != len(tt.want) {
				t.Fatalf("got %d records, want %d: %+v", len(recs), len(tt.want), recs)
			}
			for i, w := range tt.want {
				r := recs[i]
				if r.Line != w.line {
					t.Errorf("record %d: Line = %d, want %d", i, r.Line, w.line)
				}
				if w.err != nil {
					var re *RowError
					if !errors.As(r.Err, &re) || !errors.Is(re, w.err) {
						t.Errorf("record %d: Err = %v, want %v", i, r.Err, w.err)
						continue
					}
					if got := [2]int{re.Line, re.Column}; got != w.errPos {
						t.Errorf("record %d: error at %d:%d, want %d:%d (%v)", i, got[0], got[1], w.errPos[0], w.errPos[1], re)
					}
					continue
				}
				if r.Err != nil {
					t.Errorf("record %d: unexpected error %v", i, r.Err)
					continue
				}
				if !sameFloats(r.Values, w.values) {
					t.Errorf("record %d: Values = %v, want %v", i, r.Values, w.values)
				}
				if len(w.text) > 0 && !reflect.DeepEqual(r.Text, w.text) {
					t.Errorf("record %d: Text = %q, want %q", i, r.Text, w.text)
				}
			}
		})
	}
}

// sameFloats: the same values bit for bit (signed zeros and NaN
// payloads included).
func sameFloats(a, b []float64) bool {
	return slices.EqualFunc(a, b, func(x, y float64) bool { return math.Float64bits(x) == math.Float64bits(y) })
}

func TestRowErrorMessage(t *testing.T) {
	d := NewDecoder("feed.csv", Dialect{})
	if err := d.Select([]string{"emf_mv"}, nil); err != nil {
		t.Fatal(err)
	}
	in := "emf_mv,a,b,c,d,e,f,g,h,i,j,k,l\n" + strings.Repeat("1,2,3,4,5,6,7,8,9,1,2,3,4\n", 210) + "0,1,2,3,4,5,6,7,8,9,9,9,9\n"
	in = strings.Replace(in, "emf_mv,a,b,c,d,e,f,g,h,i,j,k,l", "a,b,c,d,e,f,emf_mv,g,h,i,j,k,l", 1)
	in += "1,2,3,4,5,6,12..4,8,9,1,2,3,4\n"
	recs, err := decodeAll(t, d, in)
	if err != nil {
		t.Fatal(err)
	}
	last := recs[len(recs)-1]
	want := `feed.csv:213:13: column "emf_mv" (field 7): not a number: "12..4"`
	if last.Err == nil || last.Err.Error() != want {
		t.Fatalf("error = %v, want %s", last.Err, want)
	}
	if last.Err.Field != 7 || last.Err.Name != "emf_mv" {
		t.Errorf("Field, Name = %d, %q", last.Err.Field, last.Err.Name)
	}
}

func TestColumnErrorListsHeader(t *testing.T) {
	d := NewDecoder("feed.csv", Dialect{})
	_ = d.Select([]string{"emf"}, nil)
	_, err := decodeAll(t, d, "t,emf_mv\n")
	var ce *ColumnError
	if !errors.As(err, &ce) || !errors.Is(err, ErrUnknownColumn) {
		t.Fatalf("err = %v", err)
	}
	if msg := err.Error(); !strings.Contains(msg, `"emf"`) || !strings.Contains(msg, `"emf_mv"`) || !strings.Contains(msg, `"t"`) {
		t.Errorf("message %q should name the column and the available ones", msg)
	}
	// After the header is known, Select checks at once.
	if err := d.Select([]string{"t"}, []string{"x"}); !errors.Is(err, ErrUnknownColumn) {
		t.Errorf("Select after header: %v", err)
	}
}

func TestPartialLastLine(t *testing.T) {
	d := NewDecoder("f.csv", Dialect{})
	_ = d.Select([]string{"a"}, nil)
	in := []byte("a\n1\n2")
	var got []Record
	n, err := d.Feed(in, false, func(r Record) error { got = append(got, r); return nil })
	if err != nil || n != 4 || len(got) != 1 {
		t.Fatalf("n=%d err=%v records=%d, want 4, nil, 1", n, err, len(got))
	}
	if off, line := d.Pos(); off != 4 || line != 2 {
		t.Errorf("Pos = %d,%d, want 4,2", off, line)
	}
	n, err = d.Feed(in[n:], true, func(r Record) error { got = append(got, r); return nil })
	if err != nil || n != 1 || len(got) != 2 || got[1].Values[0] != 2 || got[1].EndOffset != 5 || got[1].EndLine != 3 {
		t.Fatalf("at EOF: n=%d err=%v got=%+v", n, err, got)
	}
}

func TestResume(t *testing.T) {
	full := "a,b\n1,2\n3,4\n5,6\n"
	d := NewDecoder("f.csv", Dialect{})
	_ = d.Select([]string{"b"}, nil)
	recs, _ := decodeAll(t, d, full)
	// Resume after the second record.
	r := NewDecoder("f.csv", Dialect{})
	if err := r.SetHeader(d.Header(), d.HeaderLine()); err != nil {
		t.Fatal(err)
	}
	if err := r.Select([]string{"b"}, nil); err != nil {
		t.Fatal(err)
	}
	r.SetOffset(recs[0].EndOffset, recs[0].EndLine)
	got, err := decodeAll(t, r, full[recs[0].EndOffset:])
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 || got[0].Line != 3 || got[0].Values[0] != 4 || got[1].EndOffset != int64(len(full)) {
		t.Fatalf("resumed records %+v", got)
	}
}

func TestEmitErrorNotConsumed(t *testing.T) {
	d := NewDecoder("f.csv", Dialect{})
	_ = d.Select([]string{"a"}, nil)
	boom := errors.New("boom")
	calls := 0
	n, err := d.Feed([]byte("a\n1\n2\n"), true, func(r Record) error {
		calls++
		if r.Line == 3 {
			return boom
		}
		return nil
	})
	if !errors.Is(err, boom) || n != 4 {
		t.Fatalf("n=%d err=%v, want 4, boom", n, err)
	}
	if off, line := d.Pos(); off != 4 || line != 2 {
		t.Errorf("Pos = %d,%d after refused emit, want 4,2", off, line)
	}
}

func TestLineTooLong(t *testing.T) {
	const limit = 100
	in := "a,b\n1,2\n" + "3," + strings.Repeat("x", 10*limit) + "\n4,5\n"
	for _, chunk := range []int{7, 64, 1 << 20} {
		t.Run(strconv.Itoa(chunk), func(t *testing.T) {
			d := NewDecoder("f.csv", Dialect{})
			d.MaxRecordBytes = limit
			_ = d.Select([]string{"a"}, nil)
			var recs []Record
			var pending []byte
			peak := 0
			data := []byte(in)
			for off := 0; off < len(data) || len(pending) > 0; {
				end := min(off+chunk, len(data))
				pending = append(pending, data[off:end]...)
				off = end
				peak = max(peak, len(pending))
				n, err := d.Feed(pending, off == len(data), func(r Record) error { recs = append(recs, r); return nil })
				if err != nil {
					t.Fatal(err)
				}
				pending = pending[n:]
				if off == len(data) {
					break
				}
			}
			if len(recs) != 3 || !errors.Is(recs[1].Err, ErrLineTooLong) || recs[2].Line != 4 || recs[2].Values[0] != 4 {
				t.Fatalf("records %+v", recs)
			}
			if recs[1].Line != 3 || recs[1].EndLine != 3 || len(recs[1].Raw) > rawErrorLimit {
				t.Errorf("too-long record lines %d-%d, raw %d bytes", recs[1].Line, recs[1].EndLine, len(recs[1].Raw))
			}
			if peak > limit+1+chunk {
				t.Errorf("buffer grew to %d bytes", peak)
			}
		})
	}
}

// TestTenMegabyteLine checks a 10 MB line is refused with bounded memory.
func TestTenMegabyteLine(t *testing.T) {
	if testing.Short() {
		t.Skip("10 MB input")
	}
	line := bytes.Repeat([]byte("9"), 10<<20)
	d := NewDecoder("big.csv", Dialect{})
	_ = d.Select([]string{"a"}, nil)
	var recs []Record
	emit := func(r Record) error { recs = append(recs, r); return nil }
	src := append(append([]byte("a\n1\n"), line...), "\n2\n"...)
	var pending []byte
	const read = 64 << 10
	peak := 0
	for off := 0; ; {
		end := min(off+read, len(src))
		pending = append(pending, src[off:end]...)
		off = end
		peak = max(peak, cap(pending))
		n, err := d.Feed(pending, off == len(src), emit)
		if err != nil {
			t.Fatal(err)
		}
		pending = append(pending[:0], pending[n:]...)
		if off == len(src) {
			break
		}
	}
	if len(recs) != 3 || !errors.Is(recs[1].Err, ErrLineTooLong) || recs[2].Values[0] != 2 || recs[2].Line != 4 {
		t.Fatalf("got %d records: %v", len(recs), recs[1].Err)
	}
	if peak > 3*DefaultMaxRecordBytes {
		t.Errorf("buffer peak %d bytes for a 10 MB line", peak)
	}
}

// TestParseNumberMatchesStrconv compares the fast path with
// strconv.ParseFloat (the standard library as oracle) bit for bit.
func TestParseNumberMatchesStrconv(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	check := func(s string) {
		t.Helper()
		got, kind := parseNumber([]byte(s), false)
		want, err := strconv.ParseFloat(s, 64)
		if err != nil {
			if kind == numOK {
				t.Errorf("%q: got %v, strconv says %v", s, got, err)
			}
			return
		}
		if kind != numOK || math.Float64bits(got) != math.Float64bits(want) {
			t.Errorf("%q: got %v (kind %d), want %v", s, got, kind, want)
		}
	}
	for _, s := range []string{"0", "-0", "1", "+1", ".5", "5.", "-.5", "1e5", "1E-5", "123456789012345678901234567890",
		"0.1", "0.3", "9007199254740993", "9007199254740992", "1e22", "1e23", "1e-22", "1e-23", "4.9e-324", "1e-400",
		"1.7976931348623157e308", "2.2250738585072014e-308", "0.000000000000000000000000001", "00012.5000"} {
		check(s)
	}
	for range 200000 {
		var s string
		switch rng.IntN(4) {
		case 0:
			s = strconv.FormatFloat(rng.NormFloat64()*math.Pow(10, float64(rng.IntN(40)-20)), 'g', -1, 64)
		case 1:
			s = strconv.FormatFloat(rng.Float64()*1000, 'f', rng.IntN(12), 64)
		case 2:
			s = fmt.Sprintf("%d.%de%d", rng.Int64N(1<<62), rng.IntN(1000), rng.IntN(60)-30)
		default:
			s = strconv.FormatInt(rng.Int64()>>rng.IntN(60), 10)
		}
		check(s)
	}
}

func TestParseNumberRefuses(t *testing.T) {
	tests := []struct {
		in   string
		want numKind
	}{
		{"", numEmpty}, {"  ", numEmpty}, {"abc", numNotNumber}, {"0x1p3", numNotNumber}, {"1_000", numNotNumber},
		{"1e", numNotNumber}, {"1e+", numNotNumber}, {".", numNotNumber}, {"-", numNotNumber}, {"1.2.3", numNotNumber},
		{"NaN", numNonFinite}, {"+inf", numNonFinite}, {"-Infinity", numNonFinite}, {"1e999", numNonFinite},
		{"-1e400", numNonFinite}, {"12..4", numNotNumber}, {"1,5", numNotNumber},
	}
	for _, tt := range tests {
		if _, kind := parseNumber([]byte(tt.in), false); kind != tt.want {
			t.Errorf("parseNumber(%q) kind = %d, want %d", tt.in, kind, tt.want)
		}
	}
	if v, kind := parseNumber([]byte(" 1,5e1 "), true); kind != numOK || v != 15 {
		t.Errorf("decimal comma: %v %d", v, kind)
	}
	long := "1," + strings.Repeat("3", 80)
	if v, kind := parseNumber([]byte(long), true); kind != numOK || v != 1+1.0/3 {
		t.Errorf("long decimal comma: %v %d", v, kind)
	}
}

// TestChunking checks that any split of the input gives the records of a
// single Feed.
func TestChunking(t *testing.T) {
	in := "\xEF\xBB\xBF# c\r\nt,a,b\r\n\"x\r\ny\",1,2\n\n#z\nq,3,\"4\"\r\n\"bad\"x,5,6\nr,7\n" +
		strings.Repeat("s,1.5,2e3\n", 5) + "u,\"open"
	one := NewDecoder("f.csv", Dialect{Comment: "#"})
	_ = one.Select([]string{"a", "b"}, []string{"t"})
	want, err := decodeAll(t, one, in)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(3, 4))
	for range 500 {
		cuts := make([]int, rng.IntN(6))
		for i := range cuts {
			cuts[i] = rng.IntN(len(in) + 1)
		}
		sortInts(cuts)
		d := NewDecoder("f.csv", Dialect{Comment: "#"})
		_ = d.Select([]string{"a", "b"}, []string{"t"})
		got, err := feedChunks(t, d, []byte(in), cuts)
		if err != nil {
			t.Fatal(err)
		}
		if !sameRecords(got, want) {
			t.Fatalf("cuts %v:\n got %v\nwant %v", cuts, got, want)
		}
	}
}

func sortInts(a []int) {
	for i := 1; i < len(a); i++ {
		for j := i; j > 0 && a[j] < a[j-1]; j-- {
			a[j], a[j-1] = a[j-1], a[j]
		}
	}
}

func sameRecords(a, b []Record) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		x, y := a[i], b[i]
		if x.Line != y.Line || x.EndLine != y.EndLine || x.EndOffset != y.EndOffset || x.Raw != y.Raw ||
			!sameFloats(x.Values, y.Values) || !reflect.DeepEqual(x.Text, y.Text) {
			return false
		}
		if (x.Err == nil) != (y.Err == nil) {
			return false
		}
		if x.Err != nil && x.Err.Error() != y.Err.Error() {
			return false
		}
		if (x.Missing == nil) != (y.Missing == nil) || (x.Missing != nil && x.Missing.Error() != y.Missing.Error()) {
			return false
		}
	}
	return true
}
