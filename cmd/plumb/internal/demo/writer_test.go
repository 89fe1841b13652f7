package demo

import (
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
)

// fastSpeed makes a reading interval of a few microseconds.
const fastSpeed = 1e6

var fixedNow = func() time.Time { return time.Date(2026, 12, 1, 22, 0, 0, 0, time.UTC) }

func TestWriterWritesTheScenario(t *testing.T) {
	dir := t.TempDir()
	var lines []Line
	w := Writer{Now: fixedNow}
	if err := w.Run(context.Background(), dir, fastSpeed, func(l Line) { lines = append(lines, l) }); err != nil {
		t.Fatal(err)
	}
	sc := Scenario()
	if len(lines) != len(sc)+1 {
		t.Fatalf("%d lines reported, want header + %d readings", len(lines), len(sc))
	}
	raw, err := os.ReadFile(filepath.Join(dir, "incoming", "bench-b", "feed-2026-12.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.HasSuffix(raw, []byte("\n")) {
		t.Errorf("the feed does not end with a newline")
	}
	recs, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil {
		t.Fatalf("the feed is not valid CSV: %v", err)
	}
	if got := strings.Join(recs[0], ","); got != "measured_at,sensor,ref_temp_c,emf_mv" {
		t.Errorf("header %q", got)
	}
	if len(recs) != len(sc)+1 {
		t.Fatalf("the feed has %d records, want %d", len(recs), len(sc)+1)
	}
	fileLines := strings.Split(strings.TrimSuffix(string(raw), "\n"), "\n")
	partial := 0
	for i, l := range lines {
		if l.Number != i+1 {
			t.Errorf("line %d reported as number %d", i+1, l.Number)
		}
		if l.File != "incoming/bench-b/feed-2026-12.csv" {
			t.Errorf("line %d: File %q", l.Number, l.File)
		}
		if l.Text != fileLines[i] {
			t.Errorf("line %d reported %q, the file holds %q", l.Number, l.Text, fileLines[i])
		}
		if i == 0 {
			if l.Reading != nil {
				t.Errorf("the header carries a reading")
			}
			continue
		}
		r := l.Reading
		if r == nil || r.Index != i-1 || r.Line() != l.Number {
			t.Fatalf("line %d: reading %+v", l.Number, r)
		}
		rec := recs[i]
		if rec[0] != "2026-12-01T22:00:00Z" || rec[1] != r.Sensor {
			t.Errorf("line %d: %q", l.Number, rec)
		}
		// The file holds exactly the values the scenario (and its proof) uses.
		temp, err1 := strconv.ParseFloat(rec[2], 64)
		emf, err2 := strconv.ParseFloat(rec[3], 64)
		if err1 != nil || err2 != nil || temp != r.RefTempC || emf != r.EmfMV {
			t.Errorf("line %d: file %q, scenario %v %v", l.Number, rec, r.RefTempC, r.EmfMV)
		}
		if l.Partial {
			partial++
		}
	}
	// About one line in five is written in two pieces.
	if n := len(sc); partial < n/10 || partial > n/2 {
		t.Errorf("%d of %d lines written in two pieces, want about a fifth", partial, n)
	}
}

func TestWriterPartialLine(t *testing.T) {
	dir := t.TempDir()
	var seen []string
	w := Writer{Now: fixedNow, PartialShare: 1, Readings: Scenario()[:3]}
	w.afterHalf = func(p string) {
		b, err := os.ReadFile(p)
		if err != nil {
			t.Error(err)
			return
		}
		seen = append(seen, string(b))
	}
	var lines []Line
	if err := w.Run(context.Background(), dir, fastSpeed, func(l Line) { lines = append(lines, l) }); err != nil {
		t.Fatal(err)
	}
	if len(seen) != 3 {
		t.Fatalf("%d split lines seen, want 3", len(seen))
	}
	for i, s := range seen {
		// The file ends mid-line: the complete lines so far, then half of
		// the next one and no newline.
		last := s[strings.LastIndexByte(s, '\n')+1:]
		want := lines[i+1].Text
		if last == "" || len(last) != len(want)/2 || !strings.HasPrefix(want, last) {
			t.Errorf("split %d: file ends with %q, want the first half of %q", i, last, want)
		}
		if got := strings.Count(s, "\n"); got != i+1 {
			t.Errorf("split %d: %d complete lines before the split, want %d", i, got, i+1)
		}
		if !lines[i+1].Partial {
			t.Errorf("line %d not reported as partial", lines[i+1].Number)
		}
	}
}

func TestWriterNoPartial(t *testing.T) {
	dir := t.TempDir()
	w := Writer{PartialShare: -1, Readings: Scenario()[:10]}
	w.afterHalf = func(string) { t.Error("a line was split with PartialShare < 0") }
	if err := w.Run(context.Background(), dir, fastSpeed, nil); err != nil {
		t.Fatal(err)
	}
}

func TestWriterErrors(t *testing.T) {
	t.Run("speed", func(t *testing.T) {
		for _, s := range []float64{0, -1} {
			if err := Run(context.Background(), t.TempDir(), s, nil); !errors.Is(err, ErrSpeed) {
				t.Errorf("speed %v: err %v, want ErrSpeed", s, err)
			}
		}
	})
	t.Run("feed exists", func(t *testing.T) {
		dir := t.TempDir()
		w := Writer{Readings: Scenario()[:1]}
		if err := w.Run(context.Background(), dir, fastSpeed, nil); err != nil {
			t.Fatal(err)
		}
		err := w.Run(context.Background(), dir, fastSpeed, nil)
		if !errors.Is(err, fs.ErrExist) {
			t.Errorf("second run: err %v, want fs.ErrExist", err)
		}
	})
	t.Run("cancelled", func(t *testing.T) {
		dir := t.TempDir()
		ctx, cancel := context.WithCancel(context.Background())
		n := 0
		err := Run(ctx, dir, fastSpeed, func(l Line) {
			n++
			if l.Number == 5 {
				cancel()
			}
		})
		if !errors.Is(err, context.Canceled) {
			t.Fatalf("err %v, want context.Canceled", err)
		}
		if n != 5 {
			t.Errorf("%d lines after cancelling at line 5", n)
		}
		raw, err := os.ReadFile(filepath.Join(dir, filepath.FromSlash(FeedPath)))
		if err != nil {
			t.Fatal(err)
		}
		if got := strings.Count(string(raw), "\n"); got != 5 {
			t.Errorf("the feed holds %d lines, want the 5 written", got)
		}
	})
}

// TestWriterPacing checks the interval arithmetic at a speed that keeps
// the test short; it bounds the time from below only, since a busy machine
// may be slower but never faster.
func TestWriterPacing(t *testing.T) {
	w := Writer{Readings: Scenario()[:5], Interval: 100 * time.Millisecond, PartialShare: -1}
	start := time.Now()
	if err := w.Run(context.Background(), t.TempDir(), 10, nil); err != nil {
		t.Fatal(err)
	}
	if el := time.Since(start); el < 50*time.Millisecond {
		t.Errorf("5 readings at 10 ms each took %v, want at least 50ms", el)
	}
}
