package engine_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"plumb/engine"
)

// stability is an invented stability study (seeded): assay of k batches
// over months, each batch with its own start and slope.
func stability(k, n int, seed uint64) engine.Data {
	rng := rand.New(rand.NewPCG(seed, 7))
	assay := make([]float64, n)
	months := make([]float64, n)
	lot := make([]float64, n)
	batch := make([]string, n)
	for i := range assay {
		b := i % k
		months[i] = float64((i / k) % 25)
		lot[i] = float64(100 + 7*b)
		batch[i] = strconv.Itoa(100 + 7*b)
		assay[i] = 100 + 0.1*float64(b%5) - (0.2+0.01*float64(b%3))*months[i] + 0.3*rng.NormFloat64()
	}
	return engine.Data{
		Num:  map[string][]float64{"assay": assay, "months": months, "lot": lot},
		Text: map[string][]string{"batch": batch},
	}
}

// TestGroupNumericEqualsText: group(col) on a numeric column gives the
// same fit, bit for bit, as on the same labels as text.
func TestGroupNumericEqualsText(t *testing.T) {
	d := stability(12, 600, 1)
	mt, err := engine.NewModel("assay", []string{"group(batch)", "months", "group(batch)*months"}, true)
	if err != nil {
		t.Fatal(err)
	}
	mn, _ := engine.NewModel("assay", []string{"group(lot)", "months", "group(lot)*months"}, true)
	dt, err := mt.Build(d)
	if err != nil {
		t.Fatal(err)
	}
	dn, err := mn.Build(d)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(dt.X.RawMatrix().Data, dn.X.RawMatrix().Data) {
		t.Fatal("designs differ")
	}
	ft, err := dt.Fit()
	if err != nil {
		t.Fatal(err)
	}
	fn, err := dn.Fit()
	if err != nil {
		t.Fatal(err)
	}
	for j := range ft.Coef {
		if ft.Coef[j].Estimate != fn.Coef[j].Estimate || ft.Coef[j].StdError != fn.Coef[j].StdError {
			t.Errorf("coefficient %d: text %+v, numeric %+v", j, ft.Coef[j], fn.Coef[j])
		}
		if want := strings.Replace(ft.Coef[j].Term, "batch=", "lot=", 1); fn.Coef[j].Term != want {
			t.Errorf("name %q, want %q", fn.Coef[j].Term, want)
		}
	}
	// 12 levels: 11 indicators and 11 slope differences; the reference
	// is the first label in byte order ("100"), "107" next.
	names := ft.Model.Names()
	if len(names) != 24 || names[1] != "batch=107" || names[12] != "months" || names[13] != "batch=107*months" {
		t.Errorf("names %q", names)
	}
	if lv := dt.Model.Levels["batch"]; len(lv) != 12 || lv[0] != "100" {
		t.Errorf("levels %q", lv)
	}
	// The old entry: Design with the levels known gives the same design.
	X, _, err := dn.Model.Design(d.Num)
	if err != nil || !reflect.DeepEqual(X.RawMatrix().Data, dn.X.RawMatrix().Data) {
		t.Errorf("Design with known levels: %v", err)
	}
	if _, _, err := mn.Design(d.Num); !errors.Is(err, engine.ErrNewLevel) {
		t.Errorf("Design without levels: %v, want ErrNewLevel", err)
	}
}

