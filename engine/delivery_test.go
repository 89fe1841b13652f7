package engine

import (
	"math"
	"reflect"
	"testing"
)

// Delivery-time data: Montgomery, Peck & Vining, Introduction to Linear
// Regression Analysis (5th ed.), Example 3.1 (Table 3.2); the same 25 rows
// are Rdatasets csv/robustbase/delivery.csv (n.prod, distance, delTime).
// Typed in from memory of that table and verified by reproducing every
// printed digit of the fit and of the influence table in
// ../shared/reference/CHECKS.md §A2 (TestDelivery).
var delivery = struct{ cases, distance, time []float64 }{
	cases: []float64{7, 3, 3, 4, 6, 7, 2, 7, 30, 5, 16, 10, 4, 6, 9, 10, 6, 7, 3, 17, 10, 26, 9, 8, 4},
	distance: []float64{560, 220, 340, 80, 150, 330, 110, 210, 1460, 605, 688, 215, 255, 462, 448, 776,
		200, 132, 36, 770, 140, 810, 450, 635, 150},
	time: []float64{16.68, 11.50, 12.03, 14.88, 13.75, 18.11, 8.00, 17.83, 79.24, 21.50, 40.33, 21.00,
		13.50, 19.75, 24.00, 29.00, 15.35, 19.00, 9.50, 35.10, 17.90, 52.32, 18.75, 19.83, 10.75},
}

func deliveryFit(tb testing.TB) (*Fit, *Influence) {
	tb.Helper()
	m, err := NewModel("time", []string{"cases", "distance"}, true)
	if err != nil {
		tb.Fatal(err)
	}
	X, y, err := m.Design(map[string][]float64{
		"cases": delivery.cases, "distance": delivery.distance, "time": delivery.time})
	if err != nil {
		tb.Fatal(err)
	}
	f, err := Refit(m, X, y)
	if err != nil {
		tb.Fatal(err)
	}
	return f, Diagnose(f)
}

// near reports whether got agrees with want to the digits printed: within
// half a unit of the last printed decimal place (dec places).
func near(got, want float64, dec int) bool {
	return math.Abs(got-want) <= 0.5*math.Pow(10, -float64(dec))*(1+1e-9)
}

// TestDelivery checks the fit and rows 1, 4, 9, 16, 20, 22 of the influence
// table to the printed digits. Source: CHECKS.md §A2 (Montgomery, Peck &
// Vining Ex. 3.1, 6.1-6.3, Table 6.1; values marked C, C2 or X there).
func TestDelivery(t *testing.T) {
	f, inf := deliveryFit(t)
	// Fit (X in CHECKS.md): b = (2.34123, 1.61591, 0.014385), SSE 233.732,
	// s² 10.6242, R² 0.95959.
	wantB := []struct {
		v   float64
		dec int
	}{{2.34123, 5}, {1.61591, 5}, {0.014385, 6}}
	for j, w := range wantB {
		if !near(f.Coef[j].Estimate, w.v, w.dec) {
			t.Errorf("b%d = %.8f, want %v", j, f.Coef[j].Estimate, w.v)
		}
	}
	if !near(f.RSS, 233.732, 3) || !near(f.Sigma*f.Sigma, 10.6242, 4) || !near(f.RSquared, 0.95959, 5) {
		t.Errorf("SSE %.4f s² %.5f R² %.6f, want 233.732, 10.6242, 0.95959", f.RSS, f.Sigma*f.Sigma, f.RSquared)
	}
	rows := []struct {
		obs                 int
		h, r, t, d, dffits  float64
		dfb0, dfb1, dfb2, c float64
	}{
		{1, 0.10180, -1.6277, -1.6956, 0.10009, -0.5709, -0.1873, 0.4113, -0.4349, 0.8711},
		{4, 0.08537, 1.5797, 1.6392, 0.07765, 0.5008, 0.4520, 0.0883, -0.2734, 0.8760},
		{9, 0.49829, 3.2138, 4.3108, 3.4193, 4.2961, -2.5757, 0.9287, 1.5076, 0.3422},
		{16, 0.16594, -0.2227, -0.2178, 0.00329, -0.0972, -0.0027, 0.0644, -0.0842, 1.3692},
		{20, 0.10168, -1.8735, -1.9967, 0.13244, -0.6718, 0.1680, -0.2150, -0.0929, 0.7598},
		{22, 0.39158, -1.4500, -1.4896, 0.45105, -1.1950, 0.3986, -1.0254, 0.5731, 1.3981},
	}
	for _, w := range rows {
		o := inf.Rows[w.obs-1]
		check := func(name string, got, want float64, dec int) {
			if !near(got, want, dec) {
				t.Errorf("obs %d %s = %.6f, want %v", w.obs, name, got, want)
			}
		}
		check("h", o.Leverage, w.h, 5)
		check("r", o.StudentInternal, w.r, 4)
		check("t", o.StudentExternal, w.t, 4)
		dDec := 5
		if w.d >= 1 {
			dDec = 4
		}
		check("D", o.Cook, w.d, dDec)
		check("DFFITS", o.DFFITS, w.dffits, 4)
		check("DFBETAS b0", inf.DFBETASRow(w.obs - 1)[0], w.dfb0, 4)
		check("DFBETAS b1", inf.DFBETASRow(w.obs - 1)[1], w.dfb1, 4)
		check("DFBETAS b2", inf.DFBETASRow(w.obs - 1)[2], w.dfb2, 4)
		check("COVRATIO", o.COVRATIO, w.c, 4)
	}
	// Published D9 = 3.41835 (C) against full precision 3.4193 (X): 1e-3
	// relative, as CHECKS.md directs.
	if d9 := inf.Rows[8].Cook; math.Abs(d9-3.41835)/3.41835 > 1e-3 {
		t.Errorf("D9 = %v, want 3.41835 within 1e-3 relative", d9)
	}
	// Σh = p (Hoaglin & Welsch 1978).
	sh := 0.0
	for _, o := range inf.Rows {
		sh += o.Leverage
	}
	if math.Abs(sh-3) > 1e-12 {
		t.Errorf("Σh = %.15f, want 3", sh)
	}
	// VIF1 = VIF2 = 3.1185 (X), r12 = 0.8242.
	for _, term := range []string{"cases", "distance"} {
		if !near(f.VIF[term], 3.1185, 4) {
			t.Errorf("VIF[%s] = %.5f, want 3.1185", term, f.VIF[term])
		}
	}
	// Bonferroni on t9: df 21, p = 3.090e-4, x25 = 0.00773 (X); R 4.2.2
	// 2*pt(-4.3108, 21) = 3.0900873626e-4 at the rounded t.
	if o := inf.Rows[8]; !near(o.OutlierP*1e4, 3.090, 3) || !near(o.BonferroniP, 0.00773, 5) {
		t.Errorf("obs 9 p = %.6g, Bonferroni %.6g, want 3.090e-4, 0.00773", o.OutlierP, o.BonferroniP)
	}
	// Critical |t| = t(1-0.05/50, 21) = 3.5272 (X).
	if q := -TQuantile(0.05/50, 21); !near(q, 3.5272, 4) {
		t.Errorf("critical t = %.5f, want 3.5272", q)
	}
}

