package daemon

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/view"
)

// appendText appends s to the file at path.
func appendText(t testing.TB, path, s string) {
	t.Helper()
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if _, err := f.WriteString(s); err != nil {
		t.Fatal(err)
	}
}

// same compares two lists of views by their JSON (a NaN is null on both
// sides, which reflect.DeepEqual would call unequal).
func same(t testing.TB, got, want any) bool {
	t.Helper()
	g, err := json.Marshal(got)
	if err != nil {
		t.Fatal(err)
	}
	w, err := json.Marshal(want)
	if err != nil {
		t.Fatal(err)
	}
	return string(g) == string(w)
}

func tail[T any](s []T, n int) []T {
	if n <= 0 || n > len(s) {
		return s
	}
	return s[len(s)-n:]
}

// TestViewRecent runs the pipeline until a model has four fits and
// quarantined rows, then reads the history back through a second daemon
// on the same state (so nothing changes underneath): the latest-n reads
// must be exactly the tails of the paged lists.
func TestViewRecent(t *testing.T) {
	dir := t.TempDir()
	body := fmt.Sprintf(lineModel, "m", "in", false) + fmt.Sprintf(lineModel, "idle", "idle-in", false)
	c := testConfig(t, dir, body)
	rng := rand.New(rand.NewPCG(4, 4))
	file := filepath.Join(dir, "in", "a.csv")
	feed(t, file, rng, 0, 30, true) // lines 2..31
	r := start(t, c)
	fits := func() int {
		fs, err := r.d.store.Fits(context.Background(), "m", 0, 0)
		if err != nil {
			t.Fatal(err)
		}
		return len(fs)
	}
	waitFor(t, "the first fit", func() bool { return fits() >= 1 })
	// Each round adds rows, two of them unreadable, and waits for a refit.
	line := 31
	for round := 1; round <= 3; round++ {
		before := fits()
		var b strings.Builder
		for i := range 8 {
			line++
			switch i {
			case 2:
				fmt.Fprintf(&b, "%d,4.<b>x,3\n", line) // not a number in column x (byte 4 on)
			case 5:
				fmt.Fprintf(&b, "%d,2\n", line) // a field short
			default:
				x := float64(line%50) / 5
				fmt.Fprintf(&b, "%d,%g,%g\n", line, x, 2+0.5*x+0.1*rng.NormFloat64())
			}
		}
		appendText(t, file, b.String())
		waitFor(t, fmt.Sprintf("refit %d", round), func() bool { return fits() > before })
	}
	r.stop(t)

	d, err := New(context.Background(), c, Options{ReadOnly: true, Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	ctx := t.Context()
	src := d.View()
	rf, ok := src.(view.RecentFitter)
	if !ok {
		t.Fatal("the daemon's view is not a view.RecentFitter")
	}
	rq, ok := src.(view.RecentQuarantiner)
	if !ok {
		t.Fatal("the daemon's view is not a view.RecentQuarantiner")
	}

	allFits, err := src.Fits(ctx, "m", 0, 1000)
	if err != nil {
		t.Fatal(err)
	}
	if len(allFits) < 4 {
		t.Fatalf("%d fits, want at least 4", len(allFits))
	}
	for _, n := range []int{1, 3, len(allFits), len(allFits) + 100, 0, -1} {
		t.Run(fmt.Sprintf("RecentFits/n=%d", n), func(t *testing.T) {
			got, err := rf.RecentFits(ctx, "m", n)
			if err != nil {
				t.Fatal(err)
			}
			if want := tail(allFits, n); !same(t, got, want) {
				t.Errorf("RecentFits(%d) = %d fits (ids %v), want the last %d of %d (ids %v)",
					n, len(got), fitIDs(got), len(want), len(allFits), fitIDs(want))
			}
		})
	}
	if got, err := rf.RecentFits(ctx, "idle", 5); err != nil || len(got) != 0 {
		t.Errorf("RecentFits of a model without fits = %v, %v; want none", got, err)
	}
	if _, err := rf.RecentFits(ctx, "nope", 5); !errors.Is(err, view.ErrNotFound) {
		t.Errorf("RecentFits of an unknown model: %v, want view.ErrNotFound", err)
	}
	if _, err := src.Fits(ctx, "nope", 0, 5); !errors.Is(err, view.ErrNotFound) {
		t.Errorf("Fits of an unknown model: %v, want view.ErrNotFound (as RecentFits)", err)
	}

	allQ, err := src.Quarantine(ctx, "m", 0, 1000)
	if err != nil {
		t.Fatal(err)
	}
	if len(allQ) != 6 {
		t.Fatalf("%d quarantined rows, want 6: %+v", len(allQ), allQ)
	}
	// The first unreadable row, as the decoder placed it.
	if q := allQ[0]; q.Model != "m" || q.File != "a.csv" || q.Line != 34 || q.Column != 4 ||
		!strings.Contains(q.Reason, `"x"`) || q.Raw != "34,4.<b>x,3" {
		t.Errorf("first quarantined row = %+v, want a.csv:34:4, field x, its raw text", q)
	}
	for _, n := range []int{1, 4, 6, 50, 0, -2} {
		t.Run(fmt.Sprintf("RecentQuarantine/n=%d", n), func(t *testing.T) {
			got, err := rq.RecentQuarantine(ctx, "m", n)
			if err != nil {
				t.Fatal(err)
			}
			if want := tail(allQ, n); !same(t, got, want) {
				t.Errorf("RecentQuarantine(%d) = %+v\nwant %+v", n, got, want)
			}
		})
	}
	if got, err := rq.RecentQuarantine(ctx, "", 2); err != nil || !same(t, got, tail(allQ, 2)) {
		t.Errorf("RecentQuarantine of all models = %+v, %v; want m's last two", got, err)
	}
	for _, model := range []string{"idle", "nope"} {
		if got, err := rq.RecentQuarantine(ctx, model, 5); err != nil || len(got) != 0 {
			t.Errorf("RecentQuarantine(%q) = %v, %v; want none, as Quarantine gives", model, got, err)
		}
	}
	// Under a cancelled context the store's error comes through.
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := rf.RecentFits(cctx, "m", 3); !errors.Is(err, context.Canceled) {
		t.Errorf("RecentFits under a cancelled context: %v", err)
	}
}

func fitIDs(fs []view.FitView) []int64 {
	ids := make([]int64, len(fs))
	for i, f := range fs {
		ids[i] = f.ID
	}
	return ids
}
