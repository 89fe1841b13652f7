package report

import (
	"bytes"
	"errors"
	"fmt"
	"regexp"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

func TestVisible(t *testing.T) {
	esc := func(s string) string { return `<span class="esc">` + s + `</span>` }
	for _, tt := range []struct {
		name  string
		in    string
		limit int
		want  string
		total int
		cut   bool
	}{
		{"plain", "12.5,3,x", 20, "12.5,3,x", 8, false},
		{"markup is text", `<script>alert("x")</script>&`, 100, "&lt;script&gt;alert(&#34;x&#34;)&lt;/script&gt;&amp;", 28, false},
		{"spaces kept", "  a  b ", 20, "  a  b ", 7, false},
		{"tab, CR, LF", "a\tb\r\nc", 20, "a" + esc(`\t`) + "b" + esc(`\r`) + esc(`\n`) + "c", 6, false},
		{"NUL and DEL", "a\x00b\x7f", 20, "a" + esc(`\x00`) + "b" + esc(`\x7f`), 4, false},
		{"not UTF-8", "1,\xff\xfe,2", 20, "1," + esc(`\xff`) + esc(`\xfe`) + ",2", 6, false},
		{"no-break space", "12\u00a0500", 20, "12" + esc(`\u00a0`) + "500", 6, false},
		{"bidirectional override", "ab\u202ecd", 20, "ab" + esc(`\u202e`) + "cd", 5, false},
		{"zero-width space", "1\u200b2", 20, "1" + esc(`\u200b`) + "2", 3, false},
		{"letters of other scripts print", "Δp,µm,温度", 20, "Δp,µm,温度", 8, false},
		{"exactly the limit", "abcde", 5, "abcde", 5, false},
		{"one past the limit", "abcdef", 5, "abcde", 6, true},
		{"cut counts runes", "ααααααα", 3, "ααα", 7, true},
		{"cut after an escape", "a\tbcd", 2, "a" + esc(`\t`), 5, true},
		{"cut inside markup", "ab<script>", 4, "ab&lt;s", 10, true},
		{"empty", "", 5, "", 0, false},
	} {
		t.Run(tt.name, func(t *testing.T) {
			h, total, cut := visible(tt.in, tt.limit)
			if string(h) != tt.want || total != tt.total || cut != tt.cut {
				t.Errorf("visible(%q, %d) = %q, %d, %v; want %q, %d, %v", tt.in, tt.limit, h, total, cut, tt.want, tt.total, tt.cut)
			}
		})
	}
}

func TestGrouped(t *testing.T) {
	for n, want := range map[int]string{0: "0", 999: "999", 1000: "1,000", 1048576: "1,048,576", -12345: "-12,345"} {
		if got := grouped(n); got != want {
			t.Errorf("grouped(%d) = %q, want %q", n, got, want)
		}
	}
}

// hostile returns quarantined rows 1..5 of model "bench-b" in file
// run-0315.csv: row 1 carries markup in its text and reason, row 2 is a
// 5,000-character line with no known column, row 3 holds characters that
// do not print, rows 4 and 5 are plain.
func hostile() []view.QuarantineView {
	at := time.Date(2026, 3, 15, 8, 0, 0, 0, time.UTC)
	long := strings.Repeat("1.25,", 1000)
	return []view.QuarantineView{
		{ID: 1, Model: "bench-b", File: "run-0315.csv", Line: 7, Column: 6,
			Raw:    `7,12,<script>alert(1)</script>,<img src=x onerror=alert(2)>`,
			Reason: `run-0315.csv:7:6: field "ref_kpa": not a number: "<script>alert(1)</script>"`, At: at},
		{ID: 2, Model: "bench-b", File: "run-0315.csv", Line: 8, Column: 0, Raw: long,
			Reason: `run-0315.csv:8: column "t": not a time in layout "2006-01-02"`, At: at.Add(time.Minute)},
		{ID: 3, Model: "bench-b", File: "run-0315.csv", Line: 9, Column: 3, Raw: "9,\x00\t12\u00a0500,\xff",
			Reason: "run-0315.csv:9:3: field 2: not a number", At: at.Add(2 * time.Minute)},
		{ID: 4, Model: "bench-b", File: "run-0315.csv", Line: 10, Column: 1, Raw: ",105", Reason: "run-0315.csv:10:1: field 1: empty field", At: at.Add(3 * time.Minute)},
		{ID: 5, Model: "bench-b", File: "run-0315.csv", Line: 11, Column: 4, Raw: "11,2", Reason: "run-0315.csv:11:4: 2 fields, want 3", At: at.Add(4 * time.Minute)},
	}
}

func renderPage(t *testing.T, c Contents, opts Options) string {
	t.Helper()
	var buf bytes.Buffer
	if err := Render(&buf, c, opts); err != nil {
		t.Fatal(err)
	}
	return buf.String()
}

// quarantineHTML is the quarantine section of a page.
func quarantineHTML(t *testing.T, page string) string {
	t.Helper()
	i := strings.Index(page, `<h2 id="quarantine">`)
	if i < 0 {
		t.Fatal("no quarantine section")
	}
	j := strings.Index(page[i+1:], "<h2")
	if j < 0 {
		t.Fatal("quarantine section not followed by another")
	}
	return page[i : i+1+j]
}

var listedRe = regexp.MustCompile(`data-quarantine="(\d+)"`)

func listed(section string) []string {
	var ids []string
	for _, m := range listedRe.FindAllStringSubmatch(section, -1) {
		ids = append(ids, m[1])
	}
	return ids
}

func TestQuarantineSection(t *testing.T) {
	dm := loadDemo(t)
	d := dm.d
	d.Quarantined = 5
	page := renderPage(t, Contents{Detail: d, Fits: dm.fits, Quarantine: hostile()}, Options{})
	sec := quarantineHTML(t, page)

	t.Run("rows", func(t *testing.T) {
		if got := strings.Join(listed(sec), ","); got != "5,4,3,2,1" {
			t.Errorf("rows listed %s, want all five newest first", got)
		}
		for _, want := range []string{
			// file:line:column, then the reason without the position it repeats
			`<td class="m where">run-0315.csv:7:6</td><td>field &#34;ref_kpa&#34;: not a number: &#34;&lt;script&gt;alert(1)&lt;/script&gt;&#34;</td>`,
			`<td class="m where">run-0315.csv:8</td><td>column &#34;t&#34;: not a time in layout &#34;2006-01-02&#34;</td>`, // no column known
			`<td class="m where">run-0315.csv:11:4</td><td>2 fields, want 3</td><td class="m raw">11,2</td><td>2026-03-15 08:04:00Z</td>`,
			`5 rows of this model could not be read`,
			"neither corrects nor deletes it",
		} {
			if !strings.Contains(sec, want) {
				t.Errorf("section lacks %s", want)
			}
		}
		if strings.Contains(sec, "data-quarantine-more") {
			t.Error(`a "more" line with every row listed`)
		}
	})
	t.Run("escaped", func(t *testing.T) {
		// Data never becomes markup: the only tags in the section are
		// the template's own.
		for _, m := range regexp.MustCompile(`<([a-zA-Z][a-zA-Z0-9]*)`).FindAllStringSubmatch(sec, -1) {
			switch m[1] {
			case "h2", "p", "span", "table", "thead", "tbody", "tr", "th", "td":
			default:
				t.Errorf("markup <%s> in the quarantine section", m[1])
			}
		}
		if regexp.MustCompile(`(?i)<script|<img`).MatchString(page) {
			t.Error("raw text injected markup into the page")
		}
		for _, want := range []string{
			`<td class="m raw">7,12,&lt;script&gt;alert(1)&lt;/script&gt;,&lt;img src=x onerror=alert(2)&gt;</td>`,
			`9,<span class="esc">\x00</span><span class="esc">\t</span>12<span class="esc">\u00a0</span>500,<span class="esc">\xff</span>`,
		} {
			if !strings.Contains(sec, want) {
				t.Errorf("section lacks %s", want)
			}
		}
	})
	t.Run("long line cut", func(t *testing.T) {
		m := regexp.MustCompile(`<tr data-quarantine="2">.*?<td class="m raw">([^<]*)<span class="cut" data-cut> … \(cut: the first 200 of 5,000 characters shown\)</span></td>`).FindStringSubmatch(sec)
		if m == nil {
			t.Fatalf("row 2 not cut with a note:\n%s", sec)
		}
		if want := strings.Repeat("1.25,", 40); m[1] != want {
			t.Errorf("shown text %q, want the first 200 characters", m[1])
		}
	})
}

func TestQuarantineCap(t *testing.T) {
	dm := loadDemo(t)
	for _, tt := range []struct {
		name   string
		total  int64
		rows   []view.QuarantineView
		max    int
		listed string
		more   string // "" for no "more" line
	}{
		{"cap", 5, hostile(), 3, "5,4,3", "2 older rows not listed"},
		{"cap of one", 5, hostile(), 1, "5", "4 older rows not listed"},
		{"one more", 5, hostile()[1:], 3, "5,4,3", "2 older rows not listed"},
		{"total beyond the rows collected", 1234, hostile()[3:], 50, "5,4", "1232 older rows not listed"},
		{"exactly the cap", 5, hostile(), 5, "5,4,3,2,1", ""},
		{"rows in any order", 3, []view.QuarantineView{hostile()[2], hostile()[4], hostile()[3]}, 2, "5,4", "1 older row not listed"},
		{"default cap of 50", 60, manyRows(60), 0, "", "10 older rows not listed"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			d := dm.d
			d.Quarantined = tt.total
			sec := quarantineHTML(t, renderPage(t, Contents{Detail: d, Quarantine: tt.rows}, Options{MaxQuarantine: tt.max}))
			ids := listed(sec)
			if tt.listed != "" && strings.Join(ids, ",") != tt.listed {
				t.Errorf("listed %v, want %s", ids, tt.listed)
			}
			if tt.max == 0 && (len(ids) != 50 || ids[0] != "60" || ids[49] != "11") {
				t.Errorf("default cap: listed %d rows from %s to %s, want 50 from 60 to 11", len(ids), ids[0], ids[len(ids)-1])
			}
			if tt.more == "" {
				if strings.Contains(sec, "data-quarantine-more") {
					t.Errorf(`unexpected "more" line:\n%s`, sec)
				}
				return
			}
			if !strings.Contains(sec, "… and "+tt.more+". The daemon's API lists every one, oldest first: "+
				`<span class="m">GET /api/v1/quarantine?model=bench-b&amp;limit=1000</span>`) {
				t.Errorf("section lacks %q and the API request:\n%s", tt.more, sec)
			}
		})
	}
}

