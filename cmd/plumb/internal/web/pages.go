package web

import (
	"bytes"
	"cmp"
	"context"
	"embed"
	"fmt"
	"html/template"
	"io/fs"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"time"

	"plumb/cmd/plumb/internal/chart"
	"plumb/cmd/plumb/internal/view"
)

//go:embed assets
var assets embed.FS

var pages = template.Must(template.New("").Funcs(template.FuncMap{
	"num": num,
	// fnum formats a flag's value or cutoff (float64, as the engine gives it).
	"fnum": func(x float64) string { return num(view.Float(x)) },
	"num6": func(v view.Float) string {
		if !v.Finite() {
			return "—"
		}
		return strconv.FormatFloat(float64(v), 'g', 6, 64)
	},
	"when": when,
	"short": func(t time.Time) string {
		if t.IsZero() {
			return "—"
		}
		return t.UTC().Format("2 Jan 15:04Z")
	},
	"counts": func(m map[string]int) string {
		var parts []string
		for _, k := range []string{view.VerdictSuspect, view.VerdictOutlier, view.VerdictInfluential, view.VerdictNotable, view.VerdictOrdinary} {
			if m[k] > 0 {
				parts = append(parts, fmt.Sprintf("%d %s", m[k], k))
			}
		}
		return strings.Join(parts, " · ")
	},
	"pct":    func(v view.Float) string { return num(v*100) + " %" },
	"swatch": swatch,
	"join": func(s []string, sep string) string {
		out := ""
		for i, v := range s {
			if i > 0 {
				out += sep
			}
			out += v
		}
		return out
	},
	"xval":  func(p view.Point, col string) view.Float { return p.X[col] },
	"sxval": func(p view.SetAsidePoint, col string) view.Float { return p.X[col] },
	// rowOf is the file:line of a suspect-point alert's subject.
	"rowOf": func(a view.AlertView) string { return strings.TrimPrefix(a.Subject, a.Model+"/") },
	"atval": func(s view.Suggestion) string { return chart.Settings(s.At) },
	"mtext": view.MeasureText,
}).ParseFS(assets, "assets/*.html"))

func when(t time.Time) string {
	if t.IsZero() {
		return "—"
	}
	return t.UTC().Format("2006-01-02 15:04:05Z")
}

func staticHandler() http.Handler {
	sub, err := fs.Sub(assets, "assets/static")
	if err != nil {
		panic("web: embedded assets: " + err.Error())
	}
	fsrv := http.FileServerFS(sub)
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Cache-Control", "public, max-age=300")
		fsrv.ServeHTTP(w, r)
	})
}

// pageData is what the layout and every page template get.
type pageData struct {
	Page      string // overview, model, alerts, alert, error
	Title     string
	Caution   string
	NeedToken bool
	// Acting says who the server takes the caller for ("r.okafor
	// (reviewer)"); the page's script refines it with the token typed in.
	Acting    string
	RefreshMS int64
	Version   string
	Now       time.Time

	Models     []view.ModelSummary
	OpenAlerts []view.AlertView
	Model      *modelPage
	Alert      *alertPage
	Alerts     []view.AlertView
	State      string
	States     []string
	NextOffset int
	PrevOffset int
	HasPrev    bool
	Error      string
	Status     int
}

type modelPage struct {
	D          view.ModelDetail
	Held       string // the other predictors' values under the fit curve
	Thinned    int    // ordinary points not drawn
	Predictor  string
	FitSVG     template.HTML
	DevSVG     template.HTML // the deviation chart (chart.Deviation)
	InflSVG    template.HTML
	CooksSVG   template.HTML
	History    []historyPanel
	FitCount   int
	Notable    []view.Point
	Alerts     []view.AlertView
	Quarantine []view.QuarantineView // the latest, newest first
	Counts     map[string]int
	// Quiet are the quiet periods of the model (and of all models) not
	// yet over, with whether each is in force now.
	Quiet []quietRow
}

type quietRow struct {
	view.QuietView
	Now bool
}

type historyPanel struct {
	Term  string
	SVG   template.HTML
	Drift *view.DriftBand
}

func (s *server) base(ctx context.Context, page, title string) pageData {
	v, _ := s.version(ctx)
	return pageData{
		Page: page, Title: title, Caution: view.Caution,
		NeedToken: s.opts.Token != "" || !s.gate.Open(), RefreshMS: s.opts.Refresh.Milliseconds(),
		Version: v, Now: time.Now().UTC(),
	}
}

