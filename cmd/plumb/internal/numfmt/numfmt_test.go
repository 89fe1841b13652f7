package numfmt

import (
	"bytes"
	"flag"
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
)

// The oracle throughout is strconv.AppendFloat(dst, x, 'g', prec, 64).

var (
	randBits = flag.Int("randbits", 1<<18, "random bit patterns per precision in TestAppendGRandomBits")
)

// checker compares AppendG with strconv, and checks that appendFast passes
// a value on to strconv only when it must: when the exact value is within
// two units of its 128-bit product of a tie.
type checker struct {
	t       testing.TB
	buf     []byte
	scratch []byte
	n       int // values checked
	refused int // values appendFast passed on although prec was in range
	fails   int
}

func newChecker(t testing.TB) *checker {
	return &checker{t: t, buf: make([]byte, 0, 64), scratch: make([]byte, 0, 64)}
}

// tieMargin bounds how far from a tie a value appendFast passes on may be:
// two units of a product with at least 72 fraction bits.
const tieMargin = 0x1p-71

func (c *checker) check(x float64, prec int) {
	c.t.Helper()
	c.n++
	want := strconv.AppendFloat(c.buf[:0], x, 'g', prec, 64)
	nw := len(want)
	all := AppendG(want, x, prec) // appended right after want
	got := all[nw:]
	if !bytes.Equal(got, all[:nw]) {
		c.fail("AppendG(%v [%#016x], %d) = %q, strconv gives %q", x, math.Float64bits(x), prec, got, all[:nw])
	}
	c.buf = all[:0]
	if prec < 1 || prec > MaxPrec || math.IsNaN(x) || math.IsInf(x, 0) {
		if _, ok := appendFast(c.scratch[:0], x, prec); ok {
			c.fail("appendFast(%v, %d) formatted a value it should pass on", x, prec)
		}
		return
	}
	if _, ok := appendFast(c.scratch[:0], x, prec); !ok {
		c.refused++
		if d := tieDistance(x, prec); d > tieMargin {
			c.fail("appendFast passed %v [%#016x] at prec %d on, %.3g from a tie", x, math.Float64bits(x), prec, d)
		}
	}
}

func (c *checker) fail(format string, args ...any) {
	c.t.Helper()
	c.fails++
	if c.fails <= 10 {
		c.t.Errorf(format, args...)
	}
}

// done reports how many values were checked and passed on.
func (c *checker) done() {
	c.t.Helper()
	if c.fails > 10 {
		c.t.Errorf("%d failures in all", c.fails)
	}
	c.t.Logf("%d values, %d passed on to strconv", c.n, c.refused)
}

// tieDistance returns, in exact rational arithmetic, how far the fraction
// of v = |x|·10^s in [10^(prec-1), 10^prec) is from one half: 0 for an
// exact tie.
func tieDistance(x float64, prec int) float64 {
	r := new(big.Rat).SetFloat64(math.Abs(x))
	ten := big.NewRat(10, 1)
	lo := new(big.Rat).SetInt(pow10Int(prec - 1))
	hi := new(big.Rat).Mul(lo, ten)
	for r.Cmp(lo) < 0 {
		r.Mul(r, ten)
	}
	for r.Cmp(hi) >= 0 {
		r.Quo(r, ten)
	}
	n := new(big.Int).Quo(r.Num(), r.Denom())
	frac := new(big.Rat).Sub(r, new(big.Rat).SetInt(n))
	frac.Sub(frac, big.NewRat(1, 2))
	d, _ := frac.Abs(frac).Float64()
	return d
}

// pow10Int returns 10^k for k ≥ 0.
func pow10Int(k int) *big.Int {
	return new(big.Int).Exp(big.NewInt(10), big.NewInt(int64(k)), nil)
}

