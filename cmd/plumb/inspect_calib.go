package main

// The calibration answers of plumb inspect: --at, --reading,
// --readings-averaged, --level and --unit, and their table section.

import (
	"bufio"
	"flag"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"plumb/cmd/plumb/internal/analysis"
	"plumb/engine"
)

// calibOptions are the answers asked and the columns' units.
type calibOptions struct {
	answers analysis.Answers
	units   map[string]string
}

// calibFlags are the raw values of the answer and unit flags.
type calibFlags struct {
	at, readings, units []string
	averaged            int
	level               float64
}

// addCalibFlags registers the answer and unit flags on fs.
func addCalibFlags(fs *flag.FlagSet) *calibFlags {
	c := &calibFlags{}
	fs.Func("at", "predict the response at a point, `COL=X[,COL=X...]` (a value for every predictor column); may be repeated", func(v string) error {
		c.at = append(c.at, v)
		return nil
	})
	fs.Func("reading", "invert `Y[,Y...]`, readings of the response: the predictor value each stands for, with its standard uncertainty and interval (a line or polynomial in one column); may be repeated", func(v string) error {
		c.readings = append(c.readings, v)
		return nil
	})
	fs.IntVar(&c.averaged, "readings-averaged", 1, "with --at and --reading: the `number` of new readings averaged into one value")
	fs.Float64Var(&c.level, "level", engine.DefaultLevel, "with --at and --reading: the two-sided `level` of the intervals")
	fs.Func("unit", "the unit of a column, `COL=UNIT` (e.g. temp_c=°C), shown with its values; may be repeated", func(v string) error {
		c.units = append(c.units, v)
		return nil
	})
	return c
}

// parse checks the flags and fills opt.answers and opt.units.
func (c *calibFlags) parse(opt *inspectOptions) error {
	for _, v := range c.at {
		pairs, err := splitPairs(v)
		if err != nil {
			return fmt.Errorf("--at %q: %v", v, err)
		}
		at := make(map[string]float64, len(pairs))
		for _, pr := range pairs {
			x, err := parseFinite(pr[1])
			if err != nil {
				return fmt.Errorf("--at %q: %s: %v", v, pr[0], err)
			}
			if _, dup := at[pr[0]]; dup {
				return fmt.Errorf("--at %q: %s given twice", v, pr[0])
			}
			at[pr[0]] = x
		}
		opt.answers.At = append(opt.answers.At, at)
	}
	for _, v := range c.readings {
		for _, s := range strings.Split(v, ",") {
			y, err := parseFinite(strings.TrimSpace(s))
			if err != nil {
				return fmt.Errorf("--reading %q: %v", v, err)
			}
			opt.answers.Readings = append(opt.answers.Readings, y)
		}
	}
	if c.averaged < 1 {
		return fmt.Errorf("--readings-averaged %d: want at least 1", c.averaged)
	}
	if !(c.level > 0 && c.level < 1) {
		return fmt.Errorf("--level %v: want a level strictly between 0 and 1, e.g. 0.95", c.level)
	}
	opt.answers.Interval = engine.IntervalOptions{Level: c.level, Readings: c.averaged}
	for _, v := range c.units {
		pairs, err := splitPairs(v)
		if err != nil {
			return fmt.Errorf("--unit %q: %v", v, err)
		}
		for _, pr := range pairs {
			if opt.units == nil {
				opt.units = map[string]string{}
			}
			opt.units[pr[0]] = pr[1]
		}
	}
	return nil
}

// checkUnits refuses a unit for a column the model does not use.
func checkUnits(m engine.Model, units map[string]string) error {
	cols := append([]string{m.Response}, m.Columns()...)
	for c := range units {
		if !slices.Contains(cols, c) {
			return fmt.Errorf("inspect: %w: --unit: %q is not a column of the model (its columns: %s)", errUsage, c, strings.Join(cols, ", "))
		}
	}
	return nil
}

// checkAt refuses a --at point that leaves out a predictor column of the
// model or names a column the model does not use.
func checkAt(m engine.Model, pts []map[string]float64) error {
	cols := m.Columns()
	for k, at := range pts {
		for _, c := range cols {
			if _, ok := at[c]; !ok {
				return fmt.Errorf("inspect: %w: --at (point %d): no value for %q (the model's predictor columns: %s)", errUsage, k+1, c, strings.Join(cols, ", "))
			}
		}
		for c := range at {
			if !slices.Contains(cols, c) {
				return fmt.Errorf("inspect: %w: --at (point %d): %q is not a predictor column of the model (its predictor columns: %s)", errUsage, k+1, c, strings.Join(cols, ", "))
			}
		}
	}
	return nil
}

// withUnit is a value followed by its column's unit, if any.
func (r *inspectResult) withUnit(col string, s string) string {
	if u := r.units[col]; u != "" {
		return s + " " + u
	}
	return s
}

