package config

// The words a model's CSV dialect and judgement are written in, shared by
// the configuration file and `plumb inspect`'s flags, so that a value
// that works in one works in the other: `delimiter = ";"` and
// `--delimiter ";"`, `cutoffs = "size_adjusted"` and
// `--cutoffs size_adjusted`.

import (
	"fmt"
	"strings"

	"plumb/engine"
	"plumb/watcher/decode"
)

// ParseDelimiter reads a delimiter as both the file and the flag write it:
// one ASCII character other than a quote or a line break, or "tab" (also
// written `\t`, a backslash and a t) for the tab character.
func ParseDelimiter(s string) (byte, error) {
	switch s {
	case "tab", `\t`:
		return '\t', nil
	}
	if len(s) != 1 || s[0] >= 0x80 || s[0] == '"' || s[0] == '\n' || s[0] == '\r' {
		return 0, fmt.Errorf("want one ASCII character other than a quote or a line break, or \"tab\"; got %q", s)
	}
	return s[0], nil
}

// DialectError is a dialect setting that cannot be used; Key is its
// name in the file ("delimiter", "decimal_comma", "comment", "missing"),
// the flag being the same name with '-' for '_'.
type DialectError struct {
	Key string
	Err error
}

func (e *DialectError) Error() string { return e.Err.Error() }
func (e *DialectError) Unwrap() error { return e.Err }

// CheckDialect checks a dialect as the file and the flags give it. Its
// error is a *DialectError naming the setting at fault.
func CheckDialect(delimiter string, decimalComma bool, comment string, missing []string) error {
	d, err := ParseDelimiter(delimiter)
	if err != nil {
		return &DialectError{"delimiter", err}
	}
	if decimalComma && (d == ',' || d == '.') {
		return &DialectError{"decimal_comma", fmt.Errorf("with a decimal comma the delimiter cannot be %q; use \";\" (as spreadsheets saving with a decimal comma do) or tab", d)}
	}
	if strings.ContainsAny(comment, "\r\n") || (comment != "" && comment[0] == d) {
		return &DialectError{"comment", fmt.Errorf("comment prefix %q: no line break, and not starting with the delimiter", comment)}
	}
	for _, tok := range missing {
		if strings.ContainsAny(tok, "\"\r\n") || strings.IndexByte(tok, d) >= 0 || strings.TrimSpace(tok) != tok {
			return &DialectError{"missing", fmt.Errorf("missing-value token %q: no delimiter, quote, line break or spaces around it", tok)}
		}
	}
	dl := decode.Dialect{Delimiter: d, Comment: comment, DecimalComma: decimalComma, Missing: missing}
	if err := dl.Validate(); err != nil {
		return &DialectError{"delimiter", err}
	}
	return nil
}

// Dialect is the decoder's dialect of the model's files (the model has
// passed Validate).
func (m *Model) Dialect() decode.Dialect {
	d, err := ParseDelimiter(m.Delimiter)
	if err != nil {
		d = ','
	}
	return decode.Dialect{Delimiter: d, Comment: m.Comment, DecimalComma: m.DecimalComma, Missing: m.Missing}
}

// Word is one value of a judgement setting: the spelling used by the
// file and the flag alike, and older spellings still read with a note.
type Word[T comparable] struct {
	Word  string
	Value T
	Old   []string // accepted with a deprecation note
}

// Words is the set of values of one setting.
type Words[T comparable] []Word[T]

// The judgement settings' words. One spelling each, with '_' between
// words as the engine's family names and the JSON output have them.
var (
	CutoffWords = Words[engine.Family]{
		{Word: "absolute", Value: engine.Absolute},
		{Word: "size_adjusted", Value: engine.SizeAdjusted, Old: []string{"size-adjusted"}},
	}
	CookRuleWords = Words[engine.CookRule]{
		{Word: "f_median", Value: engine.CookFMedian, Old: []string{"fmedian"}},
		{Word: "one", Value: engine.CookOne},
	}
	OutlierTestWords = Words[engine.OutlierTest]{
		{Word: "bonferroni", Value: engine.BonferroniTest},
		{Word: "grubbs", Value: engine.GrubbsTest},
	}
)

// Parse returns the value written s. old is true when s is an older
// spelling (the caller notes the current one, Name(v)); ok is false when
// s is none of them.
func (ws Words[T]) Parse(s string) (v T, old, ok bool) {
	for _, w := range ws {
		if w.Word == s {
			return w.Value, false, true
		}
		for _, o := range w.Old {
			if o == s {
				return w.Value, true, true
			}
		}
	}
	return v, false, false
}

// Name is the current spelling of v.
func (ws Words[T]) Name(v T) string {
	for _, w := range ws {
		if w.Value == v {
			return w.Word
		}
	}
	return ws[0].Word
}

// Choices is `"a" or "b"`.
func (ws Words[T]) Choices() string {
	q := make([]string, len(ws))
	for i, w := range ws {
		q[i] = fmt.Sprintf("%q", w.Word)
	}
	return strings.Join(q[:len(q)-1], ", ") + " or " + q[len(q)-1]
}

// Engine is the engine's cutoffs of the judgement (it has passed
// Validate).
func (j Judge) Engine() engine.Cutoffs {
	c := engine.DefaultCutoffs()
	c.Alpha = j.Alpha
	if v, _, ok := CutoffWords.Parse(j.Cutoffs); ok {
		c.Family = v
	}
	if v, _, ok := CookRuleWords.Parse(j.CookRule); ok {
		c.Cook = v
	}
	if v, _, ok := OutlierTestWords.Parse(j.OutlierTest); ok {
		c.Test = v
	}
	return c
}
