package view

import (
	"context"
	"errors"
	"sort"
	"strconv"
	"strings"

	"plumb/cmd/plumb/internal/analysis"
	"plumb/engine"
)

// Pair is a closed interval [lo, hi] in JSON; an undetermined bound is
// null.
type Pair [2]Float

func pair(iv engine.Interval) Pair { return Pair{Float(iv.Lo), Float(iv.Hi)} }

// Prediction is the fitted value at one point with its intervals: the
// confidence interval for the mean response there and the prediction
// interval for the mean of Readings new readings, both at Level.
type Prediction struct {
	At         map[string]Float `json:"at"`
	Fitted     Float            `json:"fitted"`
	SEFit      Float            `json:"se_fit"`
	Confidence Pair             `json:"confidence"`
	Prediction Pair             `json:"prediction"`
	// SEPrediction is the standard error of the mean of Readings new
	// readings about the curve: s·√(1/m + h).
	SEPrediction Float `json:"se_prediction"`
	Leverage     Float `json:"leverage"`
	Level        Float `json:"level"`
	Readings     int   `json:"readings"`
	DF           int   `json:"df"`
}

// PredictionOf converts an answer of the analysis.
func PredictionOf(p analysis.Prediction) Prediction {
	at := make(map[string]Float, len(p.At))
	for k, v := range p.At {
		at[k] = Float(v)
	}
	return Prediction{At: at, Fitted: Float(p.Fitted), SEFit: Float(p.SE),
		Confidence: pair(p.Confidence), Prediction: pair(p.Prediction.Prediction),
		SEPrediction: Float(p.SEPredict), Leverage: Float(p.Leverage),
		Level: Float(p.Level), Readings: p.Readings, DF: p.DF}
}

// Inverse is the inverse prediction of one reading: the predictor value
// it stands for, its standard uncertainty and its interval. Interval's
// bounds are null where the set of consistent values reaches the end of
// the calibrated range (Shape open-low, open-high, whole-range) or is not
// one interval (split, empty); Parts then lists what there is, and Note
// says it in words ("" for a single estimate with a bounded interval).
type Inverse struct {
	Reading             Float   `json:"reading"`
	Column              string  `json:"column"`
	Estimate            Float   `json:"estimate"`
	StandardUncertainty Float   `json:"standard_uncertainty"`
	Interval            Pair    `json:"interval"`
	Status              string  `json:"status"`
	Roots               []Float `json:"roots"`
	Shape               string  `json:"shape"`
	Parts               []Pair  `json:"parts"`
	Range               Pair    `json:"calibrated_range"`
	Slope               Float   `json:"slope"`
	Note                string  `json:"note"`
	Level               Float   `json:"level"`
	Readings            int     `json:"readings"`
	DF                  int     `json:"df"`
}

// InverseOf converts an engine answer.
func InverseOf(inv engine.Inverse) Inverse {
	v := Inverse{Reading: Float(inv.Reading), Column: inv.Column, Estimate: Float(inv.Estimate),
		StandardUncertainty: Float(inv.StandardUncertainty), Interval: pair(inv.Interval),
		Status: string(inv.Status), Roots: []Float{}, Shape: string(inv.Shape), Parts: []Pair{},
		Range: pair(inv.Range), Slope: Float(inv.Slope), Note: inv.Note(),
		Level: Float(inv.Level), Readings: inv.Readings, DF: inv.DF}
	for _, x := range inv.Roots {
		v.Roots = append(v.Roots, Float(x))
	}
	for _, p := range inv.Parts {
		v.Parts = append(v.Parts, pair(p))
	}
	return v
}

// Predictions lists the predictions the analysis was asked for.
func (r *Result) Predictions() []Prediction {
	out := make([]Prediction, len(r.Result.Predictions))
	for i, p := range r.Result.Predictions {
		out[i] = PredictionOf(p)
	}
	return out
}

// Inverses lists the inverse predictions the analysis was asked for.
func (r *Result) Inverses() []Inverse {
	out := make([]Inverse, len(r.Result.Inverse))
	for i, inv := range r.Result.Inverse {
		out[i] = InverseOf(inv)
	}
	return out
}

// Answers are a model's answers from its current fit, as the API serves
// them.
type Answers struct {
	Model       string            `json:"model"`
	FitID       int64             `json:"fit_id,omitempty"`
	Response    string            `json:"response"`
	Units       map[string]string `json:"units,omitempty"`
	Predictions []Prediction      `json:"predictions,omitempty"`
	Inverse     []Inverse         `json:"inverse,omitempty"`
	Caution     string            `json:"caution"`
}

// Question asks a model's current fit for predictions at points and
// inverse predictions of readings.
type Question struct {
	At       []map[string]float64
	Readings []float64
	// Level is the two-sided level (0: 0.95); Averaged the number of new
	// readings averaged into one value (0: 1).
	Level    float64
	Averaged int
}

// ErrQuestion is wrapped by an Answerer's error for a question the fit
// cannot answer: a point that names a column the model does not use or
// leaves one out, a model that cannot be inverted, a bad level.
var ErrQuestion = errors.New("view: the fit cannot answer this question")

// Answerer is an optional interface of a Source that answers
// predictions and inverse predictions from a model's current fit. Errors
// wrap ErrNotFound for an unknown model, ErrState before the first fit
// and ErrQuestion for a question the fit cannot answer.
type Answerer interface {
	Answer(ctx context.Context, name string, q Question) (Answers, error)
}

// Point is the prediction's point in words, by column name:
// "emf_mv = 10, bath_c = 20".
func (p Prediction) Point() string {
	keys := make([]string, 0, len(p.At))
	for k := range p.At {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = k + " = " + strconv.FormatFloat(float64(p.At[k]), 'g', 6, 64)
	}
	return strings.Join(parts, ", ")
}
