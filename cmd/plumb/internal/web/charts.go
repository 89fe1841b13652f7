package web

import (
	"html/template"

	"plumb/cmd/plumb/internal/chart"
	"plumb/cmd/plumb/internal/view"
)

// The dashboard's charts come from package chart, as the report's do:
// the same specs, drawn as inline SVG.

// MaxDrawn is the most points a chart draws (chart.MaxDrawn).
const MaxDrawn = chart.MaxDrawn

// num formats a diagnostic for people: 4 significant digits, "—" for undefined.
func num(v view.Float) string { return chart.Num(v) }

func verdictOr(v string) string {
	if v == "" {
		return "none"
	}
	return v
}

// modelCharts fills the model page's charts.
func modelCharts(mp *modelPage, md view.ModelDetail, fits []view.FitView, x string) {
	if len(md.Points) > 0 {
		if x != "" {
			mp.FitSVG = chart.FitWithSetAside(md, x).HTML()
			mp.DevSVG = chart.Deviation(md, x).HTML()
		}
		mp.InflSVG = chart.Influence(md).HTML()
		mp.CooksSVG = chart.Cooks(md).HTML()
	}
	for _, term := range md.Terms {
		var band *view.DriftBand
		for i := range md.Drift {
			if md.Drift[i].Term == term {
				band = &md.Drift[i]
			}
		}
		if s, ok := chart.History(fits, term, band); ok {
			chart.RebaselineEvents(&s, fits, md.Rebaselines)
			mp.History = append(mp.History, historyPanel{Term: term, SVG: s.HTML(), Drift: band})
		}
	}
}

// swatch is the legend's mark of a verdict, drawn as the charts draw it.
func swatch(verdict string) template.HTML { return chart.Swatch(verdict) }