// TestAppendGKnown checks literal outputs. The expected strings agree with
// Python 3's '%.*g' % (prec, x) (correctly rounded, C printf layout) for
// the finite values, checked when the table was written; NaN and Inf are
// strconv's spelling. strconv must give each of them too.
func TestAppendGKnown(t *testing.T) {
	tests := []struct {
		name string
		x    float64
		prec int
		want string
	}{
		{"tie to even down", 1234567890.5, 10, "1234567890"},
		{"tie to even up", 1234567891.5, 10, "1234567892"},
		{"tie 2.5", 2.5, 1, "2"},
		{"tie 0.25", 0.25, 1, "0.2"},
		{"tie 0.125", 0.125, 2, "0.12"},
		{"tie 0.375", 0.375, 2, "0.38"},
		{"tie 125", 125, 2, "1.2e+02"},
		{"tie 135", 135, 2, "1.4e+02"},
		{"tie 12345678905", 12345678905, 10, "1.23456789e+10"},
		{"tie 12345678915", 12345678915, 10, "1.234567892e+10"},
		{"tie 9.5 carries", 9.5, 1, "1e+01"},
		{"tie 99.5 carries", 99.5, 2, "1e+02"},
		{"tie 2^-16", 0x1p-16, 11, "1.5258789062e-05"},
		{"2^-16 below half", 0x1p-16, 10, "1.525878906e-05"},
		{"2^-16 exact", 0x1p-16, 12, "1.52587890625e-05"},
		{"tie 2^49+0.5", 0x1p49 + 0.5, 15, "562949953421312"},
		{"tie to odd integer carries", 99999999995, 10, "1e+11"},
		{"half", 0.5, 1, "0.5"},
		{"below 0.95", 0.95, 1, "0.9"},
		{"above 0.095", 0.095, 1, "0.1"},
		{"below 9.9999999995", 9.9999999995, 10, "9.999999999"},
		{"carry 9.99999999951", 9.99999999951, 10, "10"},
		{"carry 0.99999999996", 0.99999999996, 10, "1"},
		{"carry 999999999.96", 999999999.96, 10, "1000000000"},
		{"carry into e form", 9999999999.6, 10, "1e+10"},
		{"e form at prec", 1e10, 10, "1e+10"},
		{"e form negative exponent", 1.2345e-05, 10, "1.2345e-05"},
		{"e form rounded", 1.2345e-05, 3, "1.23e-05"},
		{"e form 1e-05", 1e-05, 10, "1e-05"},
		{"e form three exponent digits", -1e100, 10, "-1e+100"},
		{"e form 1.5e-300", 1.5e-300, 10, "1.5e-300"},
		{"plain 1e6", 1e6, 10, "1000000"},
		{"plain 1e-4", 1e-4, 10, "0.0001"},
		{"plain 1.5", 1.5, 10, "1.5"},
		{"plain 100 prec 3", 100, 3, "100"},
		{"e form 100 prec 2", 100, 2, "1e+02"},
		{"plain 1e14 prec 15", 1e14, 15, "100000000000000"},
		{"e form 1e15 prec 15", 1e15, 15, "1e+15"},
		{"round 123.456", 123.456, 4, "123.5"},
		{"negative small", -0.000123456789, 3, "-0.000123"},
		{"0.1 prec 15", 0.1, 15, "0.1"},
		{"0.3 prec 15", 0.3, 15, "0.3"},
		{"third prec 15", 1.0 / 3, 15, "0.333333333333333"},
		{"big integer prec 15", 123456789012345678, 15, "1.23456789012346e+17"},
		{"1e21 prec 15", 1e21, 15, "1e+21"},
		{"largest float", math.MaxFloat64, 10, "1.797693135e+308"},
		{"smallest normal", 0x1p-1022, 10, "2.225073859e-308"},
		{"smallest subnormal", math.SmallestNonzeroFloat64, 10, "4.940656458e-324"},
		{"smallest subnormal prec 1", math.SmallestNonzeroFloat64, 1, "5e-324"},
		{"smallest subnormal prec 15", math.SmallestNonzeroFloat64, 15, "4.94065645841247e-324"},
		{"zero", 0, 10, "0"},
		{"negative zero", math.Copysign(0, -1), 10, "-0"},
		{"one", 1, 10, "1"},
		{"minus one", -1, 10, "-1"},
		{"NaN", math.NaN(), 10, "NaN"},
		{"+Inf", math.Inf(1), 10, "+Inf"},
		{"-Inf", math.Inf(-1), 10, "-Inf"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := string(AppendG(nil, tt.x, tt.prec)); got != tt.want {
				t.Errorf("AppendG(%v, %d) = %q, want %q", tt.x, tt.prec, got, tt.want)
			}
			if got := strconv.FormatFloat(tt.x, 'g', tt.prec, 64); got != tt.want {
				t.Errorf("strconv gives %q for %v at %d, the table says %q", got, tt.x, tt.prec, tt.want)
			}
		})
	}
}

