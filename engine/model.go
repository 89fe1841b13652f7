package engine

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"gonum.org/v1/gonum/mat"
)

// Factor is one factor of a term: a column, or its natural log, raised to
// Power (1..MaxPower); or, with Group, the levels of a column (group.go).
// Text is the factor as written.
type Factor struct {
	Column string
	Power  int
	Log    bool
	Group  bool
	Text   string
}

// MaxPower is the largest power the term grammar accepts. Past it a
// polynomial in double precision is past saving (already x^10 on [0, 10]
// spans ten decades); a NIST StRD degree-10 model (Filip) needs 10.
const MaxPower = 20

// Term is a product of factors. Text is the term as written (trimmed); it
// is the coefficient's name in every output.
type Term struct {
	Text    string
	Factors []Factor
}

// Model is a linear model: Response regressed on Terms, with a leading
// intercept column when Intercept is true.
//
// Weight names the source of row weights (the zero value: unweighted).
// Levels holds the levels of each group column in byte order, the first
// being the reference; Build fills it from the data, and P and Names need
// it for a model with group terms.
type Model struct {
	Response  string
	Terms     []Term
	Intercept bool
	Weight    Weighting
	Levels    map[string][]string
}

// InterceptName is the coefficient name of the intercept.
const InterceptName = "intercept"

// NewModel parses the terms (grammar in the package documentation) and
// returns the model. It rejects malformed terms (*TermError), a term that
// repeats another (x*z and z*x are the same term), a term named like the
// intercept, and terms that use the response column.
func NewModel(response string, terms []string, intercept bool) (Model, error) {
	m := Model{Response: response, Intercept: intercept}
	seen := make(map[string]string)
	for _, s := range terms {
		t, err := ParseTerm(s)
		if err != nil {
			return Model{}, err
		}
		start := len(s) - len(strings.TrimLeft(s, " \t"))
		if intercept && t.Text == InterceptName {
			return Model{}, &TermError{Term: s, Pos: start, Msg: "the name \"intercept\" is reserved for the intercept"}
		}
		for _, f := range t.Factors {
			if f.Column == response {
				return Model{}, &TermError{Term: s, Pos: start, Msg: fmt.Sprintf("uses the response column %q", response)}
			}
		}
		key := t.key()
		if prev, ok := seen[key]; ok {
			return Model{}, &TermError{Term: s, Pos: start, Msg: fmt.Sprintf("same as term %q", prev)}
		}
		seen[key] = t.Text
		m.Terms = append(m.Terms, t)
	}
	if len(m.Terms) == 0 && !intercept {
		return Model{}, &TermError{Term: "", Pos: 0, Msg: "a model needs at least one term or an intercept"}
	}
	return m, nil
}

