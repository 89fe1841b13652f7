package store

import (
	"encoding/json"
	"fmt"
	"math"
	"strconv"

	"plumb/engine"
)

// flagJSON is one crossed cutoff as the flags columns hold it: a JSON
// array of these objects, the form written since schema version 1. A
// value or cutoff is a number, null for NaN, or "+Inf"/"-Inf"; databases
// written before this encoding hold 0 where a value was undefined, which
// reads back as 0.
type flagJSON struct {
	Measure string    `json:"measure"`
	Family  string    `json:"family"`
	Term    string    `json:"term,omitempty"`
	Value   flagValue `json:"value"`
	Cutoff  flagValue `json:"cutoff"`
}

type flagValue float64

func (v flagValue) MarshalJSON() ([]byte, error) {
	return appendFlagValue(nil, float64(v)), nil
}

func (v *flagValue) UnmarshalJSON(b []byte) error {
	switch string(b) {
	case "null":
		*v = flagValue(math.NaN())
		return nil
	case `"+Inf"`:
		*v = flagValue(math.Inf(1))
		return nil
	case `"-Inf"`:
		*v = flagValue(math.Inf(-1))
		return nil
	}
	x, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return fmt.Errorf("flag value %s: %w", b, err)
	}
	*v = flagValue(x)
	return nil
}

// EncodeFlags returns the text a backend stores for fs: a JSON array,
// "[]" for none. Both backends keep flags in this one form.
func EncodeFlags(fs []engine.Flag) (string, error) {
	out := make([]flagJSON, len(fs))
	for i, f := range fs {
		out[i] = flagJSON{f.Measure, f.Family, f.Term, flagValue(f.Value), flagValue(f.Cutoff)}
	}
	b, err := json.Marshal(out)
	return string(b), err
}

// DecodeFlags is the inverse of EncodeFlags; "[]" and "" give nil.
func DecodeFlags(s string) ([]engine.Flag, error) {
	if s == "" {
		return nil, nil
	}
	var in []flagJSON
	if err := json.Unmarshal([]byte(s), &in); err != nil {
		return nil, fmt.Errorf("flags: %w", err)
	}
	if len(in) == 0 {
		return nil, nil
	}
	out := make([]engine.Flag, len(in))
	for i, f := range in {
		out[i] = engine.Flag{Measure: f.Measure, Family: f.Family, Term: f.Term, Value: float64(f.Value), Cutoff: float64(f.Cutoff)}
	}
	return out, nil
}

// AppendFlags appends the text EncodeFlags returns for fs to dst, byte for
// byte the same, without building the JSON through reflection: the ingest
// path writes it for every judged row.
func AppendFlags(dst []byte, fs []engine.Flag) []byte {
	for _, f := range fs {
		if !plainJSON(f.Measure) || !plainJSON(f.Family) || !plainJSON(f.Term) {
			// A name that needs escaping: let encoding/json escape it.
			s, err := EncodeFlags(fs)
			if err != nil {
				panic(err) // flagJSON always encodes
			}
			return append(dst, s...)
		}
	}
	dst = append(dst, '[')
	for i, f := range fs {
		if i > 0 {
			dst = append(dst, ',')
		}
		dst = append(dst, `{"measure":"`...)
		dst = append(dst, f.Measure...)
		dst = append(dst, `","family":"`...)
		dst = append(dst, f.Family...)
		dst = append(dst, '"')
		if f.Term != "" {
			dst = append(dst, `,"term":"`...)
			dst = append(dst, f.Term...)
			dst = append(dst, '"')
		}
		dst = append(dst, `,"value":`...)
		dst = appendFlagValue(dst, f.Value)
		dst = append(dst, `,"cutoff":`...)
		dst = appendFlagValue(dst, f.Cutoff)
		dst = append(dst, '}')
	}
	return append(dst, ']')
}

// plainJSON reports whether encoding/json writes s between quotes as it
// is: printable ASCII without the characters it escapes.
func plainJSON(s string) bool {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c < 0x20 || c > 0x7e || c == '"' || c == '\\' || c == '<' || c == '>' || c == '&' {
			return false
		}
	}
	return true
}

// appendFlagValue appends what flagValue.MarshalJSON returns.
func appendFlagValue(dst []byte, x float64) []byte {
	switch {
	case math.IsNaN(x):
		return append(dst, "null"...)
	case math.IsInf(x, 1):
		return append(dst, `"+Inf"`...)
	case math.IsInf(x, -1):
		return append(dst, `"-Inf"`...)
	}
	return strconv.AppendFloat(dst, x, 'g', -1, 64)
}
