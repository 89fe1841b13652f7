package daemon

import (
	"bufio"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumb/alerts"
)

type corpusCase struct {
	file, dialect    string
	numeric          []string
	accepted, reject int
	fatal            bool
}

// readManifest reads testdata/badinput/MANIFEST.tsv (the corpus that
// watcher/decode checks record by record).
func readManifest(t *testing.T) []corpusCase {
	t.Helper()
	f, err := os.Open("../../../../testdata/badinput/MANIFEST.tsv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []corpusCase
	sc := bufio.NewScanner(f)
	header := true
	for sc.Scan() {
		line := sc.Text()
		if strings.HasPrefix(line, "#") || line == "" {
			continue
		}
		if header {
			header = false
			continue
		}
		c := strings.Split(line, "\t")
		if len(c) != 8 {
			t.Fatalf("manifest line %q has %d fields", line, len(c))
		}
		cc := corpusCase{file: c[0], dialect: c[1], numeric: strings.Split(c[2], "|"), fatal: c[7] != "-"}
		if c[5] != "-" {
			cc.accepted = len(strings.Split(c[5], ","))
		}
		if c[6] != "-" {
			cc.reject = len(strings.Fields(c[6]))
		}
		out = append(out, cc)
	}
	return out
}

// TestBadInputCorpus feeds every file of the bad-input corpus, plus a file
// with a 10 MB line, to one running daemon, one model per file: each file
// gets its stated outcome (rows accepted, rows quarantined with their
// reason, or, for a file that cannot be read, the file refused with a
// blocked alert naming it), and the daemon keeps running throughout.
func TestBadInputCorpus(t *testing.T) {
	dir := t.TempDir()
	cases := readManifest(t)
	// The over-long line is made here rather than committed.
	long := corpusCase{file: "long_line.csv", dialect: "-", numeric: []string{"x", "y"}, accepted: 2, reject: 1}
	cases = append(cases, long)
	var body strings.Builder
	used := 0
	for i, c := range cases {
		if c.dialect != "-" || len(c.numeric) < 2 || c.numeric[0] == "-" {
			continue // dialect variants are decode's own table
		}
		folder := filepath.Join(dir, fmt.Sprintf("in%02d", i))
		if err := os.MkdirAll(folder, 0o755); err != nil {
			t.Fatal(err)
		}
		dst := filepath.Join(folder, c.file)
		if c.file == long.file {
			var b strings.Builder
			b.WriteString("x,y\n1,2\n")
			b.WriteString("3," + strings.Repeat("9", 10<<20) + "\n")
			b.WriteString("4,5\n")
			if err := os.WriteFile(dst, []byte(b.String()), 0o644); err != nil {
				t.Fatal(err)
			}
		} else {
			src, err := os.ReadFile(filepath.Join("../../../../testdata/badinput", c.file))
			if err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(dst, src, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		fmt.Fprintf(&body, "\n[[model]]\nname = %q\nfolder = %q\nresponse = %q\nterms = [%q]\n[model.fragility]\nenabled = false\n",
			c.file, filepath.Base(folder), c.numeric[0], c.numeric[1])
		used++
	}
	if used < 25 {
		t.Fatalf("only %d corpus files apply to the daemon test, want at least 25", used)
	}
	cfg := testConfig(t, dir, body.String())
	cfg.Watch.IdleFlush.Duration = 100 * time.Millisecond // the partial last line is taken after this
	r := start(t, cfg)
	ctx := context.Background()
	for _, c := range cases {
		if _, ok := r.d.models[c.file]; !ok {
			continue
		}
		t.Run(c.file, func(t *testing.T) {
			if c.fatal {
				// A file that cannot be read and never gave rows is
				// refused alone: an open blocked alert names it, with
				// the reason; its model is not blocked by it.
				subject := alerts.FileSubject(c.file, c.file)
				waitFor(t, c.file+" refused", func() bool {
					for _, a := range alertsOf(t, r.d.store, alerts.KindBlocked) {
						if a.Subject == subject && a.State == "open" && strings.Contains(a.Doc, `"reason":"`) {
							return true
						}
					}
					return false
				})
				if st, _ := modelState(r, c.file); st == stateBlocked {
					t.Errorf("model %s blocked by a file that gave no rows", c.file)
				}
				if n, _ := r.d.store.CountObservations(ctx, c.file); n != 0 {
					t.Errorf("%d rows read from a refused file", n)
				}
				return
			}
			waitFor(t, fmt.Sprintf("%s: %d accepted, %d quarantined", c.file, c.accepted, c.reject), func() bool {
				n, _ := r.d.store.CountObservations(ctx, c.file)
				q, _ := r.d.store.CountQuarantined(ctx, c.file)
				return n == int64(c.accepted) && q == int64(c.reject)
			})
			qs, err := r.d.store.Quarantined(ctx, c.file, 0, 0)
			if err != nil {
				t.Fatal(err)
			}
			for _, q := range qs {
				if q.Line < 1 || q.Reason == "" || !strings.Contains(q.Reason, fmt.Sprintf(":%d:", q.Line)) {
					t.Errorf("quarantined row without file:line:column reason: %+v", q)
				}
			}
		})
	}
	select {
	case err := <-r.done:
		t.Fatalf("the daemon stopped on bad input: %v", err)
	default:
	}
}
