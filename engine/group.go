package engine

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"

	"gonum.org/v1/gonum/mat"
)

// Group terms.
//
// group(batch) turns a column of labels (text, or numbers taken as
// labels) into indicator columns, one per level but the reference: the
// first level in byte order, absorbed in the intercept. Without an
// intercept, the first term that is a group alone gets one indicator per
// level. A product with a group, group(batch)*months, gives one column per
// coded level, months where the row is at that level and 0 elsewhere: the
// difference of the months slope at that level from the reference's.
// Several groups in a product cross their coded levels (the first factor's
// level varying slowest).
//
// Coefficient names: "batch=B" for group(batch), "batch=B*months" for
// group(batch)*months, "months*batch=B" for months*group(batch): each
// factor as written, a group factor as column=level.

var (
	// ErrNewLevel: a row's group label is not among the model's levels.
	// The daemon extends the model (WithLevels) at its next refit; the
	// row itself is not judged against a model that cannot describe it.
	ErrNewLevel = errors.New("engine: group level not in the model")
	// ErrTextColumn: a column of text is used as a number. The
	// *DataError's cause also names the fix, group(column).
	ErrTextColumn = errors.New("engine: the column holds text, not numbers")
)

// Data holds the columns a design draws on: numeric columns and text
// columns (labels for group terms). A name should be in one map only; a
// numeric column wins when it is in both.
type Data struct {
	Num  map[string][]float64
	Text map[string][]string
}

// Design is a built design: the model with the levels found (Model.Levels
// holds, for each group column, the union of the levels the model already
// had and those in the data, in byte order), X, y and the row weights W
// (nil when unweighted).
type Design struct {
	Model Model
	X     *mat.Dense
	Y     []float64
	W     []float64
}

// HasGroup reports whether the term has a group factor.
func (t Term) HasGroup() bool {
	for _, f := range t.Factors {
		if f.Group {
			return true
		}
	}
	return false
}

func (m Model) hasGroups() bool {
	for _, t := range m.Terms {
		if t.HasGroup() {
			return true
		}
	}
	return false
}

// GroupColumns lists the columns used in group(...) factors, in order of
// first use.
func (m Model) GroupColumns() []string {
	var out []string
	for _, t := range m.Terms {
		for _, f := range t.Factors {
			if f.Group && !slices.Contains(out, f.Column) {
				out = append(out, f.Column)
			}
		}
	}
	return out
}

// fullCoding reports whether term k codes its (single) group factor with
// every level: a model without intercept, a term that is one group
// factor alone, and no earlier such term.
func (m Model) fullCoding(k int) bool {
	if m.Intercept {
		return false
	}
	alone := func(t Term) bool { return len(t.Factors) == 1 && t.Factors[0].Group }
	if !alone(m.Terms[k]) {
		return false
	}
	for j := 0; j < k; j++ {
		if alone(m.Terms[j]) {
			return false
		}
	}
	return true
}

// coded returns the levels of term k's group factor f that get a column.
func (m Model) coded(k int, f Factor) []string {
	lv := m.Levels[f.Column]
	if m.fullCoding(k) || len(lv) == 0 {
		return lv
	}
	return lv[1:]
}

// termWidth is the number of coefficients of term k.
func (m Model) termWidth(k int) int {
	w := 1
	for _, f := range m.Terms[k].Factors {
		if f.Group {
			w *= len(m.coded(k, f))
		}
	}
	return w
}

// groupNames names the coefficients of term k.
func (m Model) groupNames(k int) []string {
	t := m.Terms[k]
	names := []string{""}
	for fi, f := range t.Factors {
		sep := "*"
		if fi == 0 {
			sep = ""
		}
		if !f.Group {
			for i := range names {
				names[i] += sep + f.Text
			}
			continue
		}
		var next []string
		for _, nm := range names {
			for _, lv := range m.coded(k, f) {
				next = append(next, nm+sep+f.Column+"="+lv)
			}
		}
		names = next
	}
	return names
}