// TestAppendGOtherPrec: precisions outside 1…MaxPrec are strconv's.
func TestAppendGOtherPrec(t *testing.T) {
	c := newChecker(t)
	for _, prec := range []int{-2, -1, 0, 16, 17, 20, 40} {
		for _, x := range []float64{0, 1, 0.1, 1.0 / 3, 123456789.123456789, 1e300, 5e-324, math.NaN(), math.Inf(1)} {
			c.check(x, prec)
			c.check(-x, prec)
		}
	}
	c.done()
}

// TestAppendGRandomBits checks uniformly random bit patterns: every
// exponent, subnormals, NaNs and infinities included. The fast path may
// pass on only values next to a tie, which random patterns give in a few
// binades only (x = q+0.5 with q of prec digits, say).
func TestAppendGRandomBits(t *testing.T) {
	n := *randBits
	if testing.Short() {
		n >>= 4
	}
	for prec := 1; prec <= MaxPrec; prec++ {
		t.Run(fmt.Sprintf("prec=%d", prec), func(t *testing.T) {
			t.Parallel()
			r := rand.New(rand.NewPCG(0x706c756d62, uint64(prec)))
			c := newChecker(t)
			for range n {
				c.check(math.Float64frombits(r.Uint64()), prec)
			}
			// Subnormals, which uniform patterns reach once in 2,048.
			for range n / 16 {
				c.check(math.Float64frombits(r.Uint64()&(1<<52-1)|r.Uint64()&(1<<63)), prec)
			}
			if c.refused > c.n/1000 {
				t.Errorf("%d of %d values passed on to strconv", c.refused, c.n)
			}
			c.done()
		})
	}
}

// TestAppendGTypical checks values of the sizes plumb writes: magnitudes
// spread evenly in log scale over 1e-12…1e12, both signs, and short
// decimals as measured data often has.
func TestAppendGTypical(t *testing.T) {
	n := 1 << 16
	if testing.Short() {
		n >>= 4
	}
	for prec := 1; prec <= MaxPrec; prec++ {
		t.Run(fmt.Sprintf("prec=%d", prec), func(t *testing.T) {
			t.Parallel()
			r := rand.New(rand.NewPCG(0x74797069, uint64(prec)))
			c := newChecker(t)
			for range n {
				x := math.Pow(10, -12+24*r.Float64())
				if r.IntN(2) == 0 {
					x = -x
				}
				c.check(x, prec)
				c.check(float64(r.Int64N(1000000))/float64(uint64pow10[r.IntN(9)]), prec)
			}
			if c.refused > 0 && prec >= 6 {
				// Below 10^prec every tie is settled exactly; the
				// short decimals are all below 10^6.
				t.Errorf("%d values passed on at prec %d", c.refused, prec)
			}
			c.done()
		})
	}
}

// TestAppendGPowers checks every power of ten and of two of the float64
// range, with neighbours a few ulps either way, at every precision, and
// the carry boundaries 10^k·(1 − ½·10^-p). These sit on the edges of the
// exponent guess and of the carry.
func TestAppendGPowers(t *testing.T) {
	var xs []float64
	near := func(x float64) {
		xs = append(xs, x)
		up, down := x, x
		for range 3 {
			up = math.Nextafter(up, math.Inf(1))
			down = math.Nextafter(down, 0)
			xs = append(xs, up, down)
		}
	}
	for k := -325; k <= 309; k++ {
		x, _ := strconv.ParseFloat("1e"+strconv.Itoa(k), 64) // nearest float64
		near(x)
		for p := 1; p <= MaxPrec; p++ {
			y, _ := strconv.ParseFloat(strconv.FormatUint(uint64pow10[p]*10-5, 10)+"e"+strconv.Itoa(k-p-1), 64)
			near(y)
		}
	}
	for k := -1074; k <= 1023; k++ {
		near(math.Ldexp(1, k))
	}
	near(math.MaxFloat64)
	near(0x1p-1022)
	c := newChecker(t)
	for prec := 1; prec <= MaxPrec; prec++ {
		for _, x := range xs {
			if math.IsInf(x, 0) {
				continue
			}
			c.check(x, prec)
			c.check(-x, prec)
		}
	}
	c.done()
}