func TestGroupErrors(t *testing.T) {
	d := stability(3, 30, 2)
	t.Run("text column as a number", func(t *testing.T) {
		m, _ := engine.NewModel("assay", []string{"batch", "months"}, true)
		_, err := m.Build(d)
		var de *engine.DataError
		if !errors.As(err, &de) || !errors.Is(err, engine.ErrTextColumn) || de.Column != "batch" || !strings.Contains(err.Error(), "group(batch)") {
			t.Errorf("got %v, want a *DataError wrapping ErrTextColumn that suggests group(batch)", err)
		}
	})
	t.Run("one level", func(t *testing.T) {
		one := engine.Data{Num: d.Num, Text: map[string][]string{"batch": make([]string, 30)}}
		for i := range one.Text["batch"] {
			one.Text["batch"][i] = "K-1"
		}
		m, _ := engine.NewModel("assay", []string{"group(batch)", "months"}, true)
		_, err := m.Build(one)
		var ce *engine.ColumnError
		if !errors.As(err, &ce) || !errors.Is(err, engine.ErrConstantColumn) || ce.Term != "group(batch)" {
			t.Errorf("got %v, want a *ColumnError wrapping ErrConstantColumn", err)
		}
	})
	t.Run("new level", func(t *testing.T) {
		m, _ := engine.NewModel("assay", []string{"group(batch)*months", "months"}, true)
		b, err := m.Build(d)
		if err != nil {
			t.Fatal(err)
		}
		row := make([]float64, b.Model.P())
		num := func(c string) float64 { return 3 }
		err = b.Model.DesignRowData(row, num, func(string) string { return "999" })
		var de *engine.DataError
		if !errors.As(err, &de) || !errors.Is(err, engine.ErrNewLevel) || de.Column != "batch" {
			t.Fatalf("unseen level: %v, want ErrNewLevel", err)
		}
		ext := b.Model.WithLevels("batch", "999")
		if ext.P() != b.Model.P()+1 {
			t.Errorf("extended model has %d coefficients, want %d", ext.P(), b.Model.P()+1)
		}
		row = make([]float64, ext.P())
		if err := ext.DesignRowData(row, num, func(string) string { return "999" }); err != nil {
			t.Fatal(err)
		}
		// intercept, batch=107*months, batch=114*months, batch=999*months, months
		want := []float64{1, 0, 0, 3, 3}
		if !reflect.DeepEqual(row, want) {
			t.Errorf("row %v, want %v (names %q)", row, want, ext.Names())
		}
		if got := ext.Names()[3]; got != "batch=999*months" {
			t.Errorf("name %q", got)
		}
	})
}

// TestGroupNoIntercept: without an intercept the first group alone gets
// every level; the fit equals the intercept model reparametrised.
func TestGroupNoIntercept(t *testing.T) {
	d := stability(4, 80, 3)
	m0, _ := engine.NewModel("assay", []string{"group(batch)", "months"}, false)
	m1, _ := engine.NewModel("assay", []string{"group(batch)", "months"}, true)
	b0, err := m0.Build(d)
	if err != nil {
		t.Fatal(err)
	}
	b1, err := m1.Build(d)
	if err != nil {
		t.Fatal(err)
	}
	f0, err := b0.Fit()
	if err != nil {
		t.Fatal(err)
	}
	f1, err := b1.Fit()
	if err != nil {
		t.Fatal(err)
	}
	if got := f0.Model.Names(); !reflect.DeepEqual(got, []string{"batch=100", "batch=107", "batch=114", "batch=121", "months"}) {
		t.Errorf("names %q", got)
	}
	// batch=100 (no intercept) is the intercept; batch=107 is the
	// intercept plus the difference.
	if math.Abs(f0.Coef[0].Estimate-f1.Coef[0].Estimate) > 1e-12 ||
		math.Abs(f0.Coef[1].Estimate-(f1.Coef[0].Estimate+f1.Coef[1].Estimate)) > 1e-12 ||
		math.Abs(f0.Coef[4].Estimate-f1.Coef[4].Estimate) > 1e-13 {
		t.Errorf("no intercept %v, intercept %v", f0.Coef, f1.Coef)
	}
	if math.Abs(f0.RSS-f1.RSS) > 1e-12*f1.RSS {
		t.Errorf("RSS %g vs %g", f0.RSS, f1.RSS)
	}
}

