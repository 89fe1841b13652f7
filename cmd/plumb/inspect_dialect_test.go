package main

import (
	"errors"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/config"
)

// TestInspectDialectFlags: the dialect flags take the values the config's
// keys take, and a bad one is refused naming the flag.
func TestInspectDialectFlags(t *testing.T) {
	const csvText = "# a comment line\nid;x;y\nA;1,0;2,1\nB;2,0;NA\n# another\nC;3,0;6,2\nD;4,0;7,9\nE;5,0;9,8\n"
	base := []string{"inspect", "-", "--response", "y", "--terms", "x", "--format", "json"}
	t.Run("all together", func(t *testing.T) {
		out, stderr, code := runPlumb(t, csvText, append(base, "--delimiter", ";", "--decimal-comma", "--comment", "#", "--missing", "NA", "--id-column", "id")...)
		if code != 0 {
			t.Fatalf("exit %d: %s", code, stderr)
		}
		for _, w := range []string{`"n": 4`, `"missing": 1`, `"rows_in_file": 5`, `"id_column": "id"`, `{"row":1,"id":"A","line":3,`, `{"row":3,"id":"C","line":6,`} {
			if !strings.Contains(out, w) {
				t.Errorf("output lacks %s:\n%s", w, out)
			}
		}
	})
	bad := []struct {
		name string
		args []string
		want string
	}{
		{"decimal comma with comma delimiter", []string{"--decimal-comma"}, "--decimal-comma: with a decimal comma the delimiter cannot be ','"},
		{"two-character delimiter", []string{"--delimiter", ";;"}, "--delimiter: want one ASCII character"},
		{"missing token holding the delimiter", []string{"--delimiter", ";", "--missing", "n;a"}, `--missing: missing-value token "n;a"`},
		{"comment starting with the delimiter", []string{"--delimiter", ";", "--comment", ";x"}, `--comment: comment prefix ";x"`},
		{"filter without a value", []string{"--filter", "site"}, `--filter "site": want COLUMN=VALUE`},
		{"two filter columns", []string{"--filter", "a=1", "--filter", "b=2"}, `one filter column at a time (already "a")`},
		{"old spelling is no value of outlier test", []string{"--outlier-test", "Grubbs"}, `want "bonferroni" or "grubbs"`},
	}
	for _, tt := range bad {
		t.Run(tt.name, func(t *testing.T) {
			_, stderr, code := runPlumb(t, csvText, append(base, tt.args...)...)
			if code != 2 || !strings.Contains(stderr, tt.want) {
				t.Errorf("exit %d, stderr %q; want 2 and %q", code, stderr, tt.want)
			}
		})
	}
	t.Run("unknown id column", func(t *testing.T) {
		_, stderr, code := runPlumb(t, csvText, append(base, "--delimiter", ";", "--decimal-comma", "--comment", "#", "--missing", "NA", "--id-column", "serial")...)
		if code == 0 || !strings.Contains(stderr, "serial") {
			t.Errorf("exit %d, stderr %q; want a failure naming the column", code, stderr)
		}
	})
}

