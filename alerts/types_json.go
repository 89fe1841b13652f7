package alerts

import "encoding/json"

type driftMeasureJSON struct {
	Name       string     `json:"name"`
	Kind       string     `json:"kind"`
	At         Values     `json:"at,omitempty"`
	Baseline   jsonNumber `json:"baseline"`
	Current    jsonNumber `json:"current"`
	StdError   jsonNumber `json:"std_error"`
	Difference jsonNumber `json:"difference"`
	Band       jsonNumber `json:"band"`
	Rule       string     `json:"rule"`
	InBand     bool       `json:"in_band"`
	// ShiftSE is omitted when not known (coefficients, older alerts).
	ShiftSE *jsonNumber       `json:"shift_se,omitempty"`
	Unit    string            `json:"unit,omitempty"`
	AtUnits map[string]string `json:"at_units,omitempty"`
}

// MarshalJSON writes the measure with non-finite numbers as null.
func (d DriftMeasure) MarshalJSON() ([]byte, error) {
	j := driftMeasureJSON{
		d.Name, d.Kind, d.At, jsonNumber(d.Baseline), jsonNumber(d.Current), jsonNumber(d.StdError),
		jsonNumber(d.Difference), jsonNumber(d.Band), d.Rule, d.InBand, nil, d.Unit, d.AtUnits,
	}
	if d.ShiftSE != 0 {
		se := jsonNumber(d.ShiftSE)
		j.ShiftSE = &se
	}
	return json.Marshal(j)
}

// UnmarshalJSON reads null numbers as NaN.
func (d *DriftMeasure) UnmarshalJSON(b []byte) error {
	var j driftMeasureJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return err
	}
	*d = DriftMeasure{
		Name: j.Name, Kind: j.Kind, At: j.At, Baseline: float64(j.Baseline), Current: float64(j.Current),
		StdError: float64(j.StdError), Difference: float64(j.Difference), Band: float64(j.Band),
		Rule: j.Rule, InBand: j.InBand, Unit: j.Unit, AtUnits: j.AtUnits,
	}
	if j.ShiftSE != nil {
		d.ShiftSE = float64(*j.ShiftSE)
	}
	return nil
}