// TestAppendGExtremes checks the ends of the range, where the power table
// ends, and the special values.
func TestAppendGExtremes(t *testing.T) {
	c := newChecker(t)
	for _, x := range []float64{
		0, math.Copysign(0, -1), math.NaN(), math.Inf(1), math.Inf(-1),
		math.SmallestNonzeroFloat64, 2 * math.SmallestNonzeroFloat64, 3 * math.SmallestNonzeroFloat64,
		0x1p-1022, math.Nextafter(0x1p-1022, 0), math.Nextafter(0x1p-1022, 1),
		math.MaxFloat64, math.Nextafter(math.MaxFloat64, 0), 0x1p1023,
		1e-323, 1e-320, 1e-310, 1e-308, 1e308, 9.999999999999999e307,
	} {
		for prec := 1; prec <= MaxPrec; prec++ {
			c.check(x, prec)
			c.check(-x, prec)
			if x != 0 && !math.IsNaN(x) && !math.IsInf(x, 0) {
				if _, ok := appendFast(nil, x, prec); !ok && tieDistance(x, prec) != 0 {
					t.Errorf("appendFast passed %v at prec %d on", x, prec)
				}
			}
		}
	}
	c.done()
}

// TestAppendGTies checks exact halfway values and their neighbours:
// strconv rounds ties half to even on the exact binary value. Below
// 10^prec the table entry is exact and appendFast must settle the tie
// itself; above, it may pass it on.
func TestAppendGTies(t *testing.T) {
	type tie struct {
		x    float64
		prec int
	}
	var ties []tie
	r := rand.New(rand.NewPCG(0x74696573, 1))
	for prec := 1; prec <= MaxPrec; prec++ {
		for range 200 {
			// q.5 with prec digits in q: below 2^52, so exact.
			q := uint64pow10[prec-1] + r.Uint64N(uint64pow10[prec]-uint64pow10[prec-1])
			ties = append(ties, tie{float64(q) + 0.5, prec})
			// (10q+5)·10^j, kept while exact.
			for j := 0; j < 20; j++ {
				v := new(big.Int).SetUint64(10*q + 5)
				v.Mul(v, pow10Int(j))
				x, acc := new(big.Float).SetInt(v).Float64()
				if acc == big.Exact {
					ties = append(ties, tie{x, prec})
				}
			}
		}
	}
	// m·2^-j = m·5^j/10^j with m odd: its last digit is a 5.
	five := big.NewInt(5)
	for j := 1; j <= 30; j++ {
		for m := uint64(1); m < 2000; m += 2 {
			d := len(new(big.Int).Mul(new(big.Int).SetUint64(m), new(big.Int).Exp(five, big.NewInt(int64(j)), nil)).String())
			if prec := d - 1; prec >= 1 && prec <= MaxPrec {
				ties = append(ties, tie{math.Ldexp(float64(m), -j), prec})
			}
		}
	}
	// The same scaled by 2^k: values like 0.375·2^-40.
	for j := 1; j <= 60; j++ {
		for range 100 {
			m := 2*r.Uint64N(1<<20) + 1
			x := math.Ldexp(float64(m), -j)
			// 70 digits in %e are exact: x < 2^21 has at most j ≤ 60
			// decimals.
			e := strconv.FormatFloat(x, 'e', 70, 64)
			e = strings.TrimRight(e[:strings.IndexByte(e, 'e')], "0")
			d := len(e) - strings.Count(e, ".") // significant digits
			if prec := d - 1; prec >= 1 && prec <= MaxPrec {
				ties = append(ties, tie{x, prec})
			}
		}
	}
	c := newChecker(t)
	decided := 0
	for _, tc := range ties {
		if tieDistance(tc.x, tc.prec) != 0 {
			t.Fatalf("test generator: %v at prec %d is not an exact tie", tc.x, tc.prec)
		}
		c.check(tc.x, tc.prec)
		c.check(-tc.x, tc.prec)
		_, ok := appendFast(nil, tc.x, tc.prec)
		if !ok && tc.x < float64(uint64pow10[tc.prec]) {
			t.Errorf("appendFast passed the tie %v at prec %d on, though its power of ten is exact", tc.x, tc.prec)
		}
		if ok {
			decided++
		}
		// The neighbours are the nearest misses there are.
		up, down := tc.x, tc.x
		for range 4 {
			up = math.Nextafter(up, math.Inf(1))
			down = math.Nextafter(down, 0)
			c.check(up, tc.prec)
			c.check(down, tc.prec)
		}
	}
	if len(ties) < 5000 {
		t.Errorf("only %d ties generated", len(ties))
	}
	t.Logf("%d ties, %d settled by the fast path", len(ties), decided)
	c.done()
}

