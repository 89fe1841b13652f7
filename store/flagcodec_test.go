package store

import (
	"math"
	"math/rand/v2"
	"testing"

	"plumb/engine"
)

// TestAppendFlagsMatchesEncode checks that AppendFlags writes what
// EncodeFlags (encoding/json) writes, for plain names and for names that
// need escaping, and for every kind of number a flag can hold.
func TestAppendFlagsMatchesEncode(t *testing.T) {
	names := []string{"x", "x^2", "log(x)*z", `"flow rate (l/min)"`, "a<b", "a&b", "tab\there", "é", "\u2028", "bad\xffutf8", "a\\b", "nl\n"}
	values := []float64{0, 1, -1, 0.1, 1e-5, 1e21, 123456789, 5e-324, math.MaxFloat64, math.NaN(), math.Inf(1), math.Inf(-1), math.Copysign(0, -1)}
	rng := rand.New(rand.NewPCG(3, 4))
	check := func(fs []engine.Flag) {
		t.Helper()
		want, err := EncodeFlags(fs)
		if err != nil {
			t.Fatal(err)
		}
		got := string(AppendFlags([]byte("prefix"), fs))
		if got != "prefix"+want {
			t.Fatalf("flags %+v:\nAppendFlags %s\nEncodeFlags %s", fs, got[len("prefix"):], want)
		}
	}
	check(nil)
	check([]engine.Flag{})
	for k := 0; k < 5000; k++ {
		fs := make([]engine.Flag, rng.IntN(4))
		for i := range fs {
			fs[i] = engine.Flag{Measure: engine.MeasureDFBETAS, Family: engine.FamilyAbsolute, Value: values[rng.IntN(len(values))], Cutoff: rng.NormFloat64()}
			if rng.IntN(2) == 0 {
				fs[i].Term = names[rng.IntN(len(names))]
			}
			if rng.IntN(3) == 0 {
				fs[i].Value = rng.NormFloat64() * math.Pow(10, float64(rng.IntN(40)-20))
			}
		}
		check(fs)
	}
}
