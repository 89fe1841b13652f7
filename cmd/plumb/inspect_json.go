package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"

	"plumb/cmd/plumb/internal/view"
	"plumb/engine"
)

// ---------------------------------------------------------------- JSON

// Undefined numbers (NaN, ±Inf) are null, through view.Float and
// view.AppendJSON, as in every JSON plumb writes.

// jmap is a JSON object of numbers keyed by term, in model order.
type jmap struct {
	keys []string
	vals []float64
}

func (m jmap) MarshalJSON() ([]byte, error) {
	var b bytes.Buffer
	b.WriteByte('{')
	for i, k := range m.keys {
		if i > 0 {
			b.WriteByte(',')
		}
		kb, _ := json.Marshal(k)
		b.Write(kb)
		b.WriteByte(':')
		vb, _ := view.Float(m.vals[i]).MarshalJSON()
		b.Write(vb)
	}
	b.WriteByte('}')
	return b.Bytes(), nil
}

// jsonCoef is view.Coefficient with inspect's JSON names.
type jsonCoef struct {
	Term     string     `json:"term"`
	Estimate view.Float `json:"estimate"`
	StdError view.Float `json:"std_error"`
	T        view.Float `json:"t"`
	P        view.Float `json:"p"`
	Lower95  view.Float `json:"lower_95"`
	Upper95  view.Float `json:"upper_95"`
}

type jsonFragility struct {
	Index        *int       `json:"index"`
	Searched     string     `json:"searched"`
	RemovedRows  []int      `json:"removed_rows"`
	RemovedLines []int      `json:"removed_lines"`
	RemovedIDs   []string   `json:"removed_ids,omitempty"`
	Conclusion   string     `json:"conclusion"`
	Kind         string     `json:"kind"`
	Term         string     `json:"term"`
	Before       view.Float `json:"before"`
	After        view.Float `json:"after"`
	Fragile      bool       `json:"fragile"`
	MaxRemoved   int        `json:"max_removed"`
	Limit        int        `json:"limit"`
	Evaluated    int        `json:"evaluated"`
	Skipped      int        `json:"skipped"`
}

type jsonRowLine struct {
	Row  int `json:"row"`
	Line int `json:"line"`
}

type jsonRowEffect struct {
	Row            int        `json:"row"`
	ID             string     `json:"id,omitempty"`
	Line           int        `json:"line"`
	LeverageBefore view.Float `json:"leverage_before"`
	LeverageAfter  view.Float `json:"leverage_after"`
	CookBefore     view.Float `json:"cooks_distance_before"`
	CookAfter      view.Float `json:"cooks_distance_after"`
}

type jsonEffect struct {
	DetRatio        view.Float      `json:"det_ratio"`
	Rows            []jsonRowEffect `json:"rows"`
	FragilityBefore *int            `json:"fragility_before"`
	FragilityAfter  *int            `json:"fragility_after"`
	FragileBefore   bool            `json:"fragile_before"`
	FragileAfter    bool            `json:"fragile_after"`
	EndsFragility   *int            `json:"ends_fragility"`
	Searched        string          `json:"searched"`
}

type jsonSuggestion struct {
	// Kind is "coverage" (readings where the data are thin) or
	// "remeasure" (at the setting of a reading judged suspect, listed
	// in Suspect by file row and line, to check it).
	Kind       string        `json:"kind"`
	Suspect    []jsonRowLine `json:"suspect"`
	At         jmap          `json:"at"`
	Replicates int           `json:"replicates"`
	D          view.Float    `json:"d"`
	DGain      view.Float    `json:"d_gain"`
	Effect     jsonEffect    `json:"effect"`
	Text       string        `json:"text"`
}

// indexOrNull maps the engine's 0 ("none found") to JSON null.
func indexOrNull(k int) *int {
	if k <= 0 {
		return nil
	}
	return &k
}

func (r *inspectResult) jsonFragility() *jsonFragility {
	fr := r.Fragility
	if fr == nil {
		return nil
	}
	j := &jsonFragility{
		Index: indexOrNull(fr.Index), Searched: fr.Searched, Conclusion: fr.Conclusion,
		Kind: fr.Kind, Term: fr.Term, Before: view.Float(fr.Before), After: view.Float(fr.After),
		Fragile: fr.Fragile, MaxRemoved: fr.MaxRemoved, Limit: fr.Limit,
		Evaluated: fr.Evaluated, Skipped: fr.Skipped,
		RemovedRows: []int{}, RemovedLines: []int{},
	}
	if fr.Index == 0 {
		j.Before, j.After = view.Float(math.NaN()), view.Float(math.NaN())
	}
	for _, ref := range r.FragilityOf(fr.MaxRemoved, fr.Limit).Rows {
		j.RemovedRows = append(j.RemovedRows, int(ref.ID))
		j.RemovedLines = append(j.RemovedLines, ref.Line)
		if r.ds.labels != nil {
			j.RemovedIDs = append(j.RemovedIDs, ref.Label)
		}
	}
	return j
}