// TestAppendGCarry checks values whose rounding reaches the next power of
// ten, at every precision: 10^k − ½·10^(k−p) and a few ulps around it.
func TestAppendGCarry(t *testing.T) {
	c := newChecker(t)
	for prec := 1; prec <= MaxPrec; prec++ {
		for k := -20; k <= 20; k++ {
			// 0.99…95 (prec nines then a five) times 10^k.
			s := strings.Repeat("9", prec) + "5e" + strconv.Itoa(k-prec-1)
			x, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatal(err)
			}
			for i, y := 0, x; i < 8; i++ {
				c.check(y, prec)
				c.check(-y, prec)
				y = math.Nextafter(y, math.Inf(1))
			}
			for i, y := 0, x; i < 8; i++ {
				c.check(y, prec)
				y = math.Nextafter(y, 0)
			}
		}
	}
	for _, tt := range []struct {
		x    float64
		want string
	}{
		{9.9999999995, "9.999999999"}, // the float is just below the tie
		{99999999995, "1e+11"},        // an exact tie, to even
		{0.99999999996, "1"},
		{9.99999999996e-5, "0.0001"}, // carries out of the %e form
		{9.99999999996e9, "1e+10"},   // carries into it
	} {
		if got := string(AppendG(nil, tt.x, 10)); got != tt.want {
			t.Errorf("AppendG(%v, 10) = %q, want %q", tt.x, got, tt.want)
		}
		c.check(tt.x, 10)
	}
	c.done()
}

// TestMulLog checks the two exponent formulas over the range they serve,
// against exact integer comparisons.
func TestMulLog(t *testing.T) {
	two := big.NewInt(2)
	for e := -1074; e <= 1023; e++ { // ⌊log₁₀ 2^e⌋
		k := mulLog10of2(e)
		// 10^k ≤ 2^e < 10^(k+1), compared as integers.
		p2 := new(big.Int).Exp(two, big.NewInt(int64(abs(e))), nil)
		lo, hi := pow10Rat(k), pow10Rat(k+1)
		v := new(big.Rat).SetInt(p2)
		if e < 0 {
			v.Inv(v)
		}
		if v.Cmp(lo) < 0 || v.Cmp(hi) >= 0 {
			t.Fatalf("mulLog10of2(%d) = %d", e, k)
		}
	}
	for s := pow10Min; s <= pow10Max; s++ { // ⌊log₂ 10^s⌋
		if got, want := mulLog2of10(s), log2Pow10(s); got != want {
			t.Fatalf("mulLog2of10(%d) = %d, want %d", s, got, want)
		}
	}
}

func pow10Rat(k int) *big.Rat {
	r := new(big.Rat).SetInt(pow10Int(abs(k)))
	if k < 0 {
		r.Inv(r)
	}
	return r
}

func abs(k int) int {
	if k < 0 {
		return -k
	}
	return k
}

// log2Pow10 returns ⌊log₂ 10^s⌋ exactly.
func log2Pow10(s int) int {
	if s >= 0 {
		return pow10Int(s).BitLen() - 1
	}
	// 10^-k lies in (2^-b, 2^-(b-1)) with b the bit length of 10^k,
	// which is no power of two.
	return -pow10Int(-s).BitLen()
}

