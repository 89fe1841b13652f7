// Package numfmt formats float64 values with a fixed number of significant
// digits, byte for byte as strconv does with the 'g' verb, in less than
// half the time (see BenchmarkAppendG).
//
// AppendG(dst, x, prec) appends what strconv.AppendFloat(dst, x, 'g', prec, 64)
// appends, for every float64 x and every prec:
//
//	AppendG(nil, 1234567890.5, 10)  → "1234567890"   (a tie goes to the even digit)
//	AppendG(nil, 1234567891.5, 10)  → "1234567892"
//	AppendG(nil, 0.000012345, 10)   → "1.2345e-05"   (decimal exponent < -4)
//	AppendG(nil, 99999999995, 10)   → "1e+11"        (rounding carries to a new power)
//	AppendG(nil, 1000000, 10)       → "1000000"
//	AppendG(nil, 0.0001, 10)        → "0.0001"
//	AppendG(nil, math.Copysign(0, -1), 10) → "-0"
//
// The value is rounded to prec significant digits, half to even on the exact
// binary value, and trailing zeros are dropped. The %e form ("d.ddde±XX",
// at least two exponent digits) is used when the decimal exponent of the
// rounded value is below -4 or at least prec; otherwise the plain form
// ("123.45", "0.00012") is used.
//
// # Method
//
// A finite x ≠ 0 is m·2^e with m a 64-bit integer whose top bit is set
// (subnormals included). The binary exponent gives ⌊log₁₀ 2^(e+63)⌋, which
// is E = ⌊log₁₀ x⌋ or one less; one compare with the least float64 ≥ 10^(E+1)
// (a table) settles which. With s = prec-1-E, the value v = x·10^s lies in
// [10^(prec-1), 10^prec), so its integer part holds the prec digits wanted
// and its fraction decides the rounding. 10^s is kept as a 128-bit mantissa
// T, rounded down, with its binary exponent (pow10_table.go, written from
// exact integer arithmetic by ./internal/gen through go generate); the
// top 128 bits P of the 192-bit product m·T give v as a binary fixed-point
// number with f fraction bits, 72 ≤ f ≤ 127. Rounding T down and dropping the low 64 bits of the product
// each lose less than one unit of P, so the exact value V (in units of P)
// satisfies
//
//	P ≤ V < P + 2.
//
// Let F be the low f bits of P and H = 2^(f-1) the half. If F > H, the exact
// fraction is above one half (or V has carried into the next integer and has
// a tiny fraction); either way v rounds up. If F ≤ H-2, the exact fraction is
// below one half and v rounds down. Only F = H-1 and F = H are undecided.
// For 0 ≤ s ≤ 55 the table entry is exact (5^55 < 2^128), so V = P plus the
// dropped low word, and those two cases are settled exactly too, true ties
// included (to even). For other s, that is for |x| ≥ 10^prec or tiny x, the
// two undecided cases go to strconv: the exact value is then within 2^-71
// of a tie, in units of the last digit, which in practice means an exact
// tie such as 125 at two digits or 12345678905 at ten. When rounding up
// gives 10^prec, the result is 10^(E+1).
//
// The digits come from n < 10^15 eight at a time, with multiply-and-shift
// divisions on lanes of one 64-bit word, and go out in 8-byte stores.
//
// NaN, ±Inf, and prec outside [1, MaxPrec] are passed to strconv.
//
// AppendG allocates only when dst has fewer than 32 bytes of spare capacity,
// and may write anywhere in those 32 bytes: bytes of dst's capacity past the
// returned length are not kept. It is safe for concurrent use.
package numfmt

//go:generate go run ./internal/gen -o pow10_table.go

import (
	"encoding/binary"
	"math"
	"math/bits"
	"slices"
	"strconv"
)

// MaxPrec is the largest precision AppendG formats itself; larger ones are
// passed to strconv.
const MaxPrec = 15

// maxLen is the spare capacity appendFast writes in: a number takes at most
// 22 bytes (sign, 15 digits, point and "e-324"), but the 8- and 16-byte
// stores reach up to 32 bytes past the start.
const maxLen = 32

// AppendG appends x formatted exactly as strconv.AppendFloat(dst, x, 'g',
// prec, 64) does and returns the extended buffer. For 1 ≤ prec ≤ MaxPrec
// and finite x it formats the number itself (see the package doc); in every
// other case, and in the rare near-tie it cannot settle, it calls strconv.
// It may use all of dst's first 32 bytes of spare capacity as scratch.
func AppendG(dst []byte, x float64, prec int) []byte {
	if out, ok := appendFast(dst, x, prec); ok {
		return out
	}
	return strconv.AppendFloat(dst, x, 'g', prec, 64)
}

