package main

import (
	"encoding/json"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
)

// TestInspectRejectedRows checks that unreadable rows are listed with
// file:line:column and the reason, never dropped silently: on stderr for
// table and csv, in "rejected" for json; and that --strict refuses the
// file.
func TestInspectRejectedRows(t *testing.T) {
	base := []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms}
	// thermo.csv: line 12 holds "11.5x" in emf_mv (field 2, which starts
	// at byte 10); line 24 has 3 fields instead of 4.
	wantStderr := []string{
		fixture("thermo.csv") + ":12:10: row left out: ",
		`row left out: column "emf_mv" (field 2): not a number: "11.5x"`,
		fixture("thermo.csv") + ":24:",
		":24:34: row left out: field 4: wrong number of fields",
	}
	for _, format := range []string{"table", "csv"} {
		t.Run(format, func(t *testing.T) {
			_, stderr, code := runPlumb(t, "", append(base, "--format", format)...)
			if code != 0 {
				t.Fatalf("exit code %d, want 0; stderr:\n%s", code, stderr)
			}
			for _, w := range wantStderr {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr lacks %q:\n%s", w, stderr)
				}
			}
		})
	}
	t.Run("json", func(t *testing.T) {
		out, stderr, code := runPlumb(t, "", append(base, "--format", "json")...)
		if code != 0 || stderr != "" {
			t.Fatalf("exit code %d, stderr %q; want 0 and nothing", code, stderr)
		}
		var got inspectJSON
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatal(err)
		}
		if len(got.Rejected) != 2 {
			t.Fatalf("rejected = %+v, want 2 rows", got.Rejected)
		}
		r0, r1 := got.Rejected[0], got.Rejected[1]
		if r0.File != fixture("thermo.csv") || r0.Row != 11 || r0.Line != 12 || r0.Column != 10 || r0.Field != "emf_mv" || !strings.Contains(r0.Reason, "not a number") {
			t.Errorf("first rejected row = %+v", r0)
		}
		if r0.FieldNo != 2 {
			t.Errorf("first rejected row: field_number %d, want 2 (emf_mv is the header's second column)", r0.FieldNo)
		}
		if r1.Row != 23 || r1.Line != 24 || r1.FieldNo != 4 || !strings.Contains(r1.Reason, "wrong number of fields") {
			t.Errorf("second rejected row = %+v", r1)
		}
		// Kept rows keep their own row and line numbers.
		if r := got.Rows[11]; r.Row != 13 || r.Line != 14 {
			t.Errorf("12th kept row is row %d, line %d; want row 13, line 14", r.Row, r.Line)
		}
	})
	t.Run("strict", func(t *testing.T) {
		out, stderr, code := runPlumb(t, "", append(base, "--strict", "--format", "json")...)
		if code != 1 {
			t.Errorf("exit code %d, want 1", code)
		}
		if out != "" {
			t.Errorf("stdout = %q, want nothing under --strict", out)
		}
		for _, w := range append(wantStderr, "--strict") {
			if !strings.Contains(stderr, w) {
				t.Errorf("stderr lacks %q:\n%s", w, stderr)
			}
		}
	})
	t.Run("log of non-positive value", func(t *testing.T) {
		csvText := "x,y\n1,2\n2,3.9\n-1,0.1\n3,6.2\n4,7.7\n5,10.1\n"
		got := inspectStdinJSON(t, csvText, "--response", "y", "--terms", "log(x)")
		if got.N != 5 || len(got.Rejected) != 1 {
			t.Fatalf("n = %d, rejected %+v; want 5 and one row", got.N, got.Rejected)
		}
		if r := got.Rejected[0]; r.File != "stdin" || r.Line != 4 || r.Column != 1 || r.Row != 3 || !strings.Contains(r.Reason, "log") {
			t.Errorf("rejected = %+v, want stdin:4:1 row 3 with a log reason", r)
		}
	})
	t.Run("log of non-positive value after a multi-line field", func(t *testing.T) {
		// Line 4 starts a record whose quoted id runs onto line 5
		// (`c",0,0.1`); x is the second field, at byte 4 of line 5.
		csvText := "id,x,y\na,1,2\nb,2,3.9\n\"c\nc\",0,0.1\nd,3,6.2\ne,4,7.7\nf,5,10.1\n"
		got := inspectStdinJSON(t, csvText, "--response", "y", "--terms", "log(x)")
		if len(got.Rejected) != 1 {
			t.Fatalf("rejected %+v, want one row", got.Rejected)
		}
		if r := got.Rejected[0]; r.Line != 5 || r.Column != 4 || r.Row != 3 || r.Field != "x" {
			t.Errorf("rejected = %+v, want stdin:5:4 row 3 field x", r)
		}
	})
	t.Run("strict clean file", func(t *testing.T) {
		_, stderr, code := runPlumb(t, "", "inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed", "--strict")
		if code != 0 {
			t.Errorf("exit code %d, want 0; stderr:\n%s", code, stderr)
		}
	})
}