func (r *inspectResult) jsonSuggestions() *[]jsonSuggestion {
	if !r.Suggested {
		return nil
	}
	out := []jsonSuggestion{}
	cols := r.model.Columns()
	for _, sg := range r.Suggestions {
		at := jmap{}
		for _, c := range cols {
			if v, ok := sg.At[c]; ok {
				at.keys = append(at.keys, c)
				at.vals = append(at.vals, v)
			}
		}
		ef := sg.Effect
		je := jsonEffect{
			DetRatio:        view.Float(ef.DetRatio),
			Rows:            []jsonRowEffect{},
			FragilityBefore: indexOrNull(ef.FragilityBefore),
			FragilityAfter:  indexOrNull(ef.FragilityAfter),
			FragileBefore:   ef.FragileBefore,
			FragileAfter:    ef.FragileAfter,
			EndsFragility:   indexOrNull(ef.EndsFragility),
			Searched:        ef.Searched,
		}
		for _, re := range ef.Rows {
			row, line := r.fileRow(re.Row)
			je.Rows = append(je.Rows, jsonRowEffect{
				Row: row, Line: line, ID: r.fileLabel(re.Row),
				LeverageBefore: view.Float(re.LeverageBefore), LeverageAfter: view.Float(re.LeverageAfter),
				CookBefore: view.Float(re.CookBefore), CookAfter: view.Float(re.CookAfter),
			})
		}
		js := jsonSuggestion{Kind: sg.Kind, Suspect: []jsonRowLine{}, At: at, Replicates: sg.Replicates, D: view.Float(sg.D), DGain: view.Float(sg.DGain), Effect: je, Text: sg.Text}
		for _, row := range sg.Suspect {
			fr, line := r.fileRow(row)
			js.Suspect = append(js.Suspect, jsonRowLine{Row: fr, Line: line})
		}
		out = append(out, js)
	}
	return &out
}

type jsonCutoffs struct {
	Family                    string     `json:"family"`
	CookRule                  string     `json:"cook_rule"`
	Alpha                     view.Float `json:"alpha"`
	OutlierTest               string     `json:"outlier_test"`
	Leverage                  view.Float `json:"leverage"`
	CooksDistanceAbsolute     view.Float `json:"cooks_distance_absolute"`
	CooksDistanceSizeAdjusted view.Float `json:"cooks_distance_size_adjusted"`
	DFFITSAbsolute            view.Float `json:"dffits_absolute"`
	DFFITSSizeAdjusted        view.Float `json:"dffits_size_adjusted"`
	DFBETASAbsolute           view.Float `json:"dfbetas_absolute"`
	DFBETASSizeAdjusted       view.Float `json:"dfbetas_size_adjusted"`
	COVRATIO                  view.Float `json:"covratio"`
}

type jsonReport struct {
	File         string            `json:"file"`
	Response     string            `json:"response"`
	Terms        []string          `json:"terms"`
	Intercept    bool              `json:"intercept"`
	N            int               `json:"n"`
	P            int               `json:"p"`
	DF           int               `json:"df"`
	RowsInFile   int               `json:"rows_in_file"`
	Missing      int               `json:"missing"`
	Filtered     *int              `json:"filtered,omitempty"`
	IDColumn     string            `json:"id_column,omitempty"`
	Sigma        view.Float        `json:"sigma"`
	RSquared     view.Float        `json:"r_squared"`
	AdjRSquared  view.Float        `json:"adj_r_squared"`
	FStatistic   view.Float        `json:"f_statistic"`
	FDF1         int               `json:"f_df1"`
	FDF2         int               `json:"f_df2"`
	FP           view.Float        `json:"f_p"`
	Condition    view.Float        `json:"condition"`
	Coefficients []jsonCoef        `json:"coefficients"`
	VIF          *jmap             `json:"vif"`
	Cutoffs      jsonCutoffs       `json:"cutoffs"`
	Rejected     []rejectedRow     `json:"rejected"`
	LeftOut      []leftOutRow      `json:"left_out,omitempty"`
	Fragility    *jsonFragility    `json:"fragility,omitempty"`
	Suggestions  *[]jsonSuggestion `json:"suggestions,omitempty"`
	Units        map[string]string `json:"units,omitempty"`
	Predictions  []view.Prediction `json:"predictions,omitempty"`
	Inverse      []view.Inverse    `json:"inverse,omitempty"`
	jsonForm
	Caution string `json:"caution"`
}

const cautionText = engine.Caution