// appendFast is AppendG without the fallback: ok is false, and dst is
// returned unchanged, when x, prec or the rounding is not one it handles.
func appendFast(dst []byte, x float64, prec int) (out []byte, ok bool) {
	if prec < 1 || prec > MaxPrec {
		return dst, false
	}
	u := math.Float64bits(x)
	neg := u>>63 != 0
	be := int(u>>52) & 0x7ff
	mant := u & (1<<52 - 1)
	var m uint64 // x = m·2^e2, 2^63 ≤ m < 2^64
	var e2 int
	switch be {
	case 0x7ff: // NaN, ±Inf
		return dst, false
	case 0:
		if mant == 0 {
			if neg {
				return append(dst, '-', '0'), true
			}
			return append(dst, '0'), true
		}
		lz := bits.LeadingZeros64(mant) // subnormal: mant·2^-1074
		m = mant << lz
		e2 = -1074 - lz
	default:
		m = (mant | 1<<52) << 11
		e2 = be - 1075 - 11
	}
	// ⌊log₁₀ 2^(e2+63)⌋ is ⌊log₁₀ x⌋ or one less; the compare with the
	// least float64 ≥ 10^(e10+1) settles which, exactly.
	e10 := mulLog10of2(e2 + 63)
	e10 += b2i(u&^(1<<63) >= pow10Above[e10+1-pow10AboveMin])
	s := prec - 1 - e10 // v = x·10^s lies in [10^(prec-1), 10^prec)
	i := s - pow10Min
	if uint(i) >= uint(len(pow10)) {
		return dst, false // cannot happen for float64; kept as a guard
	}
	t := &pow10[i]
	h1, l1 := bits.Mul64(m, t[0])
	h2, l2 := bits.Mul64(m, t[1])
	lo, c := bits.Add64(l1, h2, 0)
	hi := h1 + c
	// P = hi:lo = v·2^f, with f fraction bits.
	f := 63 - e2 - mulLog2of10(s)
	if f < 72 || f > 127 {
		return dst, false // cannot happen for float64; kept as a guard
	}
	sh := uint(f-64) & 63
	n := hi >> sh
	limit := uint64pow10[prec]
	if n >= limit {
		return dst, false // cannot happen: P ≤ V < 10^prec·2^f
	}
	// fr is the top 64 bits of the fraction F: fr ≥ 2^63+1 means F > H,
	// fr ≤ 2^63-2 means F ≤ H-2, and the two values between are within
	// 2^(f-64) units of the tie.
	fr := hi<<((64-sh)&63) | lo>>sh
	if fr-(1<<63-1) > 1 {
		n += fr >> 63
	} else {
		fh := hi & (1<<sh - 1)
		half := uint64(1) << ((sh - 1) & 63)
		switch {
		case fh > half || fh == half && lo != 0:
			n++
		case fh < half-1 || fh == half-1 && lo != math.MaxUint64:
			// round down
		case s < 0 || s > 55:
			return dst, false // within two units of a tie: strconv decides
		case fh == half:
			// The table entry is exact, so V = P + l2/2^64: a tie only
			// if nothing was dropped.
			if l2 != 0 || n&1 != 0 {
				n++
			}
		default:
			// F = H-1 and V < P+1: the fraction is below one half.
		}
	}

	exp := prec - 1 - s // decimal exponent of n's leading digit
	if n == limit {     // 99…9 rounded up to 10^prec
		n = uint64pow10[prec-1]
		exp++
	}

	// The digits of n, one a byte with the first digit in the lowest
	// byte (the first in memory when stored little-endian): s0 holds
	// digits 1…8 and s1 digits 9…16, zero bytes past prec. tz counts the
	// trailing zero digits, fewer than prec as n ≠ 0.
	var s0, s1 uint64
	var tz int
	if prec <= 8 {
		s0 = digits8(uint32(n)) >> (uint(8-prec) * 8 & 63)
		tz = bits.LeadingZeros64(s0)>>3 - (8 - prec)
	} else {
		q := n / 1e8 // the first hd digits
		dl := digits8(uint32(n - q*1e8))
		hd := uint(prec - 8)
		var dh uint64
		if hd <= 2 {
			dh = uint64(digitPairsRaw[q]) >> ((2 - hd) * 8 & 63)
		} else {
			dh = digits8(uint32(q)) >> ((8 - hd) * 8 & 63)
		}
		s0 = dh | dl<<(hd*8&63)
		s1 = dl >> ((64 - hd*8) & 63)
		tz = bits.LeadingZeros64(dl) >> 3
		if dl == 0 {
			tz = 8 + bits.LeadingZeros64(dh)>>3 - (8 - int(hd))
		}
	}
	nd := prec - tz
	s0 += ascii8
	s1 += ascii8

	if cap(dst)-len(dst) < maxLen {
		dst = slices.Grow(dst, maxLen)
	}
	j := len(dst)
	out = dst[:j+maxLen]
	if neg {
		out[j] = '-'
		j++
	}
	// Each case stores the 16 digit bytes and then counts only those it
	// keeps; the rest is overwritten or cut off.
	switch {
	case exp < -4 || exp >= prec:
		// d.ddde±XX
		put16(out[j+1:], s0, s1)
		out[j] = out[j+1]
		if nd == 1 {
			j++
		} else {
			out[j+1] = '.'
			j += nd + 1
		}
		// "e±XX" or "e±XXX" from the table, one 8-byte store.
		binary.LittleEndian.PutUint64(out[j:], expSuffix[exp-expMin])
		j += 4
		if exp <= -100 || exp >= 100 {
			j++
		}
	case exp < 0:
		// 0.000ddd: "0." and up to three zeros, then the digits.
		binary.LittleEndian.PutUint64(out[j:], zeroPoint)
		j += 1 - exp
		put16(out[j:], s0, s1)
		j += nd
	case nd <= exp+1:
		// ddd000: the zeros are digits of n.
		put16(out[j:], s0, s1)
		j += exp + 1
	default:
		// ddd.ddd: store all the digits, then the fraction digits
		// (those after the first L = exp+1) one place further right,
		// over the rest, and the point between.
		put16(out[j:], s0, s1)
		l := uint(exp+1) * 8 // < 120
		var f0, f1 uint64
		if l < 64 {
			f0 = s0>>l | s1<<((64-l)&63)
			f1 = s1 >> l
		} else {
			f0 = s1 >> ((l - 64) & 63)
		}
		put16(out[j+exp+2:], f0, f1)
		out[j+exp+1] = '.'
		j += nd + 1
	}
	return out[:j], true
}