func manyRows(n int) []view.QuarantineView {
	out := make([]view.QuarantineView, n)
	for i := range out {
		out[i] = view.QuarantineView{ID: int64(i + 1), Model: "bench-b", File: "big.csv", Line: i + 2, Column: 1, Raw: "x", Reason: "field 1: empty field"}
	}
	return out
}

// Write lists no rows: the section gives the count and where to see them;
// with none quarantined it says so.
func TestQuarantineNotListed(t *testing.T) {
	dm := loadDemo(t)
	d := dm.d
	d.Name = "line a/b"
	var buf bytes.Buffer
	if err := Write(&buf, d, dm.fits, dm.alerts, Options{}); err != nil {
		t.Fatal(err)
	}
	sec := quarantineHTML(t, buf.String())
	for _, want := range []string{"2 rows of this model could not be read", "not listed in this report",
		`GET /api/v1/quarantine?model=line&#43;a%2Fb&amp;limit=1000`} {
		if !strings.Contains(sec, want) {
			t.Errorf("section lacks %q:\n%s", want, sec)
		}
	}
	if ids := listed(sec); len(ids) != 0 {
		t.Errorf("rows listed: %v", ids)
	}
	d.Quarantined = 0
	sec = quarantineHTML(t, renderPage(t, Contents{Detail: d}, Options{}))
	if !strings.Contains(sec, "No row of this model has been quarantined.") {
		t.Errorf("empty section:\n%s", sec)
	}
}

