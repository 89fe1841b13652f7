package engine

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// NIST/SEMATECH e-Handbook §1.3.5.17.1 worked example (Tietjen & Moore
// 1972 data): G = 2.4687 for the maximum, one-sided critical value 2.032 at
// alpha 0.05, outlier. CHECKS.md §A1 (C); X: mean 206.43375, s 15.85256.
func TestGrubbsNIST(t *testing.T) {
	x := []float64{199.31, 199.53, 200.19, 200.82, 201.92, 201.95, 202.18, 245.57}
	r := Grubbs(x, 0.05)
	// NIST prints G truncated to 2.4687; the X value is 2.468765.
	if !near(r.G, 2.468765, 6) || math.Abs(r.G-2.4687) >= 1e-4 || !near(r.Mean, 206.43375, 5) || !near(r.SD, 15.85256, 5) {
		t.Errorf("G %.6f mean %.6f sd %.6f, want 2.4687, 206.43375, 15.85256", r.G, r.Mean, r.SD)
	}
	if r.Index != 7 {
		t.Errorf("index %d, want 7", r.Index)
	}
	if c := GrubbsCritical(8, 0.05, false); !near(c, 2.032, 3) || !(r.G > c) {
		t.Errorf("one-sided critical %.5f, want 2.032 and below G", c)
	}
	// Two-sided at n = 8: 2.1266 (CHECKS.md table): G is also above it.
	if !near(r.Critical, 2.1266, 4) || !r.Outlier {
		t.Errorf("two-sided critical %.5f outlier %v, want 2.1266, true", r.Critical, r.Outlier)
	}
}

// Critical values, CHECKS.md §A1 table. All entries are X (recomputed from
// the t formula this function implements), so they are checked to the 4
// printed decimals; for n >= 50 the note on the exact one-sided values
// (2.956 at n = 50, 3.207 at n = 100, ASTM E178, M) is checked to 0.003.
func TestGrubbsCriticalTable(t *testing.T) {
	table := []struct {
		n                int
		one5, two5, two1 float64
	}{
		{3, 1.1531, 1.1543, 1.1547},
		{4, 1.4625, 1.4813, 1.4963},
		{5, 1.6714, 1.7150, 1.7637},
		{6, 1.8221, 1.8871, 1.9728},
		{7, 1.9381, 2.0200, 2.1391},
		{8, 2.0317, 2.1266, 2.2744},
		{9, 2.1096, 2.2150, 2.3868},
		{10, 2.1761, 2.2900, 2.4821},
		{15, 2.4090, 2.5483, 2.8061},
		{20, 2.5566, 2.7082, 3.0008},
		{30, 2.7451, 2.9085, 3.2361},
		{50, 2.9570, 3.1282, 3.4825},
		{100, 3.2095, 3.3841, 3.7540},
	}
	for _, r := range table {
		if g := GrubbsCritical(r.n, 0.05, false); !near(g, r.one5, 4) {
			t.Errorf("n=%d one-sided 5%% = %.5f, want %v", r.n, g, r.one5)
		}
		if g := GrubbsCritical(r.n, 0.05, true); !near(g, r.two5, 4) {
			t.Errorf("n=%d two-sided 5%% = %.5f, want %v", r.n, g, r.two5)
		}
		if g := GrubbsCritical(r.n, 0.01, true); !near(g, r.two1, 4) {
			t.Errorf("n=%d two-sided 1%% = %.5f, want %v", r.n, g, r.two1)
		}
	}
	for _, c := range []struct {
		n     int
		exact float64
	}{{50, 2.956}, {100, 3.207}} {
		if g := GrubbsCritical(c.n, 0.05, false); math.Abs(g-c.exact) > 0.003 {
			t.Errorf("n=%d one-sided %.4f, exact %.3f: more than 0.003 apart", c.n, g, c.exact)
		}
	}
	if !math.IsNaN(GrubbsCritical(2, 0.05, true)) {
		t.Error("n = 2 should give NaN")
	}
}