const (
	ascii8    = 0x3030303030303030  // '0' in every byte
	zeroPoint = 0x303030303030_2e30 // "0.000000" little-endian
)

// expMin and expMax bound the decimal exponent of a float64 rounded to
// at most 15 digits: 4.9e-324 to 1.8e308.
const (
	expMin = -324
	expMax = 308
)

// expSuffix[e-expMin] is "e" and e with its sign and at least two digits,
// little-endian, as strconv writes exponents.
var expSuffix = func() (t [expMax - expMin + 1]uint64) {
	for i := range t {
		e := i + expMin
		b := []byte{'e', '+'}
		if e < 0 {
			b[1] = '-'
			e = -e
		}
		if e < 10 {
			b = append(b, '0')
		}
		b = strconv.AppendInt(b, int64(e), 10)
		b = append(b, make([]byte, 8-len(b))...)
		t[i] = binary.LittleEndian.Uint64(b)
	}
	return t
}()

// digitPairsRaw[i] holds the two digits of i < 100, not in ASCII, the
// first in the low byte.
var digitPairsRaw = func() (t [100]uint16) {
	for i := range t {
		t[i] = uint16(i/10) | uint16(i%10)<<8
	}
	return t
}()

// put16 stores two words of digits, little-endian, in b[0:16].
func put16(b []byte, s0, s1 uint64) {
	binary.LittleEndian.PutUint64(b[0:8], s0)
	binary.LittleEndian.PutUint64(b[8:16], s1)
}

// digits8 returns the 8 decimal digits of v < 10^8, leading zeros
// included, one a byte with the first digit in the lowest byte. It splits
// v into two 4-digit lanes, each lane into two 2-digit ones and each of
// those into two digits, with multiply-and-shift divisions exact in the
// range they meet: ⌊x·5243/2^19⌋ = ⌊x/100⌋ for x < 10^4, and
// ⌊x·103/2^10⌋ = ⌊x/10⌋ for x < 100.
func digits8(v uint32) uint64 {
	x := uint64(v/10000) | uint64(v%10000)<<32
	y := x * 5243 >> 19 & 0x0000007f_0000007f
	x = y | (x-y*100)<<16
	y = x * 103 >> 10 & 0x000f000f_000f000f
	return y | (x-y*10)<<8
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// mulLog10of2 returns ⌊e·log₁₀ 2⌋ for |e| ≤ 1650.
func mulLog10of2(e int) int { return (e * 78913) >> 18 }

// mulLog2of10 returns ⌊e·log₂ 10⌋ for |e| ≤ 1233 or so; the table test
// checks it over the table's range.
func mulLog2of10(e int) int { return (e * 1741647) >> 19 }

var uint64pow10 = [...]uint64{
	1, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9,
	1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
}