// key is a canonical form of the term: factors merged per column and sorted,
// so that x*z, z*x and the pair x*x, x^2 compare equal.
func (t Term) key() string {
	pow := make(map[string]int)
	for _, f := range t.Factors {
		k := "c:" + f.Column
		if f.Log {
			k = "l:" + f.Column
		}
		if f.Group {
			k = "g:" + f.Column
		}
		pow[k] += f.Power
	}
	keys := make([]string, 0, len(pow))
	for k := range pow {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var b strings.Builder
	for _, k := range keys {
		fmt.Fprintf(&b, "%q^%d;", k, pow[k])
	}
	return b.String()
}

// P is the number of coefficients: the intercept, one per plain term and,
// for a term with group factors, one per coded level combination (see
// group.go; a group whose levels are not yet known counts none).
func (m Model) P() int {
	p := 0
	if m.Intercept {
		p = 1
	}
	for k := range m.Terms {
		p += m.termWidth(k)
	}
	return p
}

// Names lists the coefficient names, "intercept" first when present, then
// each term's Text, or for a term with group factors one name per coded
// level combination ("batch=B", "batch=B*months", "months*batch=B").
func (m Model) Names() []string {
	names := make([]string, 0, m.P())
	if m.Intercept {
		names = append(names, InterceptName)
	}
	for k, t := range m.Terms {
		if !t.HasGroup() {
			names = append(names, t.Text)
			continue
		}
		names = append(names, m.groupNames(k)...)
	}
	return names
}

// Columns lists the distinct predictor columns in order of first use.
func (m Model) Columns() []string {
	var cols []string
	seen := make(map[string]bool)
	for _, t := range m.Terms {
		for _, f := range t.Factors {
			if !seen[f.Column] {
				seen[f.Column] = true
				cols = append(cols, f.Column)
			}
		}
	}
	return cols
}

// Design builds the n x p design X and the response y from the columns (all
// of length n). Column 0 of X is all ones when the model has an intercept.
// A missing column gives a *DataError wrapping ErrMissingColumn; a NaN or
// infinite value (also one produced by a power) wraps ErrNonFinite; log of
// a non-positive value wraps ErrLogDomain. n = 0 gives ErrTooFewRows.
// Columns of unequal length are a caller bug and panic.
//
// For a model with group terms Design takes each group column's labels
// from its numbers (as strconv.FormatFloat 'g' writes them) and needs
// m.Levels to hold every level found (a level not in it gives a *DataError
// wrapping ErrNewLevel); Build takes text columns and finds the levels.
func (m Model) Design(cols map[string][]float64) (*mat.Dense, []float64, error) {
	if m.hasGroups() {
		d, err := m.Build(Data{Num: cols})
		if err != nil {
			return nil, nil, err
		}
		if err := m.sameLevels(d.Model); err != nil {
			return nil, nil, err
		}
		return d.X, d.Y, nil
	}
	return m.designNum(cols)
}

// designNum is Design for a model without group terms.
func (m Model) designNum(cols map[string][]float64) (*mat.Dense, []float64, error) {
	yc, ok := cols[m.Response]
	if !ok {
		return nil, nil, &DataError{Row: -1, Column: m.Response, Err: ErrMissingColumn}
	}
	n := len(yc)
	for _, c := range m.Columns() {
		v, ok := cols[c]
		if !ok {
			return nil, nil, &DataError{Row: -1, Column: c, Err: ErrMissingColumn}
		}
		if len(v) != n {
			panic(fmt.Sprintf("engine: column %q has %d values, response %q has %d", c, len(v), m.Response, n))
		}
	}
	if n == 0 {
		return nil, nil, ErrTooFewRows
	}
	p := m.P()
	if p == 0 {
		panic("engine: model has no coefficients")
	}
	for i, v := range yc {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, nil, &DataError{Row: i, Column: m.Response, Err: ErrNonFinite}
		}
	}
	data := make([]float64, n*p)
	// Resolve column slices once per factor.
	type fac struct {
		v   []float64
		f   Factor
		col string
	}
	terms := make([][]fac, len(m.Terms))
	for k, t := range m.Terms {
		for _, f := range t.Factors {
			terms[k] = append(terms[k], fac{v: cols[f.Column], f: f, col: f.Column})
		}
	}
	off := 0
	if m.Intercept {
		off = 1
	}
	for i := 0; i < n; i++ {
		row := data[i*p : (i+1)*p]
		if m.Intercept {
			row[0] = 1
		}
		for k, fs := range terms {
			val := 1.0
			for _, f := range fs {
				x := f.v[i]
				if math.IsNaN(x) || math.IsInf(x, 0) {
					return nil, nil, &DataError{Row: i, Column: f.col, Err: ErrNonFinite}
				}
				if f.f.Log {
					if x <= 0 {
						return nil, nil, &DataError{Row: i, Column: f.col, Err: ErrLogDomain}
					}
					x = math.Log(x)
				}
				val *= ipow(x, f.f.Power)
			}
			if math.IsNaN(val) || math.IsInf(val, 0) {
				return nil, nil, &DataError{Row: i, Column: m.Terms[k].Text, Err: ErrNonFinite}
			}
			row[off+k] = val
		}
	}
	y := make([]float64, n)
	copy(y, yc)
	return mat.NewDense(n, p, data), y, nil
}