func writeInspectJSON(w io.Writer, r *inspectResult) error {
	f := r.Fit
	rep := jsonReport{
		File:        r.file,
		Response:    r.model.Response,
		Intercept:   r.model.Intercept,
		N:           f.N,
		P:           f.P,
		DF:          f.DF,
		RowsInFile:  r.ds.total,
		Missing:     r.ds.missing,
		IDColumn:    r.ds.idColumn,
		Sigma:       view.Float(f.Sigma),
		RSquared:    view.Float(f.RSquared),
		AdjRSquared: view.Float(f.AdjRSquared),
		FStatistic:  view.Float(f.FStat),
		FDF1:        f.FDF1,
		FDF2:        f.FDF2,
		FP:          view.Float(f.FP),
		Condition:   view.Float(f.Condition),
		Cutoffs: jsonCutoffs{
			Family:      strings.ReplaceAll(familyName(r.cutoffs.Family), "-", "_"),
			CookRule:    cookRuleName(r.cutoffs.Cook),
			Alpha:       view.Float(r.cutoffs.Alpha),
			OutlierTest: outlierTestName(r.cutoffs.Test),

			Leverage:                  view.Float(r.Limits.Leverage),
			CooksDistanceAbsolute:     view.Float(r.Limits.CookAbsolute),
			CooksDistanceSizeAdjusted: view.Float(r.Limits.CookSize),
			DFFITSAbsolute:            view.Float(r.Limits.DFFITSAbsolute),
			DFFITSSizeAdjusted:        view.Float(r.Limits.DFFITSSize),
			DFBETASAbsolute:           view.Float(r.Limits.DFBETASAbsolute),
			DFBETASSizeAdjusted:       view.Float(r.Limits.DFBETASSize),
			COVRATIO:                  view.Float(r.Limits.COVRATIO),
		},
		Rejected:    r.ds.rejected,
		LeftOut:     r.ds.leftOut,
		Fragility:   r.jsonFragility(),
		Suggestions: r.jsonSuggestions(),
		Units:       r.units,
		Predictions: r.Predictions(),
		Inverse:     r.Inverses(),
		jsonForm:    r.jsonForm(),
		Caution:     cautionText,
	}
	if r.filter {
		rep.Filtered = &r.ds.filtered
	}
	rep.Terms = make([]string, len(r.model.Terms))
	for i, t := range r.model.Terms {
		rep.Terms[i] = t.Text
	}
	if rep.Rejected == nil {
		rep.Rejected = []rejectedRow{}
	}
	for _, c := range r.Coefficients() {
		rep.Coefficients = append(rep.Coefficients, jsonCoef(c))
	}
	rep.VIF = &jmap{}
	if f.VIF != nil {
		v := jmap{}
		for _, t := range r.model.Terms {
			if x, ok := f.VIF[t.Text]; ok {
				v.keys = append(v.keys, t.Text)
				v.vals = append(v.vals, x)
			}
		}
		rep.VIF = &v
	}
	head, err := json.MarshalIndent(rep, "", "  ")
	if err != nil {
		return err
	}
	// The rows are streamed after the rest, one compact object a line, so
	// that a large file needs no document-sized buffer.
	head = bytes.TrimRight(head, " \n}")
	bw := bufio.NewWriterSize(w, 1<<16)
	bw.Write(head)
	bw.WriteString(",\n  \"rows\": [")
	qnames := make([][]byte, len(r.names))
	for j, n := range r.names {
		qnames[j], _ = json.Marshal(n)
	}
	rows := func(dst []byte, lo, hi int) []byte {
		for i := lo; i < hi; i++ {
			if i > 0 {
				dst = append(dst, ',')
			}
			dst = append(dst, "\n    "...)
			dst = r.appendJSONRow(dst, i, qnames)
		}
		return dst
	}
	if err := writeRowBlocks(bw, len(r.Influence.Rows), 40*(len(r.names)+12), rows); err != nil {
		return err
	}
	if len(r.Influence.Rows) > 0 {
		bw.WriteString("\n  ")
	}
	bw.WriteString("]\n}\n")
	return bw.Flush()
}

// appendJSONString appends s as a JSON string, byte for byte as
// encoding/json writes it (which escapes <, > and &, and U+2028 and
// U+2029, and writes invalid UTF-8 as U+FFFD); a string that needs none
// of that is copied between quotes without json.Marshal.
func appendJSONString(dst []byte, s string) []byte {
	if !jsonPlain(s) {
		b, _ := json.Marshal(s)
		return append(dst, b...)
	}
	dst = append(dst, '"')
	dst = append(dst, s...)
	return append(dst, '"')
}

