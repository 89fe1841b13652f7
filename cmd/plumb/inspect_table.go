package main

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"
	"unicode/utf8"

	"plumb/engine"
)

// ---------------------------------------------------------------- table

// flagWords says in plain words which cutoff a flag crosses (engine.Flag.Text).
func flagWords(fl engine.Flag) string { return fl.Text() }

// appendFlagWords appends flagWords(fl) to dst: the json format writes it
// for every flag of every row.
func appendFlagWords(dst []byte, fl engine.Flag) []byte { return fl.AppendText(dst) }

// num4 formats a number to 4 significant digits for people.
func num4(x float64) string { return string(appendNum4(nil, x)) }

// appendNum4 appends num4(x) to dst.
func appendNum4(dst []byte, x float64) []byte {
	switch {
	case math.IsNaN(x):
		return append(dst, "undefined"...)
	case math.IsInf(x, 0):
		return append(dst, "infinite"...)
	}
	return strconv.AppendFloat(dst, x, 'g', 4, 64)
}

// pval formats a p-value.
func pval(p float64) string {
	switch {
	case math.IsNaN(p):
		return "undefined"
	case p < 1e-300:
		return "< 1e-300"
	case p < 1e-4:
		return strconv.FormatFloat(p, 'e', 1, 64)
	}
	return strconv.FormatFloat(p, 'g', 3, 64)
}

// grid lays out columns with two spaces between them: numbers
// right-aligned, the columns marked in left (by index) left-aligned.
type grid struct {
	rows  [][]string
	left  map[int]bool
	width []int
}

func (g *grid) add(cells ...string) {
	for len(g.width) < len(cells) {
		g.width = append(g.width, 0)
	}
	for i, c := range cells {
		if n := utf8.RuneCountInString(c); n > g.width[i] {
			g.width[i] = n
		}
	}
	g.rows = append(g.rows, cells)
}

func (g *grid) write(w *bufio.Writer, indent string) {
	var line []byte
	for _, r := range g.rows {
		line = append(line[:0], indent...)
		for i, c := range r {
			pad := g.width[i] - utf8.RuneCountInString(c)
			if i > 0 {
				line = append(line, "  "...)
			}
			if g.left[i] {
				line = append(line, c...)
				line = appendSpaces(line, pad)
			} else {
				line = appendSpaces(line, pad)
				line = append(line, c...)
			}
		}
		line = bytes.TrimRight(line, " ")
		line = append(line, '\n')
		w.Write(line)
	}
}

func appendSpaces(b []byte, n int) []byte {
	for ; n > 0; n-- {
		b = append(b, ' ')
	}
	return b
}

// verdictWords turns the engine's verdict into the table's words.
func verdictWords(v engine.Verdict) string {
	switch v.Word() {
	case engine.WordSuspect:
		return "SUSPECT: an outlier that also sways the fit"
	case engine.WordInfluential:
		return "sways the fit"
	case engine.WordOutlier:
		return "does not follow the fit (outlier)"
	case engine.WordNotable:
		return "worth a second glance"
	}
	return string(v.Word())
}

func shortVerdict(v engine.Verdict) string {
	switch v.Word() {
	case engine.WordOrdinary:
		return "-"
	case engine.WordInfluential:
		return "sways fit"
	}
	return string(v.Word())
}

// maxLookRows bounds the "worth a look" list of the table.
const maxLookRows = 40