// DesignRow writes one design row (length P) into dst, taking column values
// from value. Errors are as for Design, with Row -1. A dst of the wrong
// length is a caller bug and panics.
//
// A group column's label is its number as strconv.FormatFloat 'g' writes
// it; DesignRowData takes text labels. A label not in m.Levels gives a
// *DataError wrapping ErrNewLevel.
func (m Model) DesignRow(dst []float64, value func(col string) float64) error {
	if m.hasGroups() {
		return m.DesignRowData(dst, value, nil)
	}
	if len(dst) != m.P() {
		panic(fmt.Sprintf("engine: DesignRow: dst has length %d, model has %d coefficients", len(dst), m.P()))
	}
	off := 0
	if m.Intercept {
		dst[0] = 1
		off = 1
	}
	for k, t := range m.Terms {
		val := 1.0
		for _, f := range t.Factors {
			x := value(f.Column)
			if math.IsNaN(x) || math.IsInf(x, 0) {
				return &DataError{Row: -1, Column: f.Column, Err: ErrNonFinite}
			}
			if f.Log {
				if x <= 0 {
					return &DataError{Row: -1, Column: f.Column, Err: ErrLogDomain}
				}
				x = math.Log(x)
			}
			val *= ipow(x, f.Power)
		}
		if math.IsNaN(val) || math.IsInf(val, 0) {
			return &DataError{Row: -1, Column: t.Text, Err: ErrNonFinite}
		}
		dst[off+k] = val
	}
	return nil
}

// ipow returns x^k for a small positive integer k, computed in double-double
// and rounded once, so that each power is within about half an ulp of the
// exact power of x.
func ipow(x float64, k int) float64 {
	switch k {
	case 1:
		return x
	case 2:
		return x * x
	}
	hi, lo := x, 0.0
	for i := 1; i < k; i++ {
		// (hi + lo) * x in double-double.
		p := hi * x
		e := math.FMA(hi, x, -p)
		e += lo * x
		hi, lo = twoSumQuick(p, e)
	}
	return hi + lo
}

// ParseTerm parses one term. Grammar:
//
//	term   = factor { "*" factor }
//	factor = atom [ "^" power ] | "group" "(" name ")"
//	power  = 1..MaxPower (20), in decimal digits
//	atom   = name | "log" "(" name ")"
//	name   = ident | quoted
//	ident  = (letter | "_" | ".") { letter | digit | "_" | "." }
//	quoted = `"` { any character, `""` for a quote } `"`
//
// Spaces may separate the tokens. Failures are *TermError.
func ParseTerm(s string) (Term, error) {
	p := termParser{src: s}
	p.skip()
	if p.pos == len(s) {
		return Term{}, p.fail(p.pos, "empty term")
	}
	var t Term
	for {
		f, err := p.factor()
		if err != nil {
			return Term{}, err
		}
		t.Factors = append(t.Factors, f)
		p.skip()
		if p.pos == len(s) {
			break
		}
		if s[p.pos] != '*' {
			return Term{}, p.fail(p.pos, "expected \"*\" or the end of the term")
		}
		p.pos++
		p.skip()
	}
	t.Text = strings.Trim(s, " \t")
	return t, nil
}

type termParser struct {
	src string
	pos int
}

func (p *termParser) fail(pos int, msg string) error {
	return &TermError{Term: p.src, Pos: pos, Msg: msg}
}

func (p *termParser) skip() {
	for p.pos < len(p.src) && (p.src[p.pos] == ' ' || p.src[p.pos] == '\t') {
		p.pos++
	}
}