// appendJSONFlagWords appends flagWords(fl) as a JSON string, built in
// place in dst.
func appendJSONFlagWords(dst []byte, fl engine.Flag) []byte {
	start := len(dst)
	dst = append(dst, '"')
	dst = appendFlagWords(dst, fl)
	if words := dst[start+1:]; !jsonPlainBytes(words) {
		return appendJSONString(dst[:start], string(words))
	}
	return append(dst, '"')
}

// jsonPlain reports whether encoding/json writes s between quotes as it
// is: valid UTF-8 without control characters, '"', '\\', '<', '>', '&',
// U+2028 or U+2029.
func jsonPlain(s string) bool {
	ascii := true
	for i := 0; i < len(s); i++ {
		if c := s[i]; c >= 0x80 {
			ascii = false
		} else if jsonEscapes(c) {
			return false
		}
	}
	return ascii || utf8.ValidString(s) && !strings.Contains(s, "\u2028") && !strings.Contains(s, "\u2029")
}

// jsonPlainBytes is jsonPlain for bytes.
func jsonPlainBytes(b []byte) bool {
	ascii := true
	for _, c := range b {
		if c >= 0x80 {
			ascii = false
		} else if jsonEscapes(c) {
			return false
		}
	}
	return ascii || utf8.Valid(b) && !bytes.Contains(b, []byte("\u2028")) && !bytes.Contains(b, []byte("\u2029"))
}

// jsonEscapes reports whether encoding/json escapes the ASCII byte c.
func jsonEscapes(c byte) bool {
	return c < 0x20 || c == '"' || c == '\\' || c == '<' || c == '>' || c == '&'
}

// appendJSONRow writes row i as one JSON object: row, line, fitted, the
// measures, dfbetas by term, the verdict and the crossed cutoffs.
func (r *inspectResult) appendJSONRow(dst []byte, i int, qnames [][]byte) []byte {
	o := &r.Influence.Rows[i]
	v := &r.Verdicts[i]
	num := func(key string, x float64) {
		dst = append(dst, ',', '"')
		dst = append(dst, key...)
		dst = append(dst, '"', ':')
		dst = view.AppendJSON(dst, x)
	}
	flag := func(key string, b bool) {
		dst = append(dst, ',', '"')
		dst = append(dst, key...)
		dst = append(dst, '"', ':')
		dst = strconv.AppendBool(dst, b)
	}
	dst = append(dst, `{"row":`...)
	dst = strconv.AppendInt(dst, int64(r.ds.rowNo[i]), 10)
	if r.ds.labels != nil {
		dst = append(dst, `,"id":`...)
		dst = appendJSONString(dst, r.ds.labels[i])
	}
	dst = append(dst, `,"line":`...)
	dst = strconv.AppendInt(dst, int64(r.ds.line[i]), 10)
	num("fitted", r.Fit.Fitted[i])
	num("leverage", o.Leverage)
	num("residual", o.Residual)
	num("studentized_internal", o.StudentInternal)
	num("studentized_external", o.StudentExternal)
	num("cooks_distance", o.Cook)
	num("dffits", o.DFFITS)
	dst = append(dst, `,"dfbetas":{`...)
	for j, x := range r.Influence.DFBETASRow(i) {
		if j > 0 {
			dst = append(dst, ',')
		}
		dst = append(dst, qnames[j]...)
		dst = append(dst, ':')
		dst = view.AppendJSON(dst, x)
	}
	dst = append(dst, '}')
	num("covratio", o.COVRATIO)
	num("outlier_p", o.OutlierP)
	num("outlier_p_bonferroni", o.BonferroniP)
	dst = append(dst, `,"verdict":"`...)
	dst = append(dst, v.Word()...)
	dst = append(dst, '"')
	flag("outlier", v.Outlier) // JSON keys
	flag("influential", v.Influential)
	flag("notable", v.Notable)
	dst = append(dst, `,"flags":[`...)
	for k, fl := range v.Flags {
		if k > 0 {
			dst = append(dst, ',')
		}
		dst = append(dst, `{"measure":`...)
		dst = appendJSONString(dst, fl.Measure)
		dst = append(dst, `,"family":`...)
		dst = appendJSONString(dst, fl.Family)
		dst = append(dst, `,"value":`...)
		dst = view.AppendJSON(dst, fl.Value)
		dst = append(dst, `,"cutoff":`...)
		dst = view.AppendJSON(dst, fl.Cutoff)
		dst = append(dst, `,"term":`...)
		if fl.Term == "" {
			dst = append(dst, "null"...)
		} else {
			dst = appendJSONString(dst, fl.Term)
		}
		dst = append(dst, `,"words":`...)
		dst = appendJSONFlagWords(dst, fl)
		dst = append(dst, '}')
	}
	dst = append(dst, "]}"...)
	return dst
}
