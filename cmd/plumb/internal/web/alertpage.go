package web

import (
	"errors"
	"html/template"
	"net/http"
	"slices"
	"sort"
	"strconv"

	"plumb/cmd/plumb/internal/chart"
	"plumb/cmd/plumb/internal/view"
)

// alertPage is one alert with its evidence: what its document says, the
// reading behind it in the model's current fit, and the model's charts
// with that reading (or the rows a fragile conclusion rests on) ringed.
type alertPage struct {
	A view.AlertView
	D view.AlertDetail
	// Model is the alert's model now (nil when it is no longer
	// configured); Point is the alert's reading in the current fit (nil
	// when it is not in it, e.g. after the window moved on).
	Model     *view.ModelDetail
	Point     *view.Point
	Predictor string
	// Marked are the rows ringed on the charts, as "file:line".
	Marked []string
	// Values lists the reading's values in column order.
	Values   []namedValue
	FitSVG   template.HTML
	InflSVG  template.HTML
	CooksSVG template.HTML
}

type namedValue struct {
	Name  string
	Value view.Float
}

func (s *server) pageAlert(w http.ResponseWriter, r *http.Request) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	a, err := s.src.Alert(ctx, r.PathValue("id"))
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	det, err := a.Detail()
	if err != nil {
		s.pageError(w, r, err)
		return
	}
	ap := &alertPage{A: a, D: det}
	if md, err := s.src.Model(ctx, a.Model); err == nil {
		ap.Model = &md
		ap.charts(md, r.URL.Query().Get("x"))
	} else if !errors.Is(err, view.ErrNotFound) {
		s.pageError(w, r, err)
		return
	}
	if p := det.Point; p != nil {
		var cols []string
		if ap.Model != nil {
			// the response first, then the predictors, as the model names them
			cols = append([]string{ap.Model.Response}, ap.Model.Predictors...)
		} else {
			for c := range p.Values {
				cols = append(cols, c)
			}
			sort.Strings(cols)
		}
		for _, c := range cols {
			if v, ok := p.Values[c]; ok {
				ap.Values = append(ap.Values, namedValue{c, v})
			}
		}
	}
	d := s.base(ctx, "alert", "Alert "+a.ID)
	d.Alert = ap
	s.render(w, r, http.StatusOK, d)
}

// charts draws the model's charts with the alert's rows ringed.
func (ap *alertPage) charts(md view.ModelDetail, x string) {
	if !slices.Contains(md.Predictors, x) {
		x = ""
		if len(md.Predictors) > 0 {
			x = md.Predictors[0]
		}
	}
	ap.Predictor = x
	switch {
	case ap.D.Point != nil:
		ap.Marked = []string{ap.D.Point.File + ":" + strconv.Itoa(ap.D.Point.Line)}
	case ap.D.Fragility != nil:
		ap.Marked = ap.D.Fragility.Removed
	}
	rows := map[int]bool{}
	for i := range md.Points {
		p := &md.Points[i]
		if slices.Contains(ap.Marked, p.File+":"+strconv.Itoa(p.Line)) {
			rows[p.Row] = true
			if ap.D.Point != nil && ap.Point == nil {
				ap.Point = p
			}
		}
	}
	if len(md.Points) == 0 {
		return
	}
	if x != "" {
		ap.FitSVG = highlight(chart.Fit(md, x), rows).HTML()
	}
	ap.InflSVG = highlight(chart.Influence(md), rows).HTML()
	ap.CooksSVG = highlight(chart.Cooks(md), rows).HTML()
}

// highlight rings the marks of the given rows (chart.Mark.Highlight) in
// every point layer of s.
func highlight(s chart.Spec, rows map[int]bool) chart.Spec {
	if len(rows) == 0 {
		return s
	}
	layers := slices.Clone(s.Layers)
	for i, l := range layers {
		p, ok := l.(chart.Points)
		if !ok || p.Series {
			continue
		}
		p.Marks = slices.Clone(p.Marks)
		for k := range p.Marks {
			if rows[p.Marks[k].Row] {
				p.Marks[k].Highlight = true
			}
		}
		layers[i] = p
	}
	s.Layers = layers
	return s
}
