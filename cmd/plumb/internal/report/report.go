// Package report writes what plumb knows about one model as a file a
// person can keep, mail or attach to a deviation record: one
// self-contained HTML page (styles inline, charts inline as SVG drawn by
// package chart as the dashboard's are, no external resource of any kind),
// or a single chart as SVG or PNG.
//
//	c, err := report.Collect(ctx, src, "bench-b", report.Options{})
//	err = report.Render(f, c, report.Options{})
//	err = report.Chart(f, c.Detail, report.ChartCooks, "png")
//
// The page holds the fit (coefficients with intervals, σ, R²), the charts
// (data and fitted curve with the suggested collection points, residual
// against leverage with its cutoffs, Cook's distance with its cutoffs, each
// coefficient's history with its drift band), the notable rows of the
// influence table with their provenance, the rows that could not be read
// (quarantined), the fragility of the fit, where to collect more data, the
// alert history and the caution.
//
// # Rows that could not be read
//
// The newest quarantined rows (Options.MaxQuarantine, 50 by default) are
// listed newest first with file:line:column, the reason and the text as
// read; a line says how many older ones are not listed and names the
// daemon's API request that lists them all. The text is escaped for HTML
// and every character that would not print as itself (a tab, a NUL, a
// no-break space, a bidirectional override, a byte that is not UTF-8) is
// shown as a marked escape such as \t or \u00a0, so the page shows what the
// file holds and data can never become markup. Text longer than 200
// characters (a reason, 300) is cut, with a note giving its full length.
//
// Report and the dashboard consume the same view.ModelDetail: the numbers
// are the daemon's, nothing is computed here but layout.
package report

import (
	"cmp"
	"fmt"
	"html/template"
	"io"
	"slices"
	"strconv"
	"strings"
	"time"

	"plumb/cmd/plumb/internal/chart"
	"plumb/cmd/plumb/internal/view"
)

// Options tune the report. The zero value is ready to use.
type Options struct {
	// Title heads the page (default "plumb report: <model>").
	Title string
	// Generated is the time printed as the report's date (default now).
	Generated time.Time
	// Predictor chooses the column of the data-and-fit chart (default the
	// model's first predictor).
	Predictor string
	// MaxRows bounds the rows of the influence table (default 50).
	MaxRows int
	// HistoryKeep bounds how many of the latest fits the history charts
	// show (default 300).
	HistoryKeep int
	// MaxQuarantine bounds the quarantined rows listed (default 50); the
	// report counts the rest and says where to see them all.
	MaxQuarantine int
}

// withDefaults fills in the documented defaults.
func (o Options) withDefaults() Options {
	if o.Generated.IsZero() {
		o.Generated = time.Now()
	}
	if o.MaxRows <= 0 {
		o.MaxRows = 50
	}
	if o.HistoryKeep <= 0 {
		o.HistoryKeep = 300
	}
	if o.MaxQuarantine <= 0 {
		o.MaxQuarantine = 50
	}
	return o
}

type figure struct {
	Name    string
	Caption string
	SVG     template.HTML
}

type pageData struct {
	Title       string
	Generated   string
	Caution     string
	D           view.ModelDetail
	Figures     []figure
	History     []figure
	Notable     []view.Point
	NotableMore int
	Counts      string
	Alerts      []view.AlertView
	FitCount    int
	Quarantine  quarSection
	Decisions   []view.DecisionView
}

// Write writes the model's report as one self-contained HTML document.
// fits is the fit history, oldest first; alerts are the model's alerts
// (any order; shown newest first). Write lists no quarantined rows, only
// their number (d.Quarantined) and where to see them; Render with the
// Contents that Collect gathers lists them.
func Write(w io.Writer, d view.ModelDetail, fits []view.FitView, alerts []view.AlertView, opts Options) error {
	return Render(w, Contents{Detail: d, Fits: fits, Alerts: alerts}, opts)
}