func writeInspectTable(w io.Writer, r *inspectResult) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	f := r.Fit
	terms := make([]string, len(r.model.Terms))
	for i, t := range r.model.Terms {
		terms[i] = t.Text
	}
	explained := strings.Join(terms, " + ")
	switch {
	case r.model.Intercept && explained == "":
		explained = "a constant"
	case r.model.Intercept:
		explained = "a constant + " + explained
	default:
		explained += " (through the origin, no constant)"
	}
	fmt.Fprintf(bw, "%s: %s explained by %s\n", r.file, r.model.Response, explained)
	fmt.Fprintf(bw, "%d of %d data rows used", f.N, r.ds.total)
	if r.ds.filtered > 0 {
		fmt.Fprintf(bw, "; %d left out by --filter", r.ds.filtered)
	}
	if r.ds.missing > 0 {
		fmt.Fprintf(bw, "; %d left out for a missing value in a column the model uses (%s)", r.ds.missing, r.missingWords())
	}
	if k := len(r.ds.rejected); k > 0 {
		fmt.Fprintf(bw, "; %d set aside as unreadable (listed on standard error)", k)
	}
	if k := len(r.ds.leftOut); k > 0 {
		fmt.Fprintf(bw, "; %d left out as the --leave-out list asks (listed on standard error)", k)
	}
	bw.WriteString("\n\n")

	// Worth a look.
	var look []int
	for i, v := range r.Verdicts {
		if v.Outlier || v.Influential || v.Notable {
			look = append(look, i)
		}
	}
	sort.SliceStable(look, func(a, b int) bool {
		va, vb := r.Verdicts[look[a]], r.Verdicts[look[b]]
		if sa, sb := seriousness(va.Word()), seriousness(vb.Word()); sa != sb {
			return sa > sb
		}
		return len(va.Flags) > len(vb.Flags)
	})
	if len(look) == 0 {
		fmt.Fprintf(bw, "== Worth a look: none of the %d rows crosses a cutoff ==\n", f.N)
		r.writeLegend(bw)
		bw.WriteByte('\n')
	} else {
		fmt.Fprintf(bw, "== Worth a look: %d of %d rows, most serious first ==\n", len(look), f.N)
		r.writeLegend(bw)
		shown := look
		if len(shown) > maxLookRows {
			shown = shown[:maxLookRows]
		}
		for _, i := range shown {
			v := r.Verdicts[i]
			fmt.Fprintf(bw, "  %s: %s\n", rowWords(r.ds.rowNo[i], r.ds.line[i], r.ds.label(i)), verdictWords(v))
			for _, fl := range v.Flags {
				fmt.Fprintf(bw, "      - %s\n", fl.Text())
			}
		}
		if rest := look[len(shown):]; len(rest) > 0 {
			count := map[engine.Word]int{}
			for _, i := range rest {
				count[r.Verdicts[i].Word()]++
			}
			var parts []string
			for _, w := range []engine.Word{engine.WordSuspect, engine.WordInfluential, engine.WordOutlier, engine.WordNotable} {
				if count[w] > 0 {
					parts = append(parts, fmt.Sprintf("%d %s", count[w], w))
				}
			}
			fmt.Fprintf(bw, "  ... and %d more (%s): see the verdict column below, or --format csv.\n", len(rest), strings.Join(parts, ", "))
		}
		bw.WriteByte('\n')
	}

	// The fit: what an engineer acts on first (the curve, its scatter in
	// the response's units, the reading farthest from it), then the
	// coefficients, then the checks on the fit.
	bw.WriteString("== The fit ==\n")
	y := r.model.Response
	fmt.Fprintf(bw, "  curve        %s\n", r.curveWords())
	fmt.Fprintf(bw, "  scatter      %s about the curve (residual standard deviation, %d rows, %d degrees of freedom)\n",
		r.withUnit(y, num4(f.Sigma)), f.N, f.DF)
	if i := r.worstRow(); i >= 0 {
		o := r.Influence.Rows[i]
		side := "above"
		if o.Residual < 0 {
			side = "below"
		}
		fmt.Fprintf(bw, "  farthest     row %d (line %d): %s %s the curve, %s residual standard deviations (studentized)\n",
			r.ds.rowNo[i], r.ds.line[i], r.withUnit(y, num4(math.Abs(o.Residual))), side, num4(math.Abs(o.StudentExternal)))
	}
	bw.WriteByte('\n')
	g := grid{left: map[int]bool{0: true}}
	g.add("coefficient", "estimate", "std error", "t", "p", "95% from", "95% to")
	for _, c := range r.Coefficients() {
		g.add(c.Term, num4(float64(c.Estimate)), num4(float64(c.StdError)), num4(float64(c.T)), pval(float64(c.P)), num4(float64(c.Lower95)), num4(float64(c.Upper95)))
	}
	g.write(bw, "  ")
	bw.WriteByte('\n')
	bw.WriteString("  checks on the fit\n")
	variation := "the variation of " + y
	if !r.model.Intercept {
		variation = "the sum of squares of " + y + " about zero"
	}
	fmt.Fprintf(bw, "    explained      %s of %s (%s allowing for the %d coefficients)\n",
		share(f.RSquared), variation, share(f.AdjRSquared), f.P)
	if f.FDF1 > 0 {
		against := "a constant"
		if !r.model.Intercept {
			against = "zero"
		}
		fmt.Fprintf(bw, "    overall test   the terms together against %s: F = %s (df %d, %d), p %s\n",
			against, num4(f.FStat), f.FDF1, f.FDF2, pval(f.FP))
	}
	fmt.Fprintf(bw, "    conditioning   %s (condition number of the scaled design)\n", num4(f.Condition))
	if f.VIF != nil {
		var parts []string
		for _, t := range terms {
			if x, ok := f.VIF[t]; ok {
				parts = append(parts, t+" "+num4(x))
			}
		}
		fmt.Fprintf(bw, "    inflation      %s (variance inflation of each term)\n", strings.Join(parts, ", "))
	}
	bw.WriteByte('\n')
	r.writeFormTable(bw)
	r.writeAnswers(bw)

	if r.Fragility != nil {
		bw.WriteString("== How fragile the conclusions are ==\n")
		for _, l := range r.fragilityLines() {
			bw.WriteString("  " + l + "\n")
		}
		bw.WriteByte('\n')
	}
	if r.Suggested {
		bw.WriteString("== Where more readings would help ==\n")
		for _, l := range r.suggestionLines() {
			bw.WriteString("  " + l + "\n")
		}
		bw.WriteByte('\n')
	}

	// Every row.
	fmt.Fprintf(bw, "== Every row, in file order ==\n")
	g = grid{left: map[int]bool{9: true, 12: true}}
	ided := r.ds.labels != nil
	if ided {
		// The label column, left-aligned after the row number.
		g.left = map[int]bool{1: true, 10: true, 13: true}
	}
	head := []string{"row", "line", "leverage", "residual", "stud. int.", "stud. ext.", "Cook's D", "DFFITS", "largest DFBETAS", "(term)", "COVRATIO", "Bonferroni p", "verdict"}
	if ided {
		head = slices.Insert(head, 1, r.ds.idColumn)
	}
	g.add(head...)
	for i, o := range r.Influence.Rows {
		big, bigAt := math.NaN(), -1
		for j, x := range r.Influence.DFBETASRow(i) {
			if bigAt < 0 || math.Abs(x) > math.Abs(big) {
				big, bigAt = x, j
			}
		}
		dfb, dfbTerm := "undefined", ""
		if bigAt >= 0 && !math.IsNaN(big) {
			dfb, dfbTerm = num4(big), r.names[bigAt]
		}
		cells := []string{strconv.Itoa(r.ds.rowNo[i]), strconv.Itoa(r.ds.line[i]), num4(o.Leverage), num4(o.Residual),
			num4(o.StudentInternal), num4(o.StudentExternal), num4(o.Cook), num4(o.DFFITS), dfb, dfbTerm,
			num4(o.COVRATIO), pval(o.BonferroniP), shortVerdict(r.Verdicts[i])}
		if ided {
			cells = slices.Insert(cells, 1, tableCell(r.ds.labels[i]))
		}
		g.add(cells...)
	}
	g.write(bw, "  ")
	bw.WriteByte('\n')
	bw.WriteString("Caution: " + cautionText + "\n")
	return bw.Flush()
}