// exactPow10 returns ⌊10^s·2^(127−⌊log₂ 10^s⌋)⌋, in [2^127, 2^128), and
// whether the floor dropped anything.
func exactPow10(s int) (hi, lo uint64, inexact bool) {
	sh := 127 - log2Pow10(s)
	var num, den *big.Int
	if s >= 0 {
		num, den = pow10Int(s), big.NewInt(1)
	} else {
		num, den = big.NewInt(1), pow10Int(-s)
	}
	if sh >= 0 {
		num.Lsh(num, uint(sh))
	} else {
		den.Lsh(den, uint(-sh))
	}
	q, rem := new(big.Int).QuoRem(num, den, new(big.Int))
	if q.BitLen() != 128 {
		panic(fmt.Sprintf("10^%d: mantissa of %d bits", s, q.BitLen()))
	}
	lo = new(big.Int).And(q, new(big.Int).SetUint64(math.MaxUint64)).Uint64()
	hi = new(big.Int).Rsh(q, 64).Uint64()
	return hi, lo, rem.Sign() != 0
}

// TestPow10Table checks every entry of the power table against exact
// integer arithmetic, and that the entries for 0 ≤ s ≤ 55, and only
// those, are exact (appendFast settles ties with them). The table is
// written by ./internal/gen (go generate), whose own test checks that the
// committed file is its output; this check derives the entries separately.
func TestPow10Table(t *testing.T) {
	for s := pow10Min; s <= pow10Max; s++ {
		hi, lo, inexact := exactPow10(s)
		if got := pow10[s-pow10Min]; got != [2]uint64{hi, lo} {
			t.Errorf("10^%d: table has %#x %#x, want %#x %#x", s, got[0], got[1], hi, lo)
		}
		if exact := s >= 0 && s <= 55; exact == inexact {
			t.Errorf("10^%d: inexact = %v", s, inexact)
		}
	}
	// The table covers every exponent the code asks for: s = prec−1−E
	// with E = ⌊log₁₀ x⌋ from -324 (2^-1074) to 308 (MaxFloat64).
	const minPrec = 1
	if lo, hi := minPrec-1-308, MaxPrec-1-(-324); lo < pow10Min || hi > pow10Max {
		t.Errorf("the table spans 10^%d…10^%d, the code needs 10^%d…10^%d", pow10Min, pow10Max, lo, hi)
	}
}

// The exponent guess ⌊log₁₀ 2^(e2+63)⌋ runs from -324 to 307, and the
// code looks up one more.
const (
	aboveMin = -323
	aboveMax = 308
)

// TestPow10Above checks the thresholds of the exponent guess against
// exact arithmetic, and that they cover every guess.
func TestPow10Above(t *testing.T) {
	if pow10AboveMin != aboveMin || len(pow10Above) != aboveMax-aboveMin+1 {
		t.Fatalf("pow10Above spans 10^%d…10^%d, want 10^%d…10^%d", pow10AboveMin, pow10AboveMin+len(pow10Above)-1, aboveMin, aboveMax)
	}
	for k := aboveMin; k <= aboveMax; k++ {
		// got ≥ 10^k and the float64 below it < 10^k: got is the least
		// float64 ≥ 10^k.
		got := math.Float64frombits(pow10Above[k-pow10AboveMin])
		below := math.Nextafter(got, 0)
		if new(big.Rat).SetFloat64(below).Cmp(pow10Rat(k)) >= 0 || new(big.Rat).SetFloat64(got).Cmp(pow10Rat(k)) < 0 {
			t.Errorf("10^%d: %v is not the least float64 ≥ 10^%d", k, got, k)
		}
	}
	if lo, hi := mulLog10of2(-1074)+1, mulLog10of2(1023)+1; lo != aboveMin || hi != aboveMax {
		t.Errorf("the guess needs thresholds 10^%d…10^%d", lo, hi)
	}
}