// pointWords is "emf_mv = 10 mV, bath_c = 20" in model column order.
func (r *inspectResult) pointWords(at map[string]float64) string {
	var parts []string
	for _, c := range r.model.Columns() {
		if v, ok := at[c]; ok {
			parts = append(parts, c+" = "+r.withUnit(c, num4(v)))
		}
	}
	return strings.Join(parts, ", ")
}

// percent is a level as "95 %".
func percent(level float64) string {
	return strconv.FormatFloat(100*level, 'g', 6, 64) + " %"
}

// readingsWords is "one new reading" or "the mean of 4 new readings".
func readingsWords(m int) string {
	if m == 1 {
		return "one new reading"
	}
	return fmt.Sprintf("the mean of %d new readings", m)
}

// answersTo writes the answers in words to w (the csv format's standard
// error); nothing when none were asked.
func (r *inspectResult) answersTo(w io.Writer) error {
	bw := bufio.NewWriter(w)
	r.writeAnswers(bw)
	return bw.Flush()
}

// writeAnswers writes the predictions and inverse predictions in words.
func (r *inspectResult) writeAnswers(bw *bufio.Writer) {
	preds, invs := r.Result.Result.Predictions, r.Result.Result.Inverse
	if len(preds) == 0 && len(invs) == 0 {
		return
	}
	y := r.model.Response
	bw.WriteString("== What the curve says ==\n")
	for _, p := range preds {
		fmt.Fprintf(bw, "  At %s the curve gives %s = %s (standard error %s).\n",
			r.pointWords(p.At), y, r.withUnit(y, num4(p.Fitted)), r.withUnit(y, num4(p.SE)))
		fmt.Fprintf(bw, "    The mean %s there lies between %s and %s (%s confidence).\n",
			y, num4(p.Confidence.Lo), r.withUnit(y, num4(p.Confidence.Hi)), percent(p.Level))
		fmt.Fprintf(bw, "    %s there falls between %s and %s (%s prediction interval, %d degrees of freedom).\n",
			upperFirst(readingsWords(p.Readings)), num4(p.Prediction.Prediction.Lo), r.withUnit(y, num4(p.Prediction.Prediction.Hi)), percent(p.Level), p.DF)
	}
	for _, inv := range invs {
		x := inv.Column
		of := "A reading"
		if inv.Readings > 1 {
			of = fmt.Sprintf("A mean of %d readings", inv.Readings)
		}
		head := fmt.Sprintf("  %s of %s = %s", of, y, r.withUnit(y, num4(inv.Reading)))
		if inv.Status == engine.RootUnique {
			fmt.Fprintf(bw, "%s stands for %s = %s, standard uncertainty %s.\n",
				head, x, r.withUnit(x, num4(inv.Estimate)), r.withUnit(x, num4(inv.StandardUncertainty)))
		} else {
			fmt.Fprintf(bw, "%s: no single value of %s.\n", head, x)
		}
		switch inv.Shape {
		case engine.ShapeBounded:
			fmt.Fprintf(bw, "    The values of %s consistent with it lie between %s and %s (%s, %d degrees of freedom).\n",
				x, num4(inv.Interval.Lo), r.withUnit(x, num4(inv.Interval.Hi)), percent(inv.Level), inv.DF)
		default:
			var parts []string
			for _, p := range inv.Parts {
				parts = append(parts, num4(p.Lo)+" to "+r.withUnit(x, num4(p.Hi)))
			}
			if len(parts) > 0 {
				fmt.Fprintf(bw, "    Values of %s consistent with it (%s): %s.\n", x, percent(inv.Level), strings.Join(parts, "; "))
			}
		}
		if n := inv.Note(); n != "" {
			fmt.Fprintf(bw, "    Note: %s.\n", n)
		}
	}
	bw.WriteString("  Intervals assume the new readings scatter about the curve as the fitted rows do.\n\n")
}

func upperFirst(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

// curveWords writes the fitted function: "temp_c = 0.3765 + 24.16·emf_mv
// − 0.07154·emf_mv^2".
func (r *inspectResult) curveWords() string {
	var b strings.Builder
	b.WriteString(r.model.Response + " = ")
	for i, c := range r.Fit.Coef {
		v := c.Estimate
		neg := v < 0 || (v == 0 && math.Signbit(v))
		switch {
		case i == 0 && neg:
			b.WriteString("−")
		case i > 0 && neg:
			b.WriteString(" − ")
		case i > 0:
			b.WriteString(" + ")
		}
		b.WriteString(num4(math.Abs(v)))
		if !(r.model.Intercept && i == 0) {
			b.WriteString("·" + c.Term)
		}
	}
	return b.String()
}

// worstRow is the fitted row farthest from the curve by its externally
// studentized residual, or -1 when none is defined.
func (r *inspectResult) worstRow() int {
	at, big := -1, -1.0
	for i, o := range r.Influence.Rows {
		if t := math.Abs(o.StudentExternal); !math.IsNaN(t) && t > big {
			at, big = i, t
		}
	}
	return at
}
