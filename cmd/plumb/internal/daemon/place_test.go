package daemon

import (
	"context"
	"os"
	"path/filepath"
	"testing"
)

// TestQuarantinePlaces: rows the daemon sets aside after decoding (a log
// of a value <= 0, a time that does not parse) are placed as the decoder
// places its own: file:line:column, the column's name and its position.
func TestQuarantinePlaces(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "m"
folder = "in"
response = "y"
terms = ["log(x)"]
time_column = "at"
[model.fragility]
enabled = false
`)
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	src := "at,y,x\n" +
		"2026-03-14T09:00:00Z,1.0,1\n" +
		"2026-03-14T09:01:00Z,1.7,2\n" +
		"2026-03-14T09:02:00Z,2.1,-3\n" + // line 4: log of -3, x is field 3 at byte 26
		"14.03.2026 09:03,2.4,4\n" + // line 5: not RFC 3339
		"2026-03-14T09:04:00Z,2.6,5\n"
	if err := os.WriteFile(filepath.Join(dir, "in", "a.csv"), []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	r := start(t, c)
	defer r.stop(t)
	ctx := context.Background()
	waitFor(t, "two quarantined rows", func() bool {
		n, err := r.d.store.CountQuarantined(ctx, "m")
		return err == nil && n == 2
	})
	qs, err := r.d.store.Quarantined(ctx, "m", 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	want := []struct {
		line, col int
		prefix    string
	}{
		{4, 26, `a.csv:4:26: column "x" (field 3): log of a non-positive value`},
		{5, 1, `a.csv:5:1: column "at" (field 1): not a time in layout`},
	}
	for i, w := range want {
		q := qs[i]
		if q.Line != w.line || q.Column != w.col || len(q.Reason) < len(w.prefix) || q.Reason[:len(w.prefix)] != w.prefix {
			t.Errorf("quarantined %d: line %d, column %d, %q; want %d, %d, %q...", i, q.Line, q.Column, q.Reason, w.line, w.col, w.prefix)
		}
		if testing.Verbose() {
			t.Log(q.Reason)
		}
	}
}