// TestAppendGAppends: AppendG keeps what dst holds, and does not allocate
// when dst has room.
func TestAppendGAppends(t *testing.T) {
	dst := []byte("x=")
	dst = AppendG(dst, -0.000123456789, 3)
	dst = append(dst, ';')
	dst = AppendG(dst, 1e300, 10)
	dst = append(dst, ';')
	dst = AppendG(dst, 125, 2) // a tie strconv settles
	if got, want := string(dst), "x=-0.000123;1e+300;1.2e+02"; got != want {
		t.Errorf("got %q, want %q", got, want)
	}
	// Growing a buffer with no spare room.
	var grow []byte
	for range 100 {
		grow = AppendG(grow, -1.234567891e-300, 10)
	}
	if want := strings.Repeat("-1.234567891e-300", 100); string(grow) != want {
		t.Errorf("grown buffer holds %q…", grow[:40])
	}
	buf := make([]byte, 0, 64)
	xs := []float64{0.25, 123.456, -1.5e-7, 1, 0, 987654321.123, 5e-324}
	allocs := testing.AllocsPerRun(100, func() {
		for _, x := range xs {
			buf = AppendG(buf[:0], x, 10)
		}
	})
	if allocs != 0 {
		t.Errorf("%v allocations per run, want 0", allocs)
	}
}

// FuzzAppendG compares AppendG with strconv for any bit pattern, at the
// fuzzed precision (outside 1…15 too) and at every precision 1…15.
func FuzzAppendG(f *testing.F) {
	for _, s := range []struct {
		x    float64
		prec int8
	}{
		{1234567890.5, 10}, {1234567891.5, 10}, {0.5, 1}, {2.5, 1}, {125, 2},
		{9.9999999995, 10}, {99999999995, 10}, {0.99999999996, 10},
		{0, 10}, {math.Copysign(0, -1), 10}, {math.NaN(), 10}, {math.Inf(1), 10},
		{math.Inf(-1), 10}, {math.SmallestNonzeroFloat64, 10}, {math.MaxFloat64, 10},
		{1e-290, 15}, {1e290, 1}, {0.1, 15}, {1.0 / 3, 17}, {1, 0}, {123.456, -1},
	} {
		f.Add(math.Float64bits(s.x), s.prec)
	}
	f.Fuzz(func(t *testing.T, bits uint64, prec int8) {
		x := math.Float64frombits(bits)
		one := func(p int) {
			want := strconv.AppendFloat([]byte("#"), x, 'g', p, 64)
			got := AppendG([]byte("#"), x, p)
			if !bytes.Equal(got, want) {
				t.Fatalf("AppendG(%v [%#016x], %d) = %q, strconv gives %q", x, bits, p, got[1:], want[1:])
			}
		}
		one(int(prec) % 20)
		for p := 1; p <= MaxPrec; p++ {
			one(p)
		}
	})
}

// benchMix is a plumb-like mix of 1,024 numbers: leverages in 1e-6…1,
// residuals in ±1e3, p-values in 1e-30…1, and some exact ones (Bonferroni
// p-values capped at 1).
func benchMix() []float64 {
	r := rand.New(rand.NewPCG(0x62656e63, 1))
	xs := make([]float64, 1024)
	for i := range xs {
		switch i % 8 {
		case 0, 1: // leverage
			xs[i] = math.Pow(10, -6*r.Float64())
		case 2, 3, 4: // residual
			xs[i] = 2000*r.Float64() - 1000
		case 5, 6: // p-value
			xs[i] = math.Pow(10, -30*r.Float64())
		default:
			xs[i] = 1
		}
	}
	r.Shuffle(len(xs), func(i, j int) { xs[i], xs[j] = xs[j], xs[i] })
	return xs
}

func benchFormat(b *testing.B, f func([]byte, float64) []byte) {
	xs := benchMix()
	buf := make([]byte, 0, 64)
	b.ReportAllocs()
	for b.Loop() {
		for _, x := range xs {
			buf = f(buf[:0], x)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*len(xs)), "ns/number")
}

// BenchmarkAppendG formats the mix at 10 digits, as plumb's csv does.
func BenchmarkAppendG(b *testing.B) {
	benchFormat(b, func(dst []byte, x float64) []byte { return AppendG(dst, x, 10) })
}

// BenchmarkStrconv is the same with strconv.AppendFloat.
func BenchmarkStrconv(b *testing.B) {
	benchFormat(b, func(dst []byte, x float64) []byte { return strconv.AppendFloat(dst, x, 'g', 10, 64) })
}