// TestJudgementWordsShared: every value of the judgement settings is
// spelled the same in the config and in inspect's flags; the older inspect
// spellings (size-adjusted, fmedian) still work with a note, and the
// config does not take them.
func TestJudgementWordsShared(t *testing.T) {
	const csvText = "x,y\n1,2.1\n2,3.9\n3,6.2\n4,7.9\n5,9.8\n6,12.2\n"
	base := []string{"inspect", "-", "--response", "y", "--terms", "x", "--format", "json"}
	conf := func(key, val string) error {
		src := "[[model]]\nname = \"m\"\nfolder = \"d\"\nresponse = \"y\"\nterms = [\"x\"]\n[model.judge]\n" + key + " = \"" + val + "\"\n"
		c, err := config.Parse(strings.NewReader(src), "t.toml")
		if err != nil {
			return err
		}
		return c.Validate()
	}
	for _, w := range config.CutoffWords {
		if err := conf("cutoffs", w.Word); err != nil {
			t.Errorf("config cutoffs = %q: %v", w.Word, err)
		}
		if _, stderr, code := runPlumb(t, csvText, append(base, "--cutoffs", w.Word)...); code != 0 || stderr != "" {
			t.Errorf("--cutoffs %s: exit %d, %s", w.Word, code, stderr)
		}
	}
	for _, w := range config.CookRuleWords {
		if err := conf("cook_rule", w.Word); err != nil {
			t.Errorf("config cook_rule = %q: %v", w.Word, err)
		}
		if _, stderr, code := runPlumb(t, csvText, append(base, "--cook-rule", w.Word)...); code != 0 || stderr != "" {
			t.Errorf("--cook-rule %s: exit %d, %s", w.Word, code, stderr)
		}
	}
	for _, w := range config.OutlierTestWords {
		if err := conf("outlier_test", w.Word); err != nil {
			t.Errorf("config outlier_test = %q: %v", w.Word, err)
		}
		if _, stderr, code := runPlumb(t, csvText, append(base, "--outlier-test", w.Word)...); code != 0 || stderr != "" {
			t.Errorf("--outlier-test %s: exit %d, %s", w.Word, code, stderr)
		}
	}
	for _, old := range []struct{ flag, key, value, now string }{
		{"--cutoffs", "cutoffs", "size-adjusted", "size_adjusted"},
		{"--cook-rule", "cook_rule", "fmedian", "f_median"},
	} {
		out, stderr, code := runPlumb(t, csvText, append(base, old.flag, old.value)...)
		if code != 0 || !strings.Contains(stderr, "note: "+old.flag+" "+old.value+" is the old spelling; write "+old.flag+" "+old.now) {
			t.Errorf("%s %s: exit %d, stderr %q; want 0 and a note", old.flag, old.value, code, stderr)
		}
		if !strings.Contains(out, `"`+old.now+`"`) {
			t.Errorf("%s %s: the JSON does not say %q", old.flag, old.value, old.now)
		}
		if err := conf(old.key, old.value); !errors.Is(err, config.ErrBadValue) {
			t.Errorf("config %s = %q: %v, want a bad value", old.key, old.value, err)
		}
	}
}

// TestInspectRejectedRowLabel: an unreadable row names its --id-column
// label too, taken from the record as written.
func TestInspectRejectedRowLabel(t *testing.T) {
	const csvText = "serial,x,y\nSN-1,1,2.1\n\"SN-2, spare\",2,4x\nSN-3,3,6.2\nSN-4,4,7.9\nSN-5,5,9.8\n"
	out, stderr, code := runPlumb(t, csvText, "inspect", "-", "--response", "y", "--terms", "x", "--id-column", "serial", "--format", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.Contains(out, `"id": "SN-2, spare"`) {
		t.Errorf("rejected row lacks its id:\n%s", out)
	}
	_, stderr, _ = runPlumb(t, csvText, "inspect", "-", "--response", "y", "--terms", "x", "--id-column", "serial")
	if w := `stdin:3:17: row left out: column "y" (field 3): not a number: "4x" (row "SN-2, spare")`; !strings.Contains(stderr, w) {
		t.Errorf("stderr lacks %q:\n%s", w, stderr)
	}
}

func TestFieldText(t *testing.T) {
	for _, tt := range []struct {
		rec  string
		k    int
		want string
	}{
		{"a,b,c", 0, "a"}, {"a,b,c", 2, "c"}, {"a,b,c", 3, ""},
		{`"x, y",b`, 0, "x, y"}, {`"say ""hi""",b`, 0, `say "hi"`}, {`a,,c`, 1, ""},
	} {
		if got := fieldText(tt.rec, ',', tt.k); got != tt.want {
			t.Errorf("fieldText(%q, %d) = %q, want %q", tt.rec, tt.k, got, tt.want)
		}
	}
}
