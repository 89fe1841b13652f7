package demo

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path"
	"path/filepath"
	"strings"
	"time"
)

// DefaultInterval is the time between two readings at speed 1.
const DefaultInterval = 2 * time.Second

// FeedPath is the feed file relative to the demo directory, with '/'.
var FeedPath = path.Join(Folder, FeedName)

// Line is one line the Writer has finished writing.
type Line struct {
	// File is the feed relative to the demo directory, with '/'; Path is
	// the file's path on disk.
	File string
	Path string
	// Number is the 1-based line number (the header is line 1).
	Number int
	// Text is the line without its newline.
	Text string
	// Reading is the planted reading, nil for the header.
	Reading *Reading
	// Partial is true when the line was written in two pieces.
	Partial bool
	// At is when the line was completed.
	At time.Time
}

// Writer simulates the bench's instrument. The zero value writes Scenario()
// with DefaultInterval; its fields may be set before Run.
type Writer struct {
	// Readings to write; nil means Scenario().
	Readings []Reading
	// Interval between readings at speed 1; 0 means DefaultInterval.
	Interval time.Duration
	// PartialShare is the share of lines written in two pieces, decided by
	// a seeded stream so every run splits the same lines; 0 means 0.2,
	// negative means none.
	PartialShare float64
	// Now stamps measured_at; nil means time.Now.
	Now func() time.Time

	// afterHalf, when set (tests), runs after the first piece of a split
	// line is written.
	afterHalf func(path string)
}

// ErrSpeed is returned by Run for a speed that is not a positive number.
var ErrSpeed = errors.New("demo: speed must be a positive number")

// Run writes the scenario with a zero Writer; see Writer.Run.
func Run(ctx context.Context, dir string, speed float64, onLine func(Line)) error {
	var w Writer
	return w.Run(ctx, dir, speed, onLine)
}

// Run creates dir/incoming/bench-b/feed-2026-12.csv, writes the header and
// then each reading, one every Interval/speed. A split line is written as
// its first half, then (after an eighth of the interval) the rest with the
// newline. onLine, if not nil, is called after each completed line, from
// Run's goroutine. Run refuses to touch a feed that already exists (the
// line numbers of the scenario would no longer hold). It returns ctx's
// error when ctx ends first, leaving what it wrote so far.
func (w *Writer) Run(ctx context.Context, dir string, speed float64, onLine func(Line)) error {
	if !(speed > 0) || math.IsInf(speed, 0) {
		return fmt.Errorf("%w, got %v", ErrSpeed, speed)
	}
	readings := w.Readings
	if readings == nil {
		readings = Scenario()
	}
	interval := w.Interval
	if interval <= 0 {
		interval = DefaultInterval
	}
	step := time.Duration(float64(interval) / speed)
	share := w.PartialShare
	if share == 0 {
		share = 0.2
	}
	now := w.Now
	if now == nil {
		now = time.Now
	}
	split := rand.New(rand.NewPCG(seed1, 99))

	p := filepath.Join(dir, filepath.FromSlash(FeedPath))
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	f, err := os.OpenFile(p, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return fmt.Errorf("demo: the feed must not exist yet (use a fresh directory): %w", err)
	}
	defer f.Close()

	emit := func(n int, text string, r *Reading, partial bool) {
		if onLine != nil {
			onLine(Line{File: FeedPath, Path: p, Number: n, Text: text, Reading: r, Partial: partial, At: now()})
		}
	}
	header := strings.Join(Header, ",")
	if _, err := f.WriteString(header + "\n"); err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	emit(1, header, nil, false)

	for i := range readings {
		if err := sleep(ctx, step); err != nil {
			return err
		}
		r := &readings[i]
		text := strings.Join(r.Fields(now().UTC().Format(time.RFC3339)), ",")
		partial := share > 0 && split.Float64() < share
		if partial {
			half := len(text) / 2
			if _, err := f.WriteString(text[:half]); err != nil {
				return fmt.Errorf("demo: %w", err)
			}
			if w.afterHalf != nil {
				w.afterHalf(p)
			}
			if err := sleep(ctx, step/8); err != nil {
				return err
			}
			if _, err := f.WriteString(text[half:] + "\n"); err != nil {
				return fmt.Errorf("demo: %w", err)
			}
		} else if _, err := f.WriteString(text + "\n"); err != nil {
			return fmt.Errorf("demo: %w", err)
		}
		emit(i+2, text, r, partial)
	}
	return f.Close()
}

// sleep waits d or until ctx ends.
func sleep(ctx context.Context, d time.Duration) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	if d <= 0 {
		return nil
	}
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return ctx.Err()
	case <-t.C:
		return nil
	}
}