// TestInspectSplitDecode cuts a file with quoted, multi-line and bad
// fields into many parts and checks that the result equals decoding it in
// one piece.
func TestInspectSplitDecode(t *testing.T) {
	var b strings.Builder
	b.WriteString("id,note,x,y\n")
	r := rand.New(rand.NewPCG(3, 4))
	for i := 0; i < 400; i++ {
		x := r.Float64() * 10
		y := 1 + 2*x + r.NormFloat64()
		note := "plain"
		switch i % 7 {
		case 1:
			note = `"two, parts"`
		case 2:
			note = "\"line one\nline two\""
		case 3:
			note = `"say ""when"""`
		}
		ys := strconv.FormatFloat(y, 'f', 4, 64)
		if i%53 == 0 {
			ys = "n/a"
		}
		b.WriteString(strconv.Itoa(i) + "," + note + "," + strconv.FormatFloat(x, 'f', 4, 64) + "," + ys + "\n")
	}
	text := b.String()
	args := []string{"inspect", "-", "--response", "y", "--terms", "x", "--format", "json"}
	whole, _, code := runPlumb(t, text, args...)
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	prevMin, prevProcs := minPartBytes, runtime.GOMAXPROCS(7)
	minPartBytes = 64
	defer func() { minPartBytes = prevMin; runtime.GOMAXPROCS(prevProcs) }()
	if parts := splitRecords([]byte(text), 12, 1, 7); len(parts) < 5 {
		t.Fatalf("file cut into %d parts, want 7", len(parts))
	}
	split, _, code := runPlumb(t, text, args...)
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	if split != whole {
		t.Errorf("decoding in parts differs from decoding in one piece:\n%s", firstDiff(split, whole))
	}
	var js inspectJSON
	if err := json.Unmarshal([]byte(split), &js); err != nil {
		t.Fatal(err)
	}
	if len(js.Rejected) != 8 || js.N != 392 {
		t.Errorf("n = %d, %d rejected; want 392 and 8", js.N, len(js.Rejected))
	}
}

// inspectStdinJSON inspects csvText from standard input with args and
// --format json, and returns the document; a non-zero exit or output that
// is not JSON fails the test.
func inspectStdinJSON(t *testing.T, csvText string, args ...string) inspectJSON {
	t.Helper()
	out, stderr, code := runPlumb(t, csvText, append(append([]string{"inspect", "-"}, args...), "--format", "json")...)
	if code != 0 {
		t.Fatalf("exit code %d; stderr:\n%s", code, stderr)
	}
	var got inspectJSON
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatal(err)
	}
	return got
}

// TestInspectDesignRejectAfterLoad sets aside a row whose value the design
// cannot take (x^2 overflows), found after loading, when the file's bytes
// have been let go: the row is still named by line and byte column, read
// again from the file, as from standard input, where they are kept.
func TestInspectDesignRejectAfterLoad(t *testing.T) {
	data := "id,x,y\n1,1,2\n2,2,4.1\n3,1e200,5\n4,3,6.2\n5,4,7.9\n6,5,10.1\n7,6,12.2\n"
	file := filepath.Join(t.TempDir(), "f.csv")
	if err := os.WriteFile(file, []byte(data), 0o644); err != nil {
		t.Fatal(err)
	}
	args := []string{"--response", "y", "--terms", "x, x^2", "--format", "json"}
	for _, src := range []struct{ name, stdin, arg string }{{"file", "", file}, {"stdin", data, "-"}} {
		out, stderr, code := runPlumb(t, src.stdin, append([]string{"inspect", src.arg}, args...)...)
		if code != 0 {
			t.Fatalf("%s: exit code %d: %s", src.name, code, stderr)
		}
		var rep struct {
			N        int           `json:"n"`
			Rejected []rejectedRow `json:"rejected"`
		}
		if err := json.Unmarshal([]byte(out), &rep); err != nil {
			t.Fatal(err)
		}
		if rep.N != 6 || len(rep.Rejected) != 1 {
			t.Fatalf("%s: n = %d, rejected %+v; want 6 rows and one set aside", src.name, rep.N, rep.Rejected)
		}
		if r := rep.Rejected[0]; r.Row != 3 || r.Line != 4 || r.Column != 3 || r.Field != "x" {
			t.Errorf("%s: set aside %+v, want row 3 at line 4, column 3, field x", src.name, r)
		}
	}

	// A file changed after loading keeps the row's line, without a column.
	ds := &inspectData{reread: file, size: len(data) + 1, line: []int{4}, rowNo: []int{3}, header: []string{"id", "x", "y"}, file: file}
	ds.reject(0, "x", "changed", ',')
	if r := ds.rejected[0]; r.Line != 4 || r.Column != 0 {
		t.Errorf("changed file: line %d column %d, want 4 and 0", r.Line, r.Column)
	}
}