// TestDeliveryFlags checks the flagged-point sets of CHECKS.md §A2:
// h > 2p/n = 0.24 -> 9, 22 (C); |DFFITS| > 2√(p/n) = 0.69 -> 9, 22 (C);
// D > 1 -> 9 (C); |DFBETAS| > 2/√n = 0.40 -> 1, 4, 9, 22, 24 (X);
// D > 4/n = 0.16 -> 9, 22; COVRATIO outside [0.64, 1.36] -> 9, 16, 22 (X).
func TestDeliveryFlags(t *testing.T) {
	_, inf := deliveryFit(t)
	c := DefaultCutoffs()
	vs := Judge(inf, c)
	sets := map[string][]int{}
	key := func(f Flag) string { return f.Family + "/" + f.Measure }
	for i, v := range vs {
		seen := map[string]bool{}
		for _, fl := range v.Flags {
			k := key(fl)
			if !seen[k] {
				sets[k] = append(sets[k], i+1)
				seen[k] = true
			}
		}
	}
	want := map[string][]int{
		"size_adjusted/leverage":       {9, 22},
		"size_adjusted/dffits":         {9, 22},
		"size_adjusted/dfbetas":        {1, 4, 9, 22, 24},
		"size_adjusted/cooks_distance": {9, 22},
		"size_adjusted/covratio":       {9, 16, 22},
		"absolute/cooks_distance":      {9},     // F(0.5; 3, 22) = 0.8137 and 1 give the same set
		"absolute/dffits":              {9, 22}, // |DFFITS| > 1: 4.2961, -1.1950
		"absolute/dfbetas":             {9, 22}, // -2.5757, 1.5076; -1.0254
		"test/outlier_p_bonferroni":    {9},     // 0.00773 < 0.05
	}
	for k, w := range want {
		if !reflect.DeepEqual(sets[k], w) {
			t.Errorf("%s flags rows %v, want %v", k, sets[k], w)
		}
	}
	for k := range sets {
		if _, ok := want[k]; !ok {
			t.Errorf("unexpected flag set %s: %v", k, sets[k])
		}
	}
	if w := vs[8].Word(); w != "suspect" {
		t.Errorf("row 9 is %q, want suspect", w)
	}
	if w := vs[21].Word(); w != "influential" {
		t.Errorf("row 22 is %q, want influential", w)
	}
	if w := vs[15].Word(); w != "notable" {
		t.Errorf("row 16 is %q, want notable", w)
	}
	if w := vs[1].Word(); w != "ordinary" {
		t.Errorf("row 2 is %q, want ordinary", w)
	}
	// The F-median Cook cutoff for p = 3, n = 25 (CHECKS.md §A3: 0.8137, C2).
	if lim := CutoffLimits(c, 25, 3); !near(lim.CookAbsolute, 0.8137, 4) {
		t.Errorf("Cook F-median cutoff = %.5f, want 0.8137", lim.CookAbsolute)
	}
	// Size-adjusted family deciding: rows crossing only absolute cutoffs
	// do not exist here, so influential = any size-adjusted flag.
	c.Family = SizeAdjusted
	vs = Judge(inf, c)
	var infl []int
	for i, v := range vs {
		if v.Influential {
			infl = append(infl, i+1)
		}
	}
	if w := []int{1, 4, 9, 16, 22, 24}; !reflect.DeepEqual(infl, w) {
		t.Errorf("size-adjusted influential rows %v, want %v", infl, w)
	}
}
