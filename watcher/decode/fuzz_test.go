package decode

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// fuzzDialect picks a dialect from the fuzzer's mode byte.
func fuzzDialect(mode uint8) Dialect {
	switch mode % 4 {
	case 1:
		return Dialect{Delimiter: ';', DecimalComma: true, Comment: "#", Missing: []string{"-999"}}
	case 2:
		return Dialect{Delimiter: '\t', Comment: "//"}
	case 3:
		return Dialect{Comment: "#", Missing: []string{"NA", ""}}
	}
	return Dialect{}
}

// FuzzDecode checks that decoding never panics, that every bad row carries
// a line (>= 1) and column (>= 1), and that feeding the bytes in arbitrary
// chunks gives the same records, header and position as one Feed.
// Seeds: testdata/fuzz/FuzzDecode and the bad-input corpus.
func FuzzDecode(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join("..", "..", "testdata", "badinput", "*.csv"))
	for i, name := range files {
		data, err := os.ReadFile(name)
		if err == nil {
			f.Add(data, uint8(i), uint64(i))
		}
	}
	f.Add([]byte("a,b\n1,2\n"), uint8(0), uint64(1))
	f.Fuzz(func(t *testing.T, data []byte, mode uint8, seed uint64) {
		newDec := func() *Decoder {
			d := NewDecoder("fuzz.csv", fuzzDialect(mode))
			d.MaxRecordBytes = 48 // small, to reach the too-long path
			_ = d.Select([]string{"a", "b"}, []string{"c"})
			return d
		}
		one := newDec()
		var want []Record
		_, wantErr := one.Feed(data, true, func(r Record) error { want = append(want, r); return nil })
		for _, r := range append([]Record(nil), want...) {
			if r.Line < 1 || r.EndLine < r.Line {
				t.Fatalf("record lines %d-%d", r.Line, r.EndLine)
			}
			if r.Err != nil && (r.Err.Line < r.Line || r.Err.Line > r.EndLine || r.Err.Column < 1) {
				t.Fatalf("error %v outside record lines %d-%d", r.Err, r.Line, r.EndLine)
			}
			if m := r.Missing; m != nil && (r.Err != nil || m.Line < r.Line || m.Line > r.EndLine || m.Column < 1 || m.Name == "") {
				t.Fatalf("missing cell %v (error %v) outside record lines %d-%d or unnamed", m, r.Err, r.Line, r.EndLine)
			}
		}
		rng := rand.New(rand.NewPCG(seed, uint64(mode)))
		cuts := make([]int, rng.IntN(8))
		for i := range cuts {
			cuts[i] = rng.IntN(len(data) + 1)
		}
		sortInts(cuts)
		two := newDec()
		got, gotErr := feedChunksNoFatal(two, data, cuts)
		if (wantErr == nil) != (gotErr == nil) || (wantErr != nil && wantErr.Error() != gotErr.Error()) {
			t.Fatalf("one feed: %v; chunks %v: %v", wantErr, cuts, gotErr)
		}
		if !sameRecords(got, want) {
			t.Fatalf("chunks %v differ:\n got %+v\nwant %+v", cuts, got, want)
		}
		if wantErr == nil {
			o1, l1 := one.Pos()
			o2, l2 := two.Pos()
			if o1 != o2 || l1 != l2 || o1 != int64(len(data)) {
				t.Fatalf("Pos %d:%d vs %d:%d, len %d", o1, l1, o2, l2, len(data))
			}
		}
	})
}

// feedChunksNoFatal is feedChunks returning an error wrapping errLeftover
// for bytes left unconsumed at EOF.
func feedChunksNoFatal(d *Decoder, in []byte, cuts []int) ([]Record, error) {
	var recs []Record
	emit := func(r Record) error { recs = append(recs, r); return nil }
	var pending []byte
	prev := 0
	cuts = append(append([]int(nil), cuts...), len(in))
	for k, c := range cuts {
		c = max(c, prev)
		pending = append(pending, in[prev:c]...)
		prev = c
		n, err := d.Feed(pending, k == len(cuts)-1, emit)
		if err != nil {
			return recs, err
		}
		pending = append(pending[:0], pending[n:]...)
	}
	if len(pending) != 0 {
		return recs, fmt.Errorf("%d %w", len(pending), errLeftover)
	}
	return recs, nil
}

var errLeftover = errorString("bytes left unconsumed at EOF")

type errorString string

func (e errorString) Error() string { return string(e) }

// FuzzParseNumber checks the number path against strconv.ParseFloat (the
// standard library as oracle): a number it accepts must be bit-identical,
// and a plain decimal that strconv accepts (finitely) must be accepted.
func FuzzParseNumber(f *testing.F) {
	for _, s := range []string{"1.5e3", "-0.000123", "9007199254740993", "1e23", " 42 ", "1e-400", "123456789012345678901.5"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		v, kind := parseNumber([]byte(s), false)
		trimmed := strings.Trim(s, " \t")
		want, err := strconv.ParseFloat(trimmed, 64)
		if kind == numOK {
			if err != nil || math.Float64bits(v) != math.Float64bits(want) {
				t.Fatalf("parseNumber(%q) = %v, strconv: %v, %v", s, v, want, err)
			}
			return
		}
		plain := trimmed != "" && strings.Trim(trimmed, "0123456789+-.eE") == ""
		if plain && err == nil && !math.IsInf(want, 0) {
			t.Fatalf("parseNumber(%q) refused (kind %d), strconv reads %v", s, kind, want)
		}
	})
}
