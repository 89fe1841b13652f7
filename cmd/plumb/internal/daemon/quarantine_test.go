package daemon

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumb/store"
)

// TestQuarantineKeepsWhereAndWhen: an unreadable number, a time that does
// not parse and a value outside a log term's domain are each kept aside
// with the time they arrived and the column's name, position and byte
// column, and the reason says where too.
func TestQuarantineKeepsWhereAndWhen(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "m"
folder = "in"
response = "y"
terms = ["log(x)"]
time_column = "at"
`)
	var b strings.Builder
	b.WriteString("id,at,x,y\n")
	for i := 1; i <= 12; i++ {
		fmt.Fprintf(&b, "%d,2026-12-04T10:%02d:00Z,%d,%g\n", i, i, i, 1+0.5*float64(i))
	}
	b.WriteString("13,2026-12-04T10:13:00Z,1x3,7\n") // line 14: x not a number
	b.WriteString("14,yesterday,14,8\n")             // line 15: at not a time
	b.WriteString("15,2026-12-04T10:15:00Z,-1,8\n")  // line 16: log of a negative x
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "in", "feed.csv"), []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	before := time.Now().Add(-time.Second)
	r := start(t, c)
	var qs []store.QuarantineRow
	waitFor(t, "three rows quarantined", func() bool {
		var err error
		qs, err = r.d.store.Quarantined(context.Background(), "m", 0, 0)
		return err == nil && len(qs) == 3
	})
	want := []struct {
		line, col, field int
		name, reason     string
	}{
		{14, 25, 3, "x", `feed.csv:14:25: column "x" (field 3): not a number: "1x3"`},
		{15, 4, 2, "at", `feed.csv:15:4: column "at" (field 2): not a time in layout`},
		{16, 25, 3, "x", `feed.csv:16:25: column "x" (field 3): log of a non-positive value: "-1"`},
	}
	for i, w := range want {
		q := qs[i]
		if q.Line != w.line || q.Column != w.col || q.Field != w.field || q.ColumnName != w.name || !strings.HasPrefix(q.Reason, w.reason) {
			t.Errorf("row %d: line %d column %d field %d name %q reason %q\nwant line %d column %d field %d name %q reason starting %q",
				i, q.Line, q.Column, q.Field, q.ColumnName, q.Reason, w.line, w.col, w.field, w.name, w.reason)
		}
		if q.At.Before(before) || q.At.After(time.Now()) {
			t.Errorf("row %d: arrived at %v, want the time it was read", i, q.At)
		}
	}
}
