package engine

import (
	"math"
	"testing"
)

// TestFlagText renders every measure in each direction it can be crossed.
// The cutoffs are the textbook ones (2p/n, 4/n, 2·sqrt(p/n), 2/sqrt(n),
// 3p/n for COVRATIO; common practice); the values are invented.
func TestFlagText(t *testing.T) {
	tests := []struct {
		name string
		f    Flag
		want string
	}{
		{"bonferroni small", Flag{MeasureBonferroni, FamilyTest, "", 2.992e-06, 0.05},
			"Bonferroni outlier test: p < 0.0001, below the 0.05 level"},
		{"bonferroni rounded", Flag{MeasureBonferroni, FamilyTest, "", 0.0008027, 0.05},
			"Bonferroni outlier test: p = 0.0008, below the 0.05 level"},
		{"bonferroni near level", Flag{MeasureBonferroni, FamilyTest, "", 0.0312, 0.05},
			"Bonferroni outlier test: p = 0.0312, below the 0.05 level"},
		{"grubbs", Flag{MeasureGrubbs, FamilyTest, "", 3.1, 2.876},
			"Grubbs statistic G 3.1, above the critical value 2.876"},
		{"leverage", Flag{MeasureLeverage, FamilySizeAdjusted, "", 0.41, 0.2},
			"leverage 0.41, above the size-adjusted cutoff 0.2"},
		{"cook absolute", Flag{MeasureCook, FamilyAbsolute, "", 3.42, 1},
			"Cook's distance 3.42, above the absolute cutoff 1"},
		{"cook size-adjusted", Flag{MeasureCook, FamilySizeAdjusted, "", 0.31, 0.1},
			"Cook's distance 0.31, above the size-adjusted cutoff 0.1"},
		{"dffits negative", Flag{MeasureDFFITS, FamilyAbsolute, "", -4.109, 1},
			"DFFITS -4.109: |DFFITS| 4.109, above the absolute cutoff 1"},
		{"dffits positive", Flag{MeasureDFFITS, FamilySizeAdjusted, "", 1.2, 0.6325},
			"|DFFITS| 1.2, above the size-adjusted cutoff 0.6325"},
		{"dfbetas positive names its coefficient", Flag{MeasureDFBETAS, FamilySizeAdjusted, "emf_mv", 2.661, 0.3052},
			"|DFBETAS| of emf_mv 2.661, above the size-adjusted cutoff 0.3052"},
		{"dfbetas negative", Flag{MeasureDFBETAS, FamilyAbsolute, "intercept", -1.5, 1},
			"DFBETAS of intercept -1.5: |DFBETAS| 1.5, above the absolute cutoff 1"},
		{"covratio above one", Flag{MeasureCOVRATIO, FamilySizeAdjusted, "", 1.252, 0.25},
			"COVRATIO 1.252: |COVRATIO − 1| 0.252, above the size-adjusted cutoff 0.25"},
		{"covratio below one", Flag{MeasureCOVRATIO, FamilySizeAdjusted, "", 0.6, 0.3},
			"COVRATIO 0.6: |COVRATIO − 1| 0.4, above the size-adjusted cutoff 0.3"},
		{"undefined value", Flag{MeasureDFFITS, FamilyAbsolute, "", math.NaN(), 1},
			"|DFFITS| undefined, above the absolute cutoff 1"},
		{"undefined p", Flag{MeasureBonferroni, FamilyTest, "", math.NaN(), 0.05},
			"Bonferroni outlier test: p undefined, below the 0.05 level"},
		{"dfbetas without a term", Flag{MeasureDFBETAS, FamilyAbsolute, "", 1.5, 1},
			"|DFBETAS| 1.5, above the absolute cutoff 1"},
		{"unknown measure with family", Flag{"wobble", FamilyAbsolute, "", 2, 1},
			"wobble 2, beyond the absolute cutoff 1"},
		{"unknown measure", Flag{"wobble", "", "x", 2, 1},
			"wobble of x 2, beyond 1"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := tc.f.Text(); got != tc.want {
				t.Errorf("Text() = %q\nwant     %q", got, tc.want)
			}
		})
	}
}

func TestPText(t *testing.T) {
	for p, want := range map[float64]string{
		1: "p = 1", 0.05: "p = 0.05", 0.00005: "p < 0.0001", 0.0001: "p = 0.0001",
		0.123456: "p = 0.1235", math.Inf(1): "p undefined",
	} {
		if got := PText(p); got != want {
			t.Errorf("PText(%v) = %q, want %q", p, got, want)
		}
	}
}
