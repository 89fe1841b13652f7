package viewtest

import (
	"errors"
	"fmt"
	"math"
	"time"

	"gonum.org/v1/gonum/stat/distuv"

	"plumb/cmd/plumb/internal/view"
)

// Line describes a one-predictor data set for StraightLine.
type Line struct {
	Name      string
	Response  string
	Predictor string
	File      string // provenance file; lines are numbered from 2 (after the header)
	X, Y      []float64
	// Alpha is the test level (0: 0.05).
	Alpha float64
	// Range bounds the predictor for suggestions (zero: the data's range
	// widened by a quarter on each side).
	Lo, Hi float64
	// At is the time of the fit (zero: a fixed date).
	At time.Time
}

// Stand-in judgement used by StraightLine (the daemon uses the engine's):
// outlier when the Bonferroni p < Alpha; influential when Cook's distance
// exceeds the F(p, n-p) median or |DFFITS| exceeds 2*sqrt(p/n); notable when
// leverage exceeds 2p/n or Cook's distance exceeds 4/n. These cutoffs are
// common practice.

// StraightLine fits y = b0 + b1 x by least squares and returns the model's
// full picture with the closed-form diagnostics of simple regression
// (leverage 1/n + (x-x̄)²/Sxx, studentized residuals, Cook's distance,
// DFFITS, Bonferroni outlier p), the cutoffs, the fitted curve with its 95 %
// confidence band, suggestions at the ends of the range (the places of
// largest leverage, so of largest det(X'X) gain) and a drift band of ±3
// standard errors around the estimates of the first five rows.
func StraightLine(l Line) (view.ModelDetail, error) {
	n := len(l.X)
	if n != len(l.Y) {
		return view.ModelDetail{}, errors.New("viewtest: X and Y differ in length")
	}
	if n < 4 {
		return view.ModelDetail{}, fmt.Errorf("viewtest: %d rows, need at least 4", n)
	}
	alpha := l.Alpha
	if alpha == 0 {
		alpha = 0.05
	}
	at := l.At
	if at.IsZero() {
		at = time.Date(2026, 3, 14, 9, 30, 0, 0, time.UTC)
	}
	const p = 2
	fit := lineFit(l.X, l.Y)
	if fit.sxx == 0 {
		return view.ModelDetail{}, errors.New("viewtest: constant predictor")
	}
	s := math.Sqrt(fit.rss / float64(n-p))
	tdist := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(n - p - 1)}
	tcrit := tdist.Quantile(1 - alpha/(2*float64(n)))
	fmed := distuv.F{D1: p, D2: float64(n - p)}.Quantile(0.5)
	levCut := 2 * float64(p) / float64(n)
	cook4 := 4 / float64(n)
	dffCut := 2 * math.Sqrt(float64(p)/float64(n))

	d := view.ModelDetail{
		ModelSummary: view.ModelSummary{
			Name: l.Name, State: view.StateJudging,
			Response: l.Response, Terms: []string{"intercept", l.Predictor},
			Predictors: []string{l.Predictor},
			Rows:       int64(n), Fits: 1, LastFitAt: at,
		},
		FitID: 1, FitAt: at, N: n, P: p,
		Sigma:    view.Float(s),
		RSquared: view.Float(1 - fit.rss/fit.tss),
		Cutoffs: view.Cutoffs{
			Leverage: view.Float(levCut), CookAbsolute: view.Float(fmed),
			CookSizeAdjusted: view.Float(cook4), TCritical: view.Float(tcrit),
			Alpha: view.Float(alpha),
		},
	}
	d.AdjRSquared = view.Float(1 - (1-float64(d.RSquared))*float64(n-1)/float64(n-p))
	tq := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(n - p)}
	t975 := tq.Quantile(0.975)
	se1 := s / math.Sqrt(fit.sxx)
	se0 := s * math.Sqrt(1/float64(n)+fit.xbar*fit.xbar/fit.sxx)
	type coef struct {
		term  string
		b, se float64
	}
	for _, c := range []coef{{"intercept", fit.b0, se0}, {l.Predictor, fit.b1, se1}} {
		tv := c.b / c.se
		d.Coefficients = append(d.Coefficients, view.Coefficient{
			Term: c.term, Estimate: view.Float(c.b), StdError: view.Float(c.se),
			T: view.Float(tv), P: view.Float(2 * tq.Survival(math.Abs(tv))),
			Lower95: view.Float(c.b - t975*c.se), Upper95: view.Float(c.b + t975*c.se),
		})
	}
	maxCook := 0.0
	for i := range n {
		h := 1/float64(n) + (l.X[i]-fit.xbar)*(l.X[i]-fit.xbar)/fit.sxx
		yhat := fit.b0 + fit.b1*l.X[i]
		e := l.Y[i] - yhat
		r := e / (s * math.Sqrt(1-h))
		t := r * math.Sqrt(float64(n-p-1)/(float64(n-p)-r*r))
		cook := r * r * h / (p * (1 - h))
		dff := t * math.Sqrt(h/(1-h))
		bp := math.Min(1, float64(n)*2*tdist.Survival(math.Abs(t)))
		maxCook = math.Max(maxCook, cook)
		pt := view.Point{
			ID: int64(i + 1), Row: i, File: l.File, Line: i + 2,
			X: map[string]view.Float{l.Predictor: view.Float(l.X[i])},
			Y: view.Float(l.Y[i]), Fitted: view.Float(yhat), Residual: view.Float(e),
			Leverage: view.Float(h), StudentizedExternal: view.Float(t),
			Cook: view.Float(cook), DFFITS: view.Float(dff), BonferroniP: view.Float(bp),
		}
		flag := func(measure, family string, v, c float64) {
			pt.Flags = append(pt.Flags, view.Flag{Measure: measure, Family: family, Value: v, Cutoff: c})
		}
		outlier := bp < alpha
		if outlier {
			flag("outlier_p_bonferroni", "test", bp, alpha)
		}
		infl := false
		if cook > fmed {
			flag("cooks_distance", "absolute", cook, fmed)
			infl = true
		}
		if math.Abs(dff) > dffCut {
			flag("dffits", "size_adjusted", dff, dffCut)
			infl = true
		}
		notable := false
		if h > levCut {
			flag("leverage", "size_adjusted", h, levCut)
			notable = true
		}
		if cook > cook4 {
			flag("cooks_distance", "size_adjusted", cook, cook4)
			notable = true
		}
		switch {
		case outlier && infl:
			pt.Verdict = view.VerdictSuspect
			d.Suspects++
		case outlier:
			pt.Verdict = view.VerdictOutlier
		case infl:
			pt.Verdict = view.VerdictInfluential
		case notable:
			pt.Verdict = view.VerdictNotable
		default:
			pt.Verdict = view.VerdictOrdinary
		}
		d.Points = append(d.Points, pt)
	}
	d.MaxCook = view.Float(maxCook)

	lo, hi := l.Lo, l.Hi
	xmin, xmax := minMax(l.X)
	if lo == 0 && hi == 0 {
		w := (xmax - xmin) / 4
		lo, hi = xmin-w, xmax+w
	}
	c := view.Curve{Predictor: l.Predictor}
	const steps = 40
	for k := 0; k <= steps; k++ {
		x := xmin + (xmax-xmin)*float64(k)/steps
		y := fit.b0 + fit.b1*x
		se := s * math.Sqrt(1/float64(n)+(x-fit.xbar)*(x-fit.xbar)/fit.sxx)
		c.X = append(c.X, view.Float(x))
		c.Y = append(c.Y, view.Float(y))
		c.Lower = append(c.Lower, view.Float(y-t975*se))
		c.Upper = append(c.Upper, view.Float(y+t975*se))
		// One new reading: s·√(1 + 1/n + (x - x̄)²/Sxx).
		sp := s * math.Sqrt(1+1/float64(n)+(x-fit.xbar)*(x-fit.xbar)/fit.sxx)
		c.PredLower = append(c.PredLower, view.Float(y-t975*sp))
		c.PredUpper = append(c.PredUpper, view.Float(y+t975*sp))
	}
	d.Curves = []view.Curve{c}
	for _, x := range []float64{hi, lo} {
		h := 1/float64(n) + (x-fit.xbar)*(x-fit.xbar)/fit.sxx
		d.Suggestions = append(d.Suggestions, view.Suggestion{
			At:         map[string]view.Float{l.Predictor: view.Float(x)},
			Text:       fmt.Sprintf("add 3 readings near %s = %.4g: one raises det(X'X) by %.0f %%", l.Predictor, x, 100*h),
			DGain:      view.Float(1 + h),
			Replicates: 3,
		})
	}
	base := lineFit(l.X[:5], l.Y[:5])
	if base.sxx > 0 {
		bs := math.Sqrt(base.rss / 3)
		bse1 := bs / math.Sqrt(base.sxx)
		bse0 := bs * math.Sqrt(1.0/5+base.xbar*base.xbar/base.sxx)
		d.Drift = []view.DriftBand{
			{Term: "intercept", Baseline: view.Float(base.b0), Lower: view.Float(base.b0 - 3*bse0), Upper: view.Float(base.b0 + 3*bse0)},
			{Term: l.Predictor, Baseline: view.Float(base.b1), Lower: view.Float(base.b1 - 3*bse1), Upper: view.Float(base.b1 + 3*bse1)},
		}
	}
	return d, nil
}

