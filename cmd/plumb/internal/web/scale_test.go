package web

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

// bigModel is a straight line of n rows with noise and a few planted
// outliers, fitted by viewtest.StraightLine.
func bigModel(t testing.TB, n int) *viewtest.Fake {
	t.Helper()
	r := rand.New(rand.NewPCG(1, 2))
	x, y := make([]float64, n), make([]float64, n)
	for i := range n {
		x[i] = float64(i) / float64(n) * 100
		y[i] = 3 + 2*x[i] + r.NormFloat64()
	}
	for _, i := range []int{n / 3, n / 2, n - 1} {
		y[i] += 40
	}
	l := viewtest.Line{Name: "big", Response: "y", Predictor: "x", File: "big.csv", X: x, Y: y}
	d, err := viewtest.StraightLine(l)
	if err != nil {
		t.Fatal(err)
	}
	f := viewtest.New()
	f.SetModel(d)
	for _, h := range viewtest.LineHistory(viewtest.Line{Name: "big", Predictor: "x", X: x[:min(n, 400)], Y: y[:min(n, 400)]}) {
		f.AddFit("big", h)
	}
	return f
}

// A large model draws every flagged point and a bounded number of
// ordinary ones, and says so.
func TestModelPageThinsLargeData(t *testing.T) {
	const n = 20000
	src := bigModel(t, n)
	d, _ := src.Model(t.Context(), "big")
	flagged := n - countVerdict(d, view.VerdictOrdinary)
	h := New(src, Options{})
	w := serve(t, h, call{method: "GET", path: "/models/big"})
	if w.Code != 200 {
		t.Fatalf("status %d", w.Code)
	}
	body := w.Body.String()
	fit := chartOf(t, body, "fit")
	pts := strings.Count(fit, `class="pt `)
	if pts > MaxDrawn || pts < flagged {
		t.Errorf("fit chart draws %d points; want at most %d and at least the %d flagged", pts, MaxDrawn, flagged)
	}
	if got := strings.Count(fit, `class="pt v-suspect`); got != d.Suspects {
		t.Errorf("fit chart draws %d suspects, want %d", got, d.Suspects)
	}
	if !strings.Contains(body, "ordinary rows are not drawn") {
		t.Error("thinning not stated")
	}
	if len(body) > 3<<20 {
		t.Errorf("page is %d bytes", len(body))
	}
	if math.IsNaN(float64(d.Cutoffs.TCritical)) {
		t.Error("no t cutoff")
	}
}

func chartOf(t testing.TB, page, name string) string {
	t.Helper()
	i := strings.Index(page, fmt.Sprintf(`data-chart="%s"`, name))
	if i < 0 {
		t.Fatalf("no chart %s", name)
	}
	j := strings.Index(page[i:], "</svg>")
	return page[i : i+j]
}

// BenchmarkModelPage renders the model page (charts included) from an
// in-memory source.
func BenchmarkModelPage(b *testing.B) {
	for _, n := range []int{100, 1000, 10000} {
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			h := New(bigModel(b, n), Options{})
			b.ReportAllocs()
			for b.Loop() {
				w := serve(b, h, call{method: "GET", path: "/models/big"})
				if w.Code != 200 {
					b.Fatal(w.Code)
				}
			}
		})
	}
}

// The model page lists the latest quarantined rows, newest first, however
// long the quarantine: past the ten pages the paging fallback reads.
func TestModelPageLatestQuarantine(t *testing.T) {
	src := bigModel(t, 200)
	const rows = 12*MaxLimit + 7
	for i := 1; i <= rows; i++ {
		src.AddQuarantine(view.QuarantineView{Model: "big", File: "big.csv", Line: i + 1, Column: 2,
			Raw: "1,x", Reason: `column 2 "y": not a number`})
	}
	w := serve(t, New(src, Options{}), call{method: "GET", path: "/models/big"})
	if w.Code != 200 {
		t.Fatalf("status %d", w.Code)
	}
	body := w.Body.String()
	newest := fmt.Sprintf("big.csv:%d:2", rows+1)
	next := fmt.Sprintf("big.csv:%d:2", rows)
	i, j := strings.Index(body, newest), strings.Index(body, next)
	if i < 0 || j < 0 || i > j {
		t.Errorf("model page: newest quarantined row %s at %d, the one before at %d; want both, newest first", newest, i, j)
	}
	if strings.Contains(body, fmt.Sprintf("big.csv:%d:2", 10*MaxLimit+1)) {
		t.Error("model page lists a row far from the latest")
	}
}