// Render writes the report of c as one self-contained HTML document.
func Render(w io.Writer, c Contents, opts Options) error {
	d, fits, alerts := c.Detail, c.Fits, c.Alerts
	opts = opts.withDefaults()
	if opts.Title == "" {
		opts.Title = "plumb report: " + d.Name
	}
	if len(fits) > opts.HistoryKeep {
		fits = fits[len(fits)-opts.HistoryKeep:]
	}
	pd := pageData{
		Title: opts.Title, Generated: opts.Generated.UTC().Format("2006-01-02 15:04:05Z"),
		Caution: view.Caution, D: d, FitCount: len(fits),
	}
	predictor := opts.Predictor
	if !slices.Contains(d.Predictors, predictor) {
		predictor = firstPredictor(d)
	}
	if len(d.Points) > 0 {
		if predictor != "" {
			caption := "The response against " + predictor + " with the fitted mean, its 95 % confidence band and the 95 % prediction band of one new reading"
			if c, ok := d.Curve(predictor); ok && len(c.Held) > 0 {
				caption += ", the other predictors held at " + chart.Settings(c.Held)
			}
			caption += ". Green triangles on the bottom edge mark where more readings would help the fit most."
			if _, thinned := view.ThinPoints(d.Points, MaxDrawn); thinned > 0 {
				caption += fmt.Sprintf(" %d ordinary rows are not drawn (evenly thinned); every flagged row is.", thinned)
			}
			pd.Figures = append(pd.Figures, figure{ChartFit, caption, chart.FitWithSetAside(d, predictor).HTML()})
			pd.Figures = append(pd.Figures, deviationFigure(d, predictor))
		}
		pd.Figures = append(pd.Figures, figure{ChartInfluence, fmt.Sprintf(
			"Externally studentized residual against leverage. Dashed: 2p/n = %s. Dotted: ±%s, the Bonferroni critical |t| at α = %s.",
			num(d.Cutoffs.Leverage), num(d.Cutoffs.TCritical), num(d.Cutoffs.Alpha)), chart.Influence(d).HTML()})
		pd.Figures = append(pd.Figures, figure{ChartCooks, fmt.Sprintf(
			"Cook's distance by row of the fit. Dashed: 4/n = %s. Dotted: the absolute cutoff %s.",
			num(d.Cutoffs.CookSizeAdjusted), num(d.Cutoffs.CookAbsolute)), chart.Cooks(d).HTML()})
	}
	for _, term := range d.Terms {
		if s, ok := chart.History(fits, term, driftOf(d, term)); ok {
			chart.RebaselineEvents(&s, fits, d.Rebaselines)
			pd.History = append(pd.History, figure{chart.NameHistory, term, s.HTML()})
		} // else the term is new or the history is empty
	}
	counts := map[string]int{}
	for _, p := range d.Points {
		counts[p.Verdict]++
		if p.Verdict != "" && p.Verdict != view.VerdictOrdinary {
			pd.Notable = append(pd.Notable, p)
		}
	}
	slices.SortStableFunc(pd.Notable, func(a, b view.Point) int {
		if c := cmp.Compare(view.Rank(b.Verdict), view.Rank(a.Verdict)); c != 0 {
			return c
		}
		return cmp.Compare(float64(b.Cook), float64(a.Cook))
	})
	if len(pd.Notable) > opts.MaxRows {
		pd.NotableMore = len(pd.Notable) - opts.MaxRows
		pd.Notable = pd.Notable[:opts.MaxRows]
	}
	var parts []string
	for _, k := range []string{view.VerdictSuspect, view.VerdictOutlier, view.VerdictInfluential, view.VerdictNotable, view.VerdictOrdinary} {
		if counts[k] > 0 {
			parts = append(parts, fmt.Sprintf("%d %s", counts[k], k))
		}
	}
	pd.Counts = strings.Join(parts, ", ")
	pd.Quarantine = quarantineSection(d.Name, d.Quarantined, c.Quarantine, opts.MaxQuarantine)
	pd.Decisions = c.Decisions
	pd.Alerts = slices.Clone(alerts)
	slices.SortStableFunc(pd.Alerts, func(a, b view.AlertView) int { return b.LastSeen.Compare(a.LastSeen) })
	if err := page.Execute(w, pd); err != nil {
		return fmt.Errorf("report: write HTML: %w", err)
	}
	return nil
}