func (s *server) render(w http.ResponseWriter, r *http.Request, status int, d pageData) {
	if u, err := s.gate.Identify(r); err == nil {
		d.Acting = acting(u)
	}
	var buf bytes.Buffer
	if err := pages.ExecuteTemplate(&buf, "layout", d); err != nil {
		s.log.Error("render page", "page", d.Page, "err", err)
		http.Error(w, "render page: "+err.Error(), http.StatusInternalServerError)
		return
	}
	h := w.Header()
	h.Set("Content-Type", "text/html; charset=utf-8")
	h.Set("Cache-Control", "no-store")
	h.Set("Content-Security-Policy", "default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; frame-ancestors 'none'")
	h.Set("X-Content-Type-Options", "nosniff")
	w.WriteHeader(status)
	w.Write(buf.Bytes())
}

func (s *server) pageError(w http.ResponseWriter, r *http.Request, err error) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	status := statusOf(err)
	d := s.base(ctx, "error", http.StatusText(status))
	d.Error, d.Status = err.Error(), status
	if status >= 500 {
		s.log.Error("web page failed", "path", r.URL.Path, "err", err)
	}
	s.render(w, r, status, d)
}

func (s *server) pageOverview(w http.ResponseWriter, r *http.Request) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	ms, err := s.src.Models(ctx)
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	open, err := s.src.Alerts(ctx, view.AlertFilter{State: view.AlertOpen, Limit: 20})
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	d := s.base(ctx, "overview", "Models")
	d.Models, d.OpenAlerts = ms, open
	s.render(w, r, http.StatusOK, d)
}

// historyKeep is how many of the latest fits the model page charts.
const historyKeep = 300

func (s *server) pageModel(w http.ResponseWriter, r *http.Request) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	name := r.PathValue("name")
	md, err := s.src.Model(ctx, name)
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	fits, err := view.LatestFits(ctx, s.src, name, historyKeep)
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	als, err := s.src.Alerts(ctx, view.AlertFilter{Model: name, Limit: 50})
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	quar, err := view.LatestQuarantine(ctx, s.src, name, 20)
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	mp := buildModelPage(md, fits, r.URL.Query().Get("x"))
	mp.Alerts = als
	if dc, ok := s.src.(view.Decider); ok {
		qs, err := dc.QuietPeriods(ctx)
		if err != nil {
			s.pageError(w, r, err)
			return
		}
		now := time.Now()
		for _, q := range qs {
			if (q.Model == "" || q.Model == name) && q.End.After(now) {
				mp.Quiet = append(mp.Quiet, quietRow{q, !q.Start.After(now)})
			}
		}
	}
	slices.Reverse(quar) // newest first
	mp.Quarantine = quar
	d := s.base(ctx, "model", name)
	d.Model = mp
	s.render(w, r, http.StatusOK, d)
}

// buildModelPage lays out one model: the charts and the notable rows.
func buildModelPage(md view.ModelDetail, fits []view.FitView, x string) *modelPage {
	mp := &modelPage{D: md, FitCount: len(fits), Counts: map[string]int{}}
	if !slices.Contains(md.Predictors, x) {
		x = ""
		if len(md.Predictors) > 0 {
			x = md.Predictors[0]
		}
	}
	mp.Predictor = x
	if c, ok := md.Curve(x); ok && len(c.Held) > 0 {
		mp.Held = chart.Settings(c.Held)
	}
	_, mp.Thinned = view.ThinPoints(md.Points, MaxDrawn)
	for _, p := range md.Points {
		mp.Counts[verdictOr(p.Verdict)]++
		if p.Verdict != view.VerdictOrdinary && p.Verdict != "" {
			mp.Notable = append(mp.Notable, p)
		}
	}
	slices.SortStableFunc(mp.Notable, func(a, b view.Point) int {
		return cmp.Compare(view.Rank(b.Verdict), view.Rank(a.Verdict))
	})
	if len(mp.Notable) > 40 {
		mp.Notable = mp.Notable[:40]
	}
	modelCharts(mp, md, fits, x)
	return mp
}

const alertsPerPage = 50

func (s *server) pageAlerts(w http.ResponseWriter, r *http.Request) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	f, err := alertFilter(r)
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	f.Limit = alertsPerPage + 1
	as, err := s.src.Alerts(ctx, f)
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	d := s.base(ctx, "alerts", "Alerts")
	d.State = f.State
	d.States = []string{"", view.AlertOpen, view.AlertAcknowledged, view.AlertResolved}
	if len(as) > alertsPerPage {
		as = as[:alertsPerPage]
		d.NextOffset = f.Offset + alertsPerPage
	}
	d.Alerts = as
	if f.Offset > 0 {
		d.HasPrev, d.PrevOffset = true, max(f.Offset-alertsPerPage, 0)
	}
	s.render(w, r, http.StatusOK, d)
}
