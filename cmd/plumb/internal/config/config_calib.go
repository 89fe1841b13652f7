package config

import "math"

// Calibration is what a model's refresh answers besides the verdicts:
// the fitted value with its intervals at given points, and the inverse
// prediction of given readings (the value of the predictor a reading
// stands for). Each refresh records the answers in the fit history.
type Calibration struct {
	// PredictAt lists points, each a value for every predictor column:
	// predict_at = [{ emf_mv = 10.0 }, { emf_mv = 40.0 }].
	PredictAt []map[string]float64 `toml:"predict_at"`
	// Invert lists readings of the response to convert (a model that is
	// a line or a polynomial in one predictor column).
	Invert []float64 `toml:"invert"`
	// ReadingsAveraged is the number of new readings averaged into one
	// value. Default 1.
	ReadingsAveraged int `toml:"readings_averaged"`
	// Level is the two-sided level of the intervals. Default 0.95.
	Level float64 `toml:"level"`
	// Range is the calibrated range [low, high] the inversion searches.
	// Default: the range of the predictor in the fitted rows.
	Range []float64 `toml:"range"`
}

func (c *Calibration) applyDefaults() {
	if c.ReadingsAveraged == 0 {
		c.ReadingsAveraged = 1
	}
	if c.Level == 0 {
		c.Level = 0.95
	}
}

// validate checks the values; the daemon checks the columns against the
// model's terms.
func (c *Calibration) validate(v *validator, i int) {
	at := func(k ...string) []string { return append([]string{"model", "calibration"}, k...) }
	for k, p := range c.PredictAt {
		if len(p) == 0 {
			v.add(at("predict_at"), i, ErrBadValue, "point %d is empty: want { column = value, ... }", k+1)
		}
		for col, x := range p {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				v.add(at("predict_at"), i, ErrBadValue, "point %d: %s = %v is not a finite number", k+1, col, x)
			}
		}
	}
	for _, y := range c.Invert {
		if math.IsNaN(y) || math.IsInf(y, 0) {
			v.add(at("invert"), i, ErrBadValue, "%v is not a finite number", y)
		}
	}
	if c.ReadingsAveraged < 1 || c.ReadingsAveraged > 1000 {
		v.add(at("readings_averaged"), i, ErrBadValue, "must be 1 to 1000, got %d", c.ReadingsAveraged)
	}
	if !(c.Level > 0 && c.Level < 1) {
		v.add(at("level"), i, ErrBadValue, "must lie strictly between 0 and 1, got %v", c.Level)
	}
	if len(c.Range) > 0 && (len(c.Range) != 2 || !(c.Range[0] < c.Range[1]) || math.IsInf(c.Range[0], 0) || math.IsInf(c.Range[1], 0)) {
		v.add(at("range"), i, ErrBadValue, "want [low, high] with low < high, got %v", c.Range)
	}
}