// num formats a number for people: 4 significant digits, "—" when undefined.
func num(v view.Float) string { return chart.Num(v) }

func when(t time.Time) string {
	if t.IsZero() {
		return "—"
	}
	return t.UTC().Format("2006-01-02 15:04:05Z")
}

var page = template.Must(template.New("report").Funcs(template.FuncMap{
	"num": num,
	"num6": func(v view.Float) string {
		if !v.Finite() {
			return "—"
		}
		return strconv.FormatFloat(float64(v), 'g', 6, 64)
	},
	"when":  when,
	"join":  strings.Join,
	"xval":  func(p view.Point, col string) view.Float { return p.X[col] },
	"sxval": func(p view.SetAsidePoint, col string) view.Float { return p.X[col] },
	"at":    func(s view.Suggestion) string { return chart.Settings(s.At) },
}).Parse(pageTemplate))

const pageTemplate = `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="plumb">
<title>{{.Title}}</title>
<style>
:root { --paper:#fbfaf6; --ink:#1f2a33; --muted:#66717a; --rule:#dcd6ca; --green:#2f6f62; --hot:#b33b2a; }
* { box-sizing: border-box; }
body { margin: 0; background: var(--paper); color: var(--ink); font: 13.5px/1.5 system-ui, "Segoe UI", "Noto Sans", "DejaVu Sans", sans-serif; font-variant-numeric: tabular-nums; }
.sheet { max-width: 980px; margin: 0 auto; padding: 28px 36px 40px; }
h1 { font: 500 26px/1.2 Georgia, "DejaVu Serif", serif; margin: 0; }
h2 { font: 600 16px/1.3 Georgia, "DejaVu Serif", serif; margin: 28px 0 8px; padding-bottom: 4px; border-bottom: 1px solid var(--rule); }
.meta { color: var(--muted); font-size: 12px; margin: 4px 0 0; }
.formula { font-family: "DejaVu Sans Mono", monospace; font-size: 12.5px; }
.caution { border-left: 3px solid var(--green); background: #f1efe7; padding: 8px 12px; margin: 16px 0; font-size: 12.5px; }
.facts { display: grid; grid-template-columns: repeat(5, 1fr); gap: 0; border: 1px solid var(--rule); margin: 12px 0; }
.facts div { padding: 6px 10px; border-right: 1px solid var(--rule); }
.facts div:last-child { border-right: 0; }
.facts span { display: block; font-size: 11px; color: var(--muted); }
.facts b { font-weight: 500; font-size: 16px; }
table { border-collapse: collapse; width: 100%; font-size: 12.5px; }
th { text-align: left; font-weight: 600; font-size: 11px; color: var(--muted); border-bottom: 1px solid var(--rule); padding: 4px 6px; }
td { border-bottom: 1px solid #ece7dd; padding: 4px 6px; vertical-align: top; }
td.n { text-align: right; }
td.m { font-family: "DejaVu Sans Mono", monospace; font-size: 11.5px; }
td.where { white-space: nowrap; }
td.raw { white-space: pre-wrap; word-break: break-all; max-width: 420px; }
.esc { font-family: "DejaVu Sans Mono", monospace; font-size: 10.5px; color: var(--hot); background: #f4e3dc; border-radius: 2px; padding: 0 2px; }
.cut { color: var(--muted); font-family: system-ui, "Segoe UI", "Noto Sans", "DejaVu Sans", sans-serif; font-style: italic; white-space: normal; }
figure { margin: 14px 0; page-break-inside: avoid; }
figure svg { max-width: 100%; height: auto; display: block; margin: 0 auto; }
figcaption { color: var(--muted); font-size: 12px; margin-top: 2px; }
.hist { display: grid; grid-template-columns: 1fr 1fr; gap: 10px; }
.verdict { font-weight: 600; }
.v-suspect { color: var(--hot); } .v-outlier { color: #3d5a98; } .v-influential { color: #8c4a8f; } .v-notable { color: #97701f; }
.hot { color: var(--hot); font-weight: 600; }
.empty { color: var(--muted); font-style: italic; }
.state { text-transform: uppercase; font-size: 10.5px; letter-spacing: .05em; font-weight: 600; }
footer { margin-top: 32px; border-top: 1px solid var(--rule); padding-top: 8px; color: var(--muted); font-size: 11.5px; }
@media print { body { background: #fff; } .sheet { padding: 0; } }
</style>
</head>
<body>
<div class="sheet">
<header>
<h1>{{.Title}}</h1>
<p class="meta">Generated {{.Generated}} · model <b>{{.D.Name}}</b> · state {{.D.State}}{{if .D.FitID}} · fit #{{.D.FitID}} at {{when .D.FitAt}}{{end}}</p>
<p class="formula">{{.D.Response}} ~ {{join .D.Terms " + "}}</p>
</header>
<p class="caution" data-caution><b>Caution.</b> {{.Caution}} Flags below are prompts to look, not findings.</p>
{{if .D.Reason}}<p><b>State:</b> {{.D.Reason}}</p>{{end}}

<div class="facts">
<div><span>rows in fit</span><b>{{.D.N}}</b></div>
<div><span>rows quarantined</span><b>{{.D.Quarantined}}</b></div>
{{if .D.Missing}}<div><span>rows missing a value (left out)</span><b data-missing>{{.D.Missing}}</b></div>{{end}}
<div><span>σ (residual SD)</span><b>{{num .D.Sigma}}{{with index .D.Units .D.Response}} {{.}}{{end}}</b></div>
<div><span>R² (adjusted)</span><b>{{num6 .D.RSquared}} ({{num6 .D.AdjRSquared}})</b></div>
<div><span>fragility index</span><b {{if .D.Fragility.Alarming}}class="hot"{{end}}>{{.D.Fragility}}</b></div>
</div>

<h2>Fit</h2>
{{if .D.Coefficients}}
<table>
<thead><tr><th>term</th><th>estimate</th><th>std. error</th><th>t</th><th>p</th><th>95 % interval</th></tr></thead>
<tbody>{{range .D.Coefficients}}<tr><td class="m">{{.Term}}</td><td class="n">{{num .Estimate}}</td><td class="n">{{num .StdError}}</td><td class="n">{{num .T}}</td><td class="n">{{num .P}}</td><td class="n">{{num .Lower95}} … {{num .Upper95}}</td></tr>{{end}}</tbody>
</table>
{{else}}<p class="empty">No fit yet.</p>{{end}}

{{range .Figures}}<figure data-figure="{{.Name}}">{{.SVG}}<figcaption>{{.Caption}}</figcaption></figure>
{{end}}

<h2>Rows that stand out</h2>
{{if .Notable}}
<p class="meta">Verdicts under the current fit: {{.Counts}}. Cutoffs: leverage 2p/n = {{num .D.Cutoffs.Leverage}}; Cook's distance 4/n = {{num .D.Cutoffs.CookSizeAdjusted}} and absolute {{num .D.Cutoffs.CookAbsolute}}; Bonferroni critical |t| = {{num .D.Cutoffs.TCritical}}.</p>
<table>
<thead><tr><th>file:line</th><th>verdict</th>{{range .D.Predictors}}<th>{{.}}</th>{{end}}<th>{{.D.Response}}</th><th>fitted</th><th>leverage</th><th>t</th><th>Cook's D</th><th>DFFITS</th><th>Bonferroni p</th><th>cutoffs crossed</th></tr></thead>
<tbody>{{range $p := .Notable}}<tr data-row="{{.Row}}"><td class="m">{{.File}}:{{.Line}}{{if .Label}} <b data-label>{{.Label}}</b>{{end}}</td><td class="verdict v-{{.Verdict}}">{{.Verdict}}</td>{{range $.D.Predictors}}<td class="n">{{num (xval $p .)}}</td>{{end}}<td class="n">{{num .Y}}</td><td class="n">{{num .Fitted}}</td><td class="n">{{num .Leverage}}</td><td class="n">{{num .StudentizedExternal}}</td><td class="n">{{num .Cook}}</td><td class="n">{{num .DFFITS}}</td><td class="n">{{num .BonferroniP}}</td><td class="flags">{{range $i, $f := .Flags}}{{if $i}}; {{end}}<span data-flag="{{$f.Measure}}">{{$f.Text}}</span>{{end}}</td></tr>{{end}}</tbody>
</table>
{{if .NotableMore}}<p class="meta">… and {{.NotableMore}} more notable rows not listed.</p>{{end}}
{{else}}<p class="empty">No row crosses a cutoff under the current fit.</p>{{end}}

<h2 id="quarantine">Rows that could not be read</h2>
{{with .Quarantine}}
{{if .Rows}}
<p class="meta" data-quarantine-total="{{.Total}}">{{.Total}} row{{if ne .Total 1}}s{{end}} of this model could not be read. plumb keeps each one aside in its history exactly as read, with the reason: it is not in the fit, and plumb neither corrects nor deletes it nor changes the file. Listed: the newest {{len .Rows}}, newest first. Characters that do not print are shown marked, e.g. <span class="esc">\t</span> for a tab.</p>
<table class="quarantine">
<thead><tr><th>file:line:column</th><th>reason</th><th>text as read</th><th>quarantined</th></tr></thead>
<tbody>{{range .Rows}}<tr data-quarantine="{{.ID}}"><td class="m where">{{.Where}}</td><td>{{.Reason}}{{if .ReasonCut}}<span class="cut"> … (cut)</span>{{end}}</td><td class="m raw">{{.Raw}}{{if .RawCut}}<span class="cut" data-cut> … (cut: the first {{.RawShown}} of {{.RawTotal}} characters shown)</span>{{end}}</td><td>{{.At}}</td></tr>{{end}}</tbody>
</table>
{{if .More}}<p class="meta" data-quarantine-more="{{.More}}">… and {{.More}} older row{{if ne .More 1}}s{{end}} not listed. The daemon's API lists every one, oldest first: <span class="m">GET {{.API}}</span>, then add <span class="m">&amp;after=</span> the last id of a page for the next; the dashboard's model page shows the latest.</p>{{end}}
{{else if .Total}}
<p class="meta" data-quarantine-total="{{.Total}}" data-quarantine-more="{{.More}}">{{.Total}} row{{if ne .Total 1}}s{{end}} of this model could not be read; plumb keeps them aside, unchanged, and they are not in the fit. They are not listed in this report. The daemon's API lists every one, oldest first: <span class="m">GET {{.API}}</span>, then add <span class="m">&amp;after=</span> the last id of a page for the next.</p>
{{else}}<p class="empty">No row of this model has been quarantined.</p>{{end}}
{{end}}

<h2>Does the model form hold?</h2>
{{with .D.Form}}
<p class="meta">Checks of the current fit at level {{$.D.FormLevel}}{{if $.D.Weights}}; the fit is weighted by {{$.D.Weights}} and each check is its weighted version{{end}}. A significant check is a reason to look, not a verdict.</p>
<table>
<thead><tr><th>check</th><th>statistic</th><th>df</th><th>p</th><th>in words</th></tr></thead>
<tbody>{{range .Lines $.D.FormLevel}}<tr data-check="{{.Name}}"><td class="m">{{.Name}}</td>{{if .Tested}}<td class="n">{{num .Statistic}}</td><td class="n">{{.DF}}</td><td class="n">{{num .P}}</td>{{else}}<td class="n">—</td><td></td><td class="n">—</td>{{end}}<td>{{if .Significant}}<b class="hot">{{.Words}}</b>{{else}}{{.Words}}{{end}}{{if .Next}}. A usual next step: {{.Next}}{{end}}{{if .Method}} (p: {{.Method}}){{end}}</td></tr>{{end}}</tbody>
</table>
<p class="meta">PRESS = {{num .PRESS}}, predicted R² = {{num6 .PredictedRSquared}} (leave-one-out prediction).</p>
{{else}}<p class="empty">Not computed for this fit.</p>{{end}}
{{with .D.Pool}}
<h2>Can the groups be pooled?</h2>
<p data-pool>{{.Levels}} levels of {{.Group}}, slope on {{.Predictor}}, tested at {{num .Alpha}}: equal slopes F = {{num .Slopes.F}} on {{.Slopes.DF1}} and {{.Slopes.DF2}} degrees of freedom, p = {{num .Slopes.P}}; equal intercepts F = {{num .Intercepts.F}} on {{.Intercepts.DF1}} and {{.Intercepts.DF2}}, p = {{num .Intercepts.P}}. Verdict: <b>{{.Verdict}}</b> ({{.Words}}). A suggestion for qualified staff, who decide.</p>
{{end}}
<h2 id="decisions">Decisions</h2>
<p class="meta" data-decisions-caution>Decisions recorded by named staff after an alert. A reading set aside stays stored with its values and provenance, is drawn hollow and is left out of the fit, the drift check, fragility and suggestions from the refresh after the decision; plumb never deleted or altered a measurement. Decisions stay with qualified staff under local quality procedures and codes; the audit trail (<span class="m">plumb audit export</span>) holds who, when, why, before and after.</p>
{{if .D.SetAside}}
<table data-set-aside>
<thead><tr><th>file:line</th>{{range .D.Predictors}}<th>{{.}}</th>{{end}}<th>{{.D.Response}}</th><th>set aside</th></tr></thead>
<tbody>{{range $p := .D.SetAside}}<tr data-obs="{{.ID}}"><td class="m">{{.File}}:{{.Line}}</td>{{range $.D.Predictors}}<td class="n">{{num (sxval $p .)}}</td>{{end}}<td class="n">{{num .Y}}</td><td>{{.Note}}</td></tr>{{end}}</tbody>
</table>
{{else}}<p class="empty">No reading of this model is set aside.</p>{{end}}
{{if .Decisions}}
<table data-decisions>
<thead><tr><th>when</th><th>decision</th><th>reading (obs id)</th><th>audit record</th></tr></thead>
<tbody>{{range .Decisions}}<tr data-decision="{{.ID}}"><td>{{when .At}}</td><td>{{.Note}}</td><td class="m">{{.ObsID}}</td><td class="m">{{.AuditSeq}}</td></tr>{{end}}</tbody>
</table>
{{end}}
{{if .D.Rebaselines}}<ul data-rebaselines>{{range .D.Rebaselines}}<li>{{.Note}} (recorded {{when .Recorded}}, audit record {{.AuditSeq}})</li>{{end}}</ul>
{{else}}<p class="empty">No re-baseline recorded: the drift baseline is the model's first rows{{if .D.SetAside}} not set aside{{end}}.</p>{{end}}

<h2>Fragility</h2>
{{with .D.Fragility}}
{{if not .Computed}}<p class="empty">Not computed for this fit.</p>
{{else if not .Found}}<p>No removal of up to {{.K}} rows changes a conclusion of this fit.</p>
{{else}}<p>Removing <b {{if .Alarming}}class="hot"{{end}}>{{.Index}}</b> row{{if gt .Index 1}}s{{end}} changes a conclusion: {{.Conclusion}}. The rows: {{range $i, $r := .Rows}}{{if $i}}, {{end}}<span class="m">{{$r.File}}:{{$r.Line}}{{if $r.Label}} {{$r.Label}}{{end}}</span>{{end}}.{{if .Fragile}} This is at or below the limit of {{.Limit}}: the fit is fragile.{{end}}</p>{{end}}
{{if .Searched}}<p class="meta">Search: {{.Searched}}, up to {{.K}} rows removed together.</p>{{end}}
{{end}}

<h2>Where to collect more data</h2>
{{if .D.Suggestions}}<ol>{{range .D.Suggestions}}<li><b>{{at .}}</b>: {{.Text}}</li>{{end}}</ol>
{{else}}<p class="empty">No suggestion for this fit.</p>{{end}}

{{if or .D.Predictions .D.Inverse}}
<h2 id="answers">Calibration answers</h2>
<p class="meta">From the current fit, as configured for this model{{with index .D.Units .D.Response}}; {{$.D.Response}} in {{.}}{{end}}. An interval marked — reaches the end of the calibrated range: the data do not bound it there.</p>
{{if .D.Predictions}}<table data-predictions>
<thead><tr><th>at</th><th>{{.D.Response}}</th><th>std. error</th><th>the mean lies in</th><th>a new value falls in</th><th>level</th><th>readings</th></tr></thead>
<tbody>{{range .D.Predictions}}<tr><td class="m">{{.Point}}</td><td class="n">{{num .Fitted}}</td><td class="n">{{num .SEFit}}</td><td class="n">{{num (index .Confidence 0)}} … {{num (index .Confidence 1)}}</td><td class="n">{{num (index .Prediction 0)}} … {{num (index .Prediction 1)}}</td><td class="n">{{num .Level}}</td><td class="n">{{.Readings}}</td></tr>{{end}}</tbody>
</table>{{end}}
{{if .D.Inverse}}<table data-inverse>
<thead><tr><th>reading</th><th>stands for</th><th>std. uncertainty</th><th>interval</th><th>level</th><th>readings</th></tr></thead>
<tbody>{{range .D.Inverse}}<tr><td class="n">{{num .Reading}}</td><td class="m">{{.Column}} = {{num .Estimate}}</td><td class="n">{{num .StandardUncertainty}}</td><td class="n">{{num (index .Interval 0)}} … {{num (index .Interval 1)}}</td><td class="n">{{num .Level}}</td><td class="n">{{.Readings}}</td></tr>{{if .Note}}<tr><td colspan="6">{{.Note}}</td></tr>{{end}}{{end}}</tbody>
</table>{{end}}
{{end}}

{{if .History}}
<h2>Coefficient history</h2>
<p class="meta">The last {{.FitCount}} fits. Shaded amber: the drift band around the baseline; grey: ±1.96 standard errors.</p>
<div class="hist">{{range .History}}<figure data-figure="history" data-term="{{.Caption}}">{{.SVG}}</figure>{{end}}</div>
{{end}}

<h2>Alert history</h2>
{{if .Alerts}}
<table>
<thead><tr><th>alert id</th><th>state</th><th>kind</th><th>severity</th><th>what</th><th>first seen</th><th>last seen</th><th>note</th></tr></thead>
<tbody>{{range .Alerts}}<tr data-alert="{{.ID}}"><td class="m">{{.ID}}</td><td class="state">{{.State}}</td><td class="m">{{.Kind}}</td><td>{{.Severity}}</td><td>{{.Summary}}</td><td>{{when .FirstSeen}}</td><td>{{when .LastSeen}}</td><td>{{.Note}}{{if .By}} ({{.By}}){{end}}</td></tr>{{end}}</tbody>
</table>
{{else}}<p class="empty">No alerts.</p>{{end}}

<footer data-caution>{{.Caution}} This report was generated by plumb from its history; it contains no edited data.</footer>
</div>
</body>
</html>
`
