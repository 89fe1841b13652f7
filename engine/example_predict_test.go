package engine_test

import (
	"fmt"
	"math/rand/v2"

	"plumb/engine"
)

// A load-cell calibration in the classical direction (invented scenario):
// the cell's output, in mV, against ten reference loads in kN, each
// applied twice; then the load for a new output of 7.25 mV, read twice
// and averaged, and the output expected at 50 kN.
func ExampleCalibration_Invert() {
	rng := rand.New(rand.NewPCG(3, 3))
	var load, out []float64
	for rep := 0; rep < 2; rep++ {
		for i := 1; i <= 10; i++ {
			l := 10 * float64(i)
			load = append(load, l)
			out = append(out, 0.05+0.142*l+2e-5*l*l+0.01*rng.NormFloat64())
		}
	}
	m, err := engine.NewModel("out_mv", []string{"load_kn", "load_kn^2"}, true)
	if err != nil {
		fmt.Println(err)
		return
	}
	X, y, err := m.Design(map[string][]float64{"load_kn": load, "out_mv": out})
	if err != nil {
		fmt.Println(err)
		return
	}
	fit, err := engine.Refit(m, X, y)
	if err != nil {
		fmt.Println(err)
		return
	}

	p, err := fit.PredictAt(map[string]float64{"load_kn": 50}, engine.IntervalOptions{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("at 50 kN: %.4f mV (se %.4f), mean in [%.4f, %.4f], one reading in [%.4f, %.4f]\n",
		p.Fitted, p.SE, p.Confidence.Lo, p.Confidence.Hi, p.Prediction.Lo, p.Prediction.Hi)

	cal, err := engine.NewCalibration(fit, "load_kn", engine.Interval{})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, reading := range []float64{7.25, 1.48, 15.3} {
		inv, err := cal.Invert(reading, engine.IntervalOptions{Readings: 2})
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Printf("%.2f mV: %s, shape %s", reading, inv.Status, inv.Shape)
		if inv.Status == engine.RootUnique {
			fmt.Printf(", load %.3f kN, u %.3f kN", inv.Estimate, inv.StandardUncertainty)
		}
		if inv.Shape == engine.ShapeBounded {
			fmt.Printf(", 95%% interval [%.3f, %.3f] kN", inv.Interval.Lo, inv.Interval.Hi)
		}
		fmt.Println()
		if note := inv.Note(); note != "" {
			fmt.Println("  note:", note)
		}
	}
	// Output:
	// at 50 kN: 7.2054 mV (se 0.0035), mean in [7.1981, 7.2127], one reading in [7.1824, 7.2285]
	// 7.25 mV: unique, shape bounded, load 50.309 kN, u 0.056 kN, 95% interval [50.191, 50.428] kN
	// 1.48 mV: unique, shape open-low, load 10.074 kN, u 0.065 kN
	//   note: the interval reaches the low end of the calibrated range (10); its lower limit is not determined by the data
	// 15.30 mV: above-range, shape empty
	//   note: the reading is above the calibration curve over the whole calibrated range 10 to 100; there is no estimate; no value of the calibrated range is consistent with the reading at this level
}