// missingWords says which columns the missing values were found in
// (each row counted at its first), and the texts taken as missing.
func (r *inspectResult) missingWords() string {
	var parts []string
	for i, c := range r.ds.missingCols {
		if c > 0 {
			// names, then the group columns (text labels)
			col := ""
			if i < len(r.ds.names) {
				col = r.ds.names[i]
			} else {
				col = r.ds.tnames[i-len(r.ds.names)]
			}
			parts = append(parts, fmt.Sprintf("%s %d", col, c))
		}
	}
	toks := make([]string, len(r.missingTokens))
	for i, t := range r.missingTokens {
		toks[i] = strconv.Quote(t)
	}
	return strings.Join(parts, ", ") + "; missing means " + strings.Join(toks, " or ")
}

// tableCell keeps a label on one line of the table.
func tableCell(s string) string {
	if s == "" {
		return "-"
	}
	return strings.Map(func(r rune) rune {
		if r < ' ' {
			return ' '
		}
		return r
	}, s)
}

// writeLegend says which cutoffs decide, in words.
func (r *inspectResult) writeLegend(bw *bufio.Writer) {
	l := r.Limits
	abs := fmt.Sprintf("Cook's distance above %s, |DFFITS| above %s, |DFBETAS| above %s", num4(l.CookAbsolute), num4(l.DFFITSAbsolute), num4(l.DFBETASAbsolute))
	size := fmt.Sprintf("leverage above %s, Cook's distance above %s, |DFFITS| above %s, |DFBETAS| above %s, COVRATIO more than %s from 1",
		num4(l.Leverage), num4(l.CookSize), num4(l.DFFITSSize), num4(l.DFBETASSize), num4(l.COVRATIO))
	deciding, other := "absolute", "size-adjusted"
	decidingRule, otherRule := abs, size
	if r.cutoffs.Family == engine.SizeAdjusted {
		deciding, other = other, deciding
		decidingRule, otherRule = otherRule, decidingRule
	}
	test := fmt.Sprintf("Bonferroni-adjusted p of the studentized residual below %s", num4(r.cutoffs.Alpha))
	if r.cutoffs.Test == engine.GrubbsTest {
		test = fmt.Sprintf("Grubbs test on the residuals at level %s", num4(r.cutoffs.Alpha))
	}
	article := "a"
	if deciding == "absolute" {
		article = "an"
	}
	fmt.Fprintf(bw, "  A row sways the fit when it crosses %s %s cutoff (%s).\n", article, deciding, decidingRule)
	fmt.Fprintf(bw, "  It is worth a second glance when it crosses only %s ones (%s).\n", other, otherRule)
	fmt.Fprintf(bw, "  It does not follow the fit (outlier) by the %s.\n", test)
}

