package report

import (
	"cmp"
	"fmt"
	"html/template"
	"net/url"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"

	"plumb/cmd/plumb/internal/view"
)

// How much of a quarantined row's text and reason the report shows. A
// rejected record may be as long as the decoder's record limit (1 MiB by
// default); the report shows its start and says how long it is.
const (
	rawShown    = 200
	reasonShown = 300
)

// quarRow is one listed quarantined row, ready for the template.
type quarRow struct {
	ID    int64
	Where string // file:line:column, or file:line when the column is not known
	// Reason and Raw are escaped for HTML, with characters that do not
	// print marked (see visible).
	Reason    template.HTML
	ReasonCut bool
	Raw       template.HTML
	// RawCut is set when the text is cut; RawShown and RawTotal are then
	// the characters shown and the characters stored.
	RawCut   bool
	RawShown string
	RawTotal string
	At       string
}

// quarSection is the quarantine section of the page.
type quarSection struct {
	Total int64 // rows quarantined in all
	Rows  []quarRow
	More  int64 // rows not listed
	// API is the request that lists them all, oldest first.
	API string
}

// quarantineSection lists the newest limit rows of qs, newest first (by
// id, which follows arrival), and counts the rest of total.
func quarantineSection(model string, total int64, qs []view.QuarantineView, limit int) quarSection {
	qs = slices.Clone(qs)
	slices.SortStableFunc(qs, func(a, b view.QuarantineView) int { return cmp.Compare(b.ID, a.ID) })
	s := quarSection{Total: max(total, int64(len(qs))),
		API: "/api/v1/quarantine?model=" + url.QueryEscape(model) + "&limit=1000"}
	if len(qs) > limit {
		qs = qs[:limit]
	}
	s.More = s.Total - int64(len(qs))
	for _, q := range qs {
		r := quarRow{ID: q.ID, Where: where(q), At: when(q.At)}
		var n int
		r.Reason, n, _ = visible(reasonText(q), reasonShown)
		r.ReasonCut = n > reasonShown
		var total int
		r.Raw, total, r.RawCut = visible(q.Raw, rawShown)
		if r.RawCut {
			r.RawShown, r.RawTotal = grouped(rawShown), grouped(total)
		}
		s.Rows = append(s.Rows, r)
	}
	return s
}

// where gives a row's position as file:line:column (file:line when the
// column is not known).
func where(q view.QuarantineView) string { return q.Where() }

// reasonText is the reason without its leading position when that repeats
// the row's own (the decoder's and the daemon's reasons start with it);
// the position has its own column.
func reasonText(q view.QuarantineView) string {
	for _, p := range []string{
		fmt.Sprintf("%s:%d:%d: ", q.File, q.Line, q.Column),
		fmt.Sprintf("%s:%d: ", q.File, q.Line),
	} {
		if rest, ok := strings.CutPrefix(q.Reason, p); ok && rest != "" {
			return rest
		}
	}
	return q.Reason
}

// visible renders text read from a data file for the page: escaped for
// HTML, with each character that would not print as itself (control
// characters, format characters such as bidirectional overrides and
// zero-width spaces, spaces other than the ASCII one, bytes that are not
// UTF-8) shown as a marked escape, e.g. \t, \x00, \u00a0, \xff, so that
// what the report shows is what the file holds. It shows at most limit
// characters (runes, an invalid byte counting as one) and returns the
// number of characters in s and whether it cut.
func visible(s string, limit int) (h template.HTML, total int, cut bool) {
	var b strings.Builder
	lit := 0 // start of the pending literal run
	flush := func(i int) {
		b.WriteString(template.HTMLEscapeString(s[lit:i]))
	}
	end := len(s)
	for i := 0; i < len(s); {
		r, size := utf8.DecodeRuneInString(s[i:])
		if total == limit {
			end = i
		}
		total++
		if total > limit {
			i += size
			continue
		}
		var esc string
		switch {
		case r == utf8.RuneError && size == 1:
			esc = fmt.Sprintf(`\x%02x`, s[i])
		case r == '\t':
			esc = `\t`
		case r == '\n':
			esc = `\n`
		case r == '\r':
			esc = `\r`
		case r == ' ' || strconv.IsPrint(r):
		case r < 0x80:
			esc = fmt.Sprintf(`\x%02x`, r)
		case r <= 0xffff:
			esc = fmt.Sprintf(`\u%04x`, r)
		default:
			esc = fmt.Sprintf(`\U%08x`, r)
		}
		if esc != "" {
			flush(i)
			b.WriteString(`<span class="esc">`)
			b.WriteString(esc)
			b.WriteString(`</span>`)
			lit = i + size
		}
		i += size
	}
	cut = total > limit
	if !cut {
		end = len(s)
	}
	if lit < end {
		flush(end)
	}
	return template.HTML(b.String()), total, cut
}

// grouped formats n with commas between groups of three digits: 1,048,576.
func grouped(n int) string {
	if n < 0 {
		return "-" + grouped(-n)
	}
	s := strconv.Itoa(n)
	for i := len(s) - 3; i > 0; i -= 3 {
		s = s[:i] + "," + s[i:]
	}
	return s
}