func (p *termParser) factor() (Factor, error) {
	f := Factor{Power: 1}
	if p.pos == len(p.src) {
		return f, p.fail(p.pos, "expected a column name")
	}
	start := p.pos
	name, quoted, err := p.name()
	if err != nil {
		return f, err
	}
	if !quoted && name == "group" {
		save := p.pos
		p.skip()
		if p.pos < len(p.src) && p.src[p.pos] == '(' {
			p.pos++
			p.skip()
			if p.pos == len(p.src) {
				return f, p.fail(p.pos, "expected a column name inside group()")
			}
			inner, _, err := p.name()
			if err != nil {
				return f, err
			}
			p.skip()
			if p.pos == len(p.src) || p.src[p.pos] != ')' {
				return f, p.fail(p.pos, "expected \")\" to close group(")
			}
			p.pos++
			name = inner
			f.Group = true
		} else {
			p.pos = save
		}
	}
	if !quoted && name == "log" && !f.Group {
		save := p.pos
		p.skip()
		if p.pos < len(p.src) && p.src[p.pos] == '(' {
			p.pos++
			p.skip()
			if p.pos == len(p.src) {
				return f, p.fail(p.pos, "expected a column name inside log()")
			}
			inner, _, err := p.name()
			if err != nil {
				return f, err
			}
			p.skip()
			if p.pos == len(p.src) || p.src[p.pos] != ')' {
				return f, p.fail(p.pos, "expected \")\" to close log(")
			}
			p.pos++
			name = inner
			f.Log = true
		} else {
			p.pos = save
		}
	}
	f.Column = name
	save := p.pos
	p.skip()
	if p.pos < len(p.src) && p.src[p.pos] == '^' {
		if f.Group {
			return f, p.fail(p.pos, "a group(...) factor takes no power")
		}
		p.pos++
		p.skip()
		k, err := p.power()
		if err != nil {
			return f, err
		}
		f.Power = k
	} else {
		p.pos = save
	}
	f.Text = strings.TrimRight(p.src[start:p.pos], " \t")
	return f, nil
}

// power reads a power 1..MaxPower at p.pos.
func (p *termParser) power() (int, error) {
	msg := fmt.Sprintf("power must be a whole number 1-%d", MaxPower)
	if p.pos == len(p.src) {
		return 0, p.fail(p.pos, fmt.Sprintf("expected a power 1-%d after \"^\"", MaxPower))
	}
	start := p.pos
	for p.pos < len(p.src) && p.src[p.pos] >= '0' && p.src[p.pos] <= '9' {
		p.pos++
	}
	if p.pos == start || p.src[start] == '0' {
		return 0, p.fail(start, msg)
	}
	k, err := strconv.Atoi(p.src[start:p.pos])
	if err != nil || k > MaxPower {
		return 0, p.fail(start, msg)
	}
	return k, nil
}

// name reads an identifier or a quoted name at p.pos.
func (p *termParser) name() (string, bool, error) {
	s := p.src
	if s[p.pos] == '"' {
		open := p.pos
		p.pos++
		var b strings.Builder
		for {
			if p.pos == len(s) {
				return "", true, p.fail(open, "unterminated quoted name")
			}
			c := s[p.pos]
			if c == '"' {
				if p.pos+1 < len(s) && s[p.pos+1] == '"' {
					b.WriteByte('"')
					p.pos += 2
					continue
				}
				p.pos++
				break
			}
			b.WriteByte(c)
			p.pos++
		}
		if b.Len() == 0 {
			return "", true, p.fail(open, "empty quoted name")
		}
		if !utf8.ValidString(b.String()) {
			return "", true, p.fail(open, "quoted name is not valid UTF-8")
		}
		return b.String(), true, nil
	}
	start := p.pos
	for p.pos < len(s) {
		r, size := utf8.DecodeRuneInString(s[p.pos:])
		if r == utf8.RuneError && size <= 1 {
			return "", false, p.fail(p.pos, "invalid UTF-8")
		}
		ok := r == '_' || r == '.' || unicode.IsLetter(r)
		if p.pos > start {
			ok = ok || unicode.IsDigit(r)
		}
		if !ok {
			break
		}
		p.pos += size
	}
	if p.pos == start {
		r, _ := utf8.DecodeRuneInString(s[p.pos:])
		if unicode.IsDigit(r) {
			return "", false, p.fail(p.pos, "a column name cannot start with a digit (quote it)")
		}
		return "", false, p.fail(p.pos, fmt.Sprintf("unexpected %q, expected a column name", r))
	}
	return s[start:p.pos], false, nil
}