// ISO 16269-4:2019 §4.3.2 data is not typed here; instead the degenerate
// cases: fewer than 3 values, zero spread.
func TestGrubbsDegenerate(t *testing.T) {
	for _, x := range [][]float64{nil, {1, 2}, {3, 3, 3, 3}} {
		r := Grubbs(x, 0.05)
		if r.Outlier || !math.IsNaN(r.G) || r.Index != -1 {
			t.Errorf("Grubbs(%v) = %+v, want no outlier, G NaN", x, r)
		}
	}
}

// Judge with the Grubbs test flags the row of the largest residual when
// the test rejects. Data: a straight line with one gross error (invented).
func TestJudgeGrubbs(t *testing.T) {
	x := make([]float64, 20)
	y := make([]float64, 20)
	for i := range x {
		x[i] = float64(i)
		y[i] = 2 + 0.5*x[i] + 0.1*math.Sin(float64(i)*1.7)
	}
	y[7] += 3
	f := fitXY(t, x, y)
	c := DefaultCutoffs()
	c.Test = GrubbsTest
	vs := Judge(Diagnose(f), c)
	for i, v := range vs {
		if v.Outlier != (i == 7) {
			t.Errorf("row %d outlier = %v", i, v.Outlier)
		}
	}
	var found bool
	for _, fl := range vs[7].Flags {
		if fl.Measure == MeasureGrubbs && fl.Family == FamilyTest && fl.Value > fl.Cutoff {
			found = true
		}
	}
	if !found {
		t.Errorf("row 7 flags %+v lack a grubbs flag", vs[7].Flags)
	}
}

// Duncan data (testdata/duncan.csv, R carData 3.0.5), prestige ~ income +
// education, n = 45: b = (-6.06466, 0.59873, 0.54583); max|t| = 3.134519
// at row 6 (minister), df 41, p = 0.003177202, Bonferroni p = 0.1429741,
// not significant. Source: CHECKS.md §A2 (C: R car outlierTest docs); R
// 4.2.2 rstudent gives 3.13451858389918 and 45*2*pt(-3.134519, 41) =
// 0.14297391494944.
func TestDuncanBonferroni(t *testing.T) {
	fh, err := os.Open(filepath.Join("testdata", "duncan.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	r := csv.NewReader(fh)
	r.Comment = '#'
	recs, err := r.ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	cols := map[string][]float64{}
	for _, rec := range recs[1:] {
		for j, name := range []string{"income", "education", "prestige"} {
			v, err := strconv.ParseFloat(rec[2+j], 64)
			if err != nil {
				t.Fatal(err)
			}
			cols[name] = append(cols[name], v)
		}
	}
	m, _ := NewModel("prestige", []string{"income", "education"}, true)
	X, y, err := m.Design(cols)
	if err != nil {
		t.Fatal(err)
	}
	f, err := Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	for j, w := range []float64{-6.064662922103321, 0.598732821529495, 0.545833909400880} {
		if rel := math.Abs(f.Coef[j].Estimate-w) / math.Abs(w); rel > 1e-12 {
			t.Errorf("b%d = %.15g, R gives %.15g", j, f.Coef[j].Estimate, w)
		}
	}
	inf := Diagnose(f)
	best := 0
	for i, o := range inf.Rows {
		if math.Abs(o.StudentExternal) > math.Abs(inf.Rows[best].StudentExternal) {
			best = i
		}
	}
	o := inf.Rows[best]
	if best != 5 || math.Abs(o.StudentExternal-3.13451858389918) > 1e-12 {
		t.Errorf("max |t| = %.15g at row %d, want 3.13451858389918 at row 6", o.StudentExternal, best+1)
	}
	if math.Abs(o.OutlierP-0.003177202)/0.003177202 > 1e-6 || math.Abs(o.BonferroniP-0.1429741)/0.1429741 > 1e-6 {
		t.Errorf("p %.9g Bonferroni %.9g, want 0.003177202, 0.1429741", o.OutlierP, o.BonferroniP)
	}
	if vs := Judge(inf, DefaultCutoffs()); vs[best].Outlier {
		t.Error("minister should not be an outlier at alpha 0.05")
	}
}