// LineHistory returns the fit history of l as rows arrived: one fit after
// each row from the fourth on, with estimates from the rows so far.
func LineHistory(l Line) []view.FitView {
	at := l.At
	if at.IsZero() {
		at = time.Date(2026, 3, 14, 9, 30, 0, 0, time.UTC)
	}
	n := len(l.X)
	var out []view.FitView
	for m := 4; m <= n; m++ {
		f := lineFit(l.X[:m], l.Y[:m])
		if f.sxx == 0 {
			continue
		}
		s := math.Sqrt(f.rss / float64(m-2))
		out = append(out, view.FitView{
			ID: int64(len(out) + 1), At: at.Add(time.Duration(m-n) * time.Minute),
			N: m, P: 2, Terms: []string{"intercept", l.Predictor},
			Estimates: []view.Float{view.Float(f.b0), view.Float(f.b1)},
			StdErrors: []view.Float{
				view.Float(s * math.Sqrt(1/float64(m)+f.xbar*f.xbar/f.sxx)),
				view.Float(s / math.Sqrt(f.sxx)),
			},
			Sigma: view.Float(s), RSquared: view.Float(1 - f.rss/f.tss),
			MaxCook: view.NaN(), LastObsID: int64(m),
		})
	}
	return out
}

type simpleFit struct{ xbar, sxx, b0, b1, rss, tss float64 }

func lineFit(x, y []float64) simpleFit {
	n := float64(len(x))
	var sx, sy float64
	for i := range x {
		sx += x[i]
		sy += y[i]
	}
	xbar, ybar := sx/n, sy/n
	var sxx, sxy, tss float64
	for i := range x {
		sxx += (x[i] - xbar) * (x[i] - xbar)
		sxy += (x[i] - xbar) * (y[i] - ybar)
		tss += (y[i] - ybar) * (y[i] - ybar)
	}
	f := simpleFit{xbar: xbar, sxx: sxx, tss: tss}
	if sxx == 0 {
		return f
	}
	f.b1 = sxy / sxx
	f.b0 = ybar - f.b1*xbar
	for i := range x {
		e := y[i] - f.b0 - f.b1*x[i]
		f.rss += e * e
	}
	return f
}

func minMax(x []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, v := range x {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	return lo, hi
}