// plainSource hides the optional latest-n reads of the source it wraps.
type plainSource struct{ view.Source }

// Collect reads the same rows through the optional latest-n reads as by
// paging (several pages here), and only those the report shows.
func TestCollect(t *testing.T) {
	ctx := t.Context()
	fake := viewtest.Demo()
	for i := range 2500 {
		model := "bench-b"
		if i%5 == 0 {
			model = "oven-3"
		}
		fake.AddQuarantine(view.QuarantineView{Model: model, File: "bulk.csv", Line: i + 2, Column: 1, Raw: fmt.Sprint(i), Reason: "field 1: empty field"})
	}
	for i := range 1200 {
		fake.AddFit("bench-b", view.FitView{At: time.Date(2026, 3, 14, 0, 0, i, 0, time.UTC), N: 20, P: 2, Terms: []string{"intercept", "ref_kpa"},
			Estimates: []view.Float{1, 2}, StdErrors: []view.Float{0.1, 0.1}, Sigma: 1, RSquared: 0.9, MaxCook: view.NaN()})
	}
	opts := Options{HistoryKeep: 120, MaxQuarantine: 7}
	fast, err := Collect(ctx, fake, "bench-b", opts)
	if err != nil {
		t.Fatal(err)
	}
	paged, err := Collect(ctx, plainSource{fake}, "bench-b", opts)
	if err != nil {
		t.Fatal(err)
	}
	all, _ := fake.Quarantine(ctx, "bench-b", 0, 0)
	fits, _ := fake.Fits(ctx, "bench-b", 0, 0)
	for name, c := range map[string]Contents{"RecentQuarantiner": fast, "paged": paged} {
		if len(c.Quarantine) != 7 || c.Quarantine[6].ID != all[len(all)-1].ID || c.Quarantine[0].ID != all[len(all)-7].ID {
			t.Errorf("%s: quarantine %v, want the last 7 of %d", name, c.Quarantine, len(all))
		}
		for _, q := range c.Quarantine {
			if q.Model != "bench-b" {
				t.Errorf("%s: row of model %s", name, q.Model)
			}
		}
		if len(c.Fits) != 120 || c.Fits[119].ID != fits[len(fits)-1].ID || c.Fits[0].ID != fits[len(fits)-120].ID {
			t.Errorf("%s: %d fits from %d, want the last 120 of %d", name, len(c.Fits), c.Fits[0].ID, len(fits))
		}
		if len(c.Alerts) != 3 || c.Detail.Name != "bench-b" {
			t.Errorf("%s: %d alerts, detail %q", name, len(c.Alerts), c.Detail.Name)
		}
	}
	if _, err := Collect(ctx, fake, "nope", opts); !errors.Is(err, view.ErrNotFound) {
		t.Errorf("Collect of an unknown model: %v, want view.ErrNotFound", err)
	}
	fake.FailWith(errors.New("disk on fire"))
	if _, err := Collect(ctx, plainSource{fake}, "bench-b", opts); err == nil {
		t.Error("Collect from a failing source: nil error")
	}
}