func (r *inspectResult) rowList(ks []int) string {
	parts := make([]string, len(ks))
	for i, k := range ks {
		parts[i] = r.rowLabel(k)
	}
	if len(parts) <= 2 {
		return strings.Join(parts, " and ")
	}
	return strings.Join(parts[:len(parts)-1], ", ") + " and " + parts[len(parts)-1]
}

// fragilityLines says in words what the fragility search found.
func (r *inspectResult) fragilityLines() []string {
	fr := r.Fragility
	var out []string
	if fr.Index == 0 {
		out = append(out, fmt.Sprintf("No set of up to %d rows, left out together, breaks a conclusion.", fr.MaxRemoved))
	} else {
		what := "value"
		switch fr.Kind {
		case "sign", "band":
			what = "estimate"
		case "significance":
			what = "p"
		case "checkpoint":
			what = "prediction"
		}
		together := ""
		if fr.Index > 1 {
			together = " together"
		}
		out = append(out, fmt.Sprintf("Leaving out %s%s breaks the conclusion %q:", r.rowList(fr.RemovedRows), together, fr.Conclusion))
		out = append(out, fmt.Sprintf("  %s %s with every row, %s without %s.", what, num4(fr.Before), num4(fr.After), plural(fr.Index, "it", "them")))
		if fr.Fragile {
			out = append(out, fmt.Sprintf("The fit is FRAGILE: a conclusion rests on %d %s (plumb calls a fit fragile when %d or fewer rows decide one).", fr.Index, plural(fr.Index, "row", "rows"), fr.Limit))
		} else {
			out = append(out, fmt.Sprintf("Not fragile by plumb's limit: it takes more than %d rows to break a conclusion.", fr.Limit))
		}
	}
	out = append(out, fmt.Sprintf("Conclusions checked: the sign and the significance at 0.05 of each term%s.", r.checkpointWords()))
	out = append(out, fmt.Sprintf("Search: %s; %d row sets evaluated, %d left no fit.", fr.Searched, fr.Evaluated, fr.Skipped))
	return out
}

func (r *inspectResult) checkpointWords() string {
	if r.Fragility == nil && !r.Suggested {
		return ""
	}
	var parts []string
	for _, cp := range r.checkpoints {
		var at []string
		for _, c := range r.model.Columns() {
			if v, ok := cp.At[c]; ok {
				at = append(at, c+" = "+num4(v))
			}
		}
		parts = append(parts, fmt.Sprintf("the prediction at %s within %s", strings.Join(at, ", "), num4(cp.Tolerance)))
	}
	if len(parts) == 0 {
		return ""
	}
	return ", and " + strings.Join(parts, "; ")
}

// suggestionLines lists the proposed readings.
func (r *inspectResult) suggestionLines() []string {
	if len(r.Suggestions) == 0 {
		return []string{"No point of the operating region would improve the fit."}
	}
	var out []string
	for i, sg := range r.Suggestions {
		out = append(out, fmt.Sprintf("%d. %s", i+1, sg.Text))
	}
	out = append(out, "Proposals only: where and whether to measure is for qualified staff to decide.")
	return out
}

// seriousness orders the table's "worth a look" list, most serious first:
// a row that sways the fit comes before one that only misses it (the
// dashboard's list, engine.Word.Rank, puts outliers first), and a notable
// row ranks with the ordinary ones, after which more flags come first.
func seriousness(w engine.Word) int {
	switch w {
	case engine.WordSuspect:
		return 3
	case engine.WordInfluential:
		return 2
	case engine.WordOutlier:
		return 1
	}
	return 0
}

// share is a proportion as a percentage to 5 significant digits.
func share(x float64) string {
	if math.IsNaN(x) {
		return "undefined"
	}
	return strconv.FormatFloat(100*x, 'g', 5, 64) + " %"
}