// TestFragilityWeighted: the fragility of a weighted fit is that of the
// ordinary fit of the rows √w [x y] (here without an intercept, the
// intercept column becoming √w), under the same sign and significance
// conclusions for the slope, and a band of 0.3 standard errors that a
// removal breaks.
func TestFragilityWeighted(t *testing.T) {
	for _, c := range loadRCases(t) {
		if c.Dataset != "cars_weighted_inverse_speed" && c.Dataset != "ketterby_photometer_weighted" {
			continue
		}
		t.Run(c.Dataset, func(t *testing.T) {
			f, inf := fitCase(t, c)
			slope := f.Model.Names()[1]
			res, err := engine.Fragility(f, inf, engine.Conclusions{Signs: true, Significance: true, Terms: []string{slope}, Coefficients: []engine.CoefBand{{Term: slope, K: 0.3}}}, engine.FragilityOptions{MaxRemoved: 3})
			if err != nil {
				t.Fatal(err)
			}
			n := f.N
			one, xs, ys := make([]float64, n), make([]float64, n), make([]float64, n)
			for i := 0; i < n; i++ {
				s := math.Sqrt(f.Weights[i])
				one[i], xs[i], ys[i] = s, s*f.X().At(i, 1), s*f.Y()[i]
			}
			m, _ := engine.NewModel("ys", []string{"one", "xs"}, false)
			X, y, err := m.Design(map[string][]float64{"one": one, "xs": xs, "ys": ys})
			if err != nil {
				t.Fatal(err)
			}
			g, err := engine.Refit(m, X, y)
			if err != nil {
				t.Fatal(err)
			}
			want, err := engine.Fragility(g, nil, engine.Conclusions{Signs: true, Significance: true, Terms: []string{"xs"}, Coefficients: []engine.CoefBand{{Term: "xs", K: 0.3}}}, engine.FragilityOptions{MaxRemoved: 3})
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("index %d, rows %v, %s of %s: %g -> %g", res.Index, res.RemovedRows, res.Kind, res.Term, res.Before, res.After)
			if res.Index == 0 {
				t.Fatal("the band of 0.3 SE did not break: the comparison would be empty")
			}
			if res.Index != want.Index || !reflect.DeepEqual(res.RemovedRows, want.RemovedRows) || res.Kind != want.Kind ||
				math.Abs(res.After-want.After) > 1e-9*math.Abs(want.After) {
				t.Errorf("weighted: index %d rows %v %s after %g; scaled rows: index %d rows %v %s after %g",
					res.Index, res.RemovedRows, res.Kind, res.After, want.Index, want.RemovedRows, want.Kind, want.After)
			}
		})
	}
}

// TestGroupSuggestRegion: ObservedRegion finds a numeric column's range
// past a group term's columns, and Suggest declines a group model with a
// *RegionError naming the group column (never a panic or a wrong range).
func TestGroupSuggestRegion(t *testing.T) {
	d := stability(5, 100, 6)
	m, _ := engine.NewModel("assay", []string{"group(batch)", "months"}, true)
	b, err := m.Build(d)
	if err != nil {
		t.Fatal(err)
	}
	f, err := b.Fit()
	if err != nil {
		t.Fatal(err)
	}
	_, err = engine.ObservedRegion(f)
	var re *engine.RegionError
	if !errors.As(err, &re) || re.Column != "batch" {
		t.Errorf("ObservedRegion: %v, want a RegionError for batch", err)
	}
	m2, _ := engine.NewModel("assay", []string{"months", "group(batch)*months"}, true)
	b2, err := m2.Build(d)
	if err != nil {
		t.Fatal(err)
	}
	f2, err := b2.Fit()
	if err != nil {
		t.Fatal(err)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range d.Num["months"] {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	_, err = engine.ObservedRegion(f2)
	if !errors.As(err, &re) || re.Column != "batch" {
		t.Errorf("ObservedRegion with group(batch)*months: %v", err)
	}
	_, err = engine.Suggest(f2, nil, nil, engine.Region{"months": {lo, hi}, "batch": {0, 1}}, engine.SuggestOptions{})
	if !errors.As(err, &re) || re.Column != "batch" {
		t.Errorf("Suggest on a group model: %v, want a RegionError for batch", err)
	}
}