// WithLevels returns a copy of m whose group column col also has the
// given levels (kept in byte order, without repeats). The reference level
// is the first in byte order, so a new level that sorts first becomes the
// reference and renames the column's coefficients.
func (m Model) WithLevels(col string, levels ...string) Model {
	out := m
	out.Levels = make(map[string][]string, len(m.Levels)+1)
	for k, v := range m.Levels {
		out.Levels[k] = v
	}
	out.Levels[col] = mergeLevels(m.Levels[col], levels)
	return out
}

func mergeLevels(a, b []string) []string {
	out := slices.Clone(a)
	out = append(out, b...)
	sort.Strings(out)
	return slices.Compact(out)
}

// sameLevels returns a *DataError wrapping ErrNewLevel when built has a
// level m lacks.
func (m Model) sameLevels(built Model) error {
	for col, lv := range built.Levels {
		have := m.Levels[col]
		for _, l := range lv {
			if !slices.Contains(have, l) {
				return &DataError{Row: -1, Column: col, Err: fmt.Errorf("%w: %q", ErrNewLevel, l)}
			}
		}
	}
	return nil
}

// numLabel is the label of a number used as a group level.
func numLabel(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// textColumnError is the error for a text column used as a number.
func textColumnError(col string) error {
	return &DataError{Row: -1, Column: col, Err: fmt.Errorf("%w; to use its values as levels write group(%s)", ErrTextColumn, quoteName(col))}
}

// Build builds the design from numeric and text columns (all of length
// n): X, y, the row weights (Model.Weight) and the group levels. Errors
// are those of Design, plus: a text column used as a number (a *DataError
// wrapping ErrTextColumn that suggests group(...)); a group column with a
// single level (a *ColumnError wrapping ErrConstantColumn: the group is
// constant); a bad weight (a *DataError wrapping ErrWeight, ErrNonFinite
// or ErrMissingColumn, Column the weight column). Columns of unequal
// length panic.
func (m Model) Build(d Data) (*Design, error) {
	n := -1
	if v, ok := d.Num[m.Response]; ok {
		n = len(v)
	} else if _, ok := d.Text[m.Response]; ok {
		return nil, textColumnError(m.Response)
	}
	for _, t := range m.Terms {
		for _, f := range t.Factors {
			if _, ok := d.Num[f.Column]; ok || f.Group {
				continue
			}
			if _, ok := d.Text[f.Column]; ok {
				return nil, textColumnError(f.Column)
			}
		}
	}
	if m.Weight.Weighted() {
		if _, ok := d.Num[m.Weight.Column]; !ok {
			if _, ok := d.Text[m.Weight.Column]; ok {
				return nil, &DataError{Row: -1, Column: m.Weight.Column, Err: ErrTextColumn}
			}
		}
	}
	out := &Design{Model: m}
	if !m.hasGroups() {
		X, y, err := m.designNum(d.Num)
		if err != nil {
			return nil, err
		}
		out.X, out.Y = X, y
	} else {
		if n < 0 {
			return nil, &DataError{Row: -1, Column: m.Response, Err: ErrMissingColumn}
		}
		labels := make(map[string][]int32) // level index of each row
		for _, col := range m.GroupColumns() {
			var lab []string
			if v, ok := d.Num[col]; ok {
				lab = make([]string, len(v))
				for i, x := range v {
					if math.IsNaN(x) || math.IsInf(x, 0) {
						return nil, &DataError{Row: i, Column: col, Err: ErrNonFinite}
					}
					lab[i] = numLabel(x)
				}
			} else if v, ok := d.Text[col]; ok {
				lab = v
			} else {
				return nil, &DataError{Row: -1, Column: col, Err: ErrMissingColumn}
			}
			if len(lab) != n {
				panic(fmt.Sprintf("engine: column %q has %d values, response %q has %d", col, len(lab), m.Response, n))
			}
			// One pass: each row's index among the labels in order of
			// first appearance, then mapped to the sorted level list.
			local := make(map[string]int32)
			var found []string
			codes := make([]int32, n)
			for i, l := range lab {
				k, ok := local[l]
				if !ok {
					k = int32(len(found))
					local[l] = k
					found = append(found, l)
				}
				codes[i] = k
			}
			out.Model = out.Model.WithLevels(col, found...)
			levels := out.Model.Levels[col]
			perm := make([]int32, len(found))
			for k, l := range found {
				j, _ := slices.BinarySearch(levels, l)
				perm[k] = int32(j)
			}
			for i, k := range codes {
				codes[i] = perm[k]
			}
			labels[col] = codes
		}
		for _, t := range m.Terms {
			for _, f := range t.Factors {
				if f.Group && len(out.Model.Levels[f.Column]) < 2 {
					return nil, &ColumnError{Term: t.Text, Err: fmt.Errorf("%w: group column %q has a single level", ErrConstantColumn, f.Column)}
				}
			}
		}
		X, y, err := out.Model.designGroups(d.Num, labels, n)
		if err != nil {
			return nil, err
		}
		out.X, out.Y = X, y
	}
	w, err := m.Weight.rowWeights(d.Num, len(out.Y))
	if err != nil {
		return nil, err
	}
	out.W = w
	return out, nil
}

// Fit fits the design: RefitWeighted(d.Model, d.X, d.Y, d.W).
func (d *Design) Fit() (*Fit, error) {
	return RefitWeighted(d.Model, d.X, d.Y, d.W)
}

// designGroups builds X and y for a model with group terms from the level
// index of every row in each group column (indices into m.Levels).
func (m Model) designGroups(num map[string][]float64, idx map[string][]int32, n int) (*mat.Dense, []float64, error) {
	yc, ok := num[m.Response]
	if !ok {
		return nil, nil, &DataError{Row: -1, Column: m.Response, Err: ErrMissingColumn}
	}
	for _, c := range m.Columns() {
		if _, isGroup := idx[c]; isGroup {
			if _, used := num[c]; !used && m.usesNumerically(c) {
				return nil, nil, textColumnError(c)
			}
			if !m.usesNumerically(c) {
				continue
			}
		}
		v, ok := num[c]
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
	for i, v := range yc {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, nil, &DataError{Row: i, Column: m.Response, Err: ErrNonFinite}
		}
	}
	p := m.P()
	data := make([]float64, n*p)
	plan := m.rowPlan()
	// Resolve the columns once.
	for _, tp := range plan.terms {
		for k := range tp.num {
			tp.num[k].v = num[tp.num[k].f.Column]
		}
		for k := range tp.grp {
			tp.grp[k].ix = idx[tp.grp[k].col]
		}
	}
	for i := 0; i < n; i++ {
		row := data[i*p : (i+1)*p]
		if err := plan.fill(row, i); err != nil {
			return nil, nil, err
		}
	}
	y := make([]float64, n)
	copy(y, yc)
	return mat.NewDense(n, p, data), y, nil
}

// rowPlan is fillRow with every term's layout worked out once, for
// building many rows.
type rowPlan struct {
	intercept bool
	terms     []*termPlan
}

type termPlan struct {
	text  string
	width int
	num   []struct {
		f Factor
		v []float64
	}
	grp []struct {
		col   string
		nc    int
		shift int // 1 when the reference level has no column
		ix    []int32
	}
}

func (m Model) rowPlan() rowPlan {
	pl := rowPlan{intercept: m.Intercept}
	for k, t := range m.Terms {
		tp := &termPlan{text: t.Text, width: m.termWidth(k)}
		for _, f := range t.Factors {
			if f.Group {
				shift := 1
				if m.fullCoding(k) {
					shift = 0
				}
				tp.grp = append(tp.grp, struct {
					col   string
					nc    int
					shift int
					ix    []int32
				}{f.Column, len(m.coded(k, f)), shift, nil})
				continue
			}
			tp.num = append(tp.num, struct {
				f Factor
				v []float64
			}{f, nil})
		}
		pl.terms = append(pl.terms, tp)
	}
	return pl
}

// fill writes row i (dst zeroed). Errors are *DataError with Row i.
func (pl rowPlan) fill(dst []float64, i int) error {
	off := 0
	if pl.intercept {
		dst[0] = 1
		off = 1
	}
	for _, tp := range pl.terms {
		at, inside := 0, true
		for _, g := range tp.grp {
			li := int(g.ix[i]) - g.shift
			if li < 0 {
				inside = false
			}
			at = at*g.nc + li
		}
		val := 1.0
		for _, nf := range tp.num {
			x := nf.v[i]
			if math.IsNaN(x) || math.IsInf(x, 0) {
				return &DataError{Row: i, Column: nf.f.Column, Err: ErrNonFinite}
			}
			if nf.f.Log {
				if x <= 0 {
					return &DataError{Row: i, Column: nf.f.Column, Err: ErrLogDomain}
				}
				x = math.Log(x)
			}
			val *= ipow(x, nf.f.Power)
		}
		if math.IsNaN(val) || math.IsInf(val, 0) {
			return &DataError{Row: i, Column: tp.text, Err: ErrNonFinite}
		}
		if inside {
			dst[off+at] = val
		}
		off += tp.width
	}
	return nil
}

// usesNumerically reports whether column c enters some term as a number.
func (m Model) usesNumerically(c string) bool {
	for _, t := range m.Terms {
		for _, f := range t.Factors {
			if !f.Group && f.Column == c {
				return true
			}
		}
	}
	return false
}

// fillRow writes one design row (length P, zeroed by the caller or
// overwritten here) from the numeric values and the level index of each
// group column. Errors are *DataError with Row -1.
func (m Model) fillRow(dst []float64, value func(col string) float64, level func(col string) (int, error)) error {
	off := 0
	if m.Intercept {
		dst[0] = 1
		off = 1
	}
	for k, t := range m.Terms {
		width := m.termWidth(k)
		val := 1.0
		at, inside := 0, true
		for _, f := range t.Factors {
			if f.Group {
				li, err := level(f.Column)
				if err != nil {
					return err
				}
				nc := len(m.coded(k, f))
				if !m.fullCoding(k) {
					li-- // the reference level has no column
				}
				if li < 0 {
					inside = false
				}
				at = at*nc + li
				continue
			}
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
		cols := dst[off : off+width]
		for j := range cols {
			cols[j] = 0
		}
		if inside {
			cols[at] = val
		}
		off += width
	}
	return nil
}

// DesignRowData writes one design row (length P) into dst: numeric values
// from value, group labels from label (nil: a group column's label is its
// number, as for DesignRow). A label not in m.Levels gives a *DataError
// (Row -1) wrapping ErrNewLevel; the other errors are those of DesignRow.
// A dst of the wrong length panics.
func (m Model) DesignRowData(dst []float64, value func(col string) float64, label func(col string) string) error {
	if len(dst) != m.P() {
		panic(fmt.Sprintf("engine: DesignRowData: dst has length %d, model has %d coefficients", len(dst), m.P()))
	}
	return m.fillRow(dst, value, func(col string) (int, error) {
		var l string
		if label != nil {
			l = label(col)
		} else {
			x := value(col)
			if math.IsNaN(x) || math.IsInf(x, 0) {
				return 0, &DataError{Row: -1, Column: col, Err: ErrNonFinite}
			}
			l = numLabel(x)
		}
		k := slices.Index(m.Levels[col], l)
		if k < 0 {
			return 0, &DataError{Row: -1, Column: col, Err: fmt.Errorf("%w: %q", ErrNewLevel, l)}
		}
		return k, nil
	})
}
