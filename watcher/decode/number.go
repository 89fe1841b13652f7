package decode

import (
	"math"
	"strconv"
	"unsafe"
)

// numKind classifies the outcome of parseNumber.
type numKind uint8

const (
	numOK numKind = iota
	numEmpty
	numNotNumber
	numNonFinite
)

// pow10 holds the powers of ten that are exact in float64.
var pow10 = [...]float64{
	1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10,
	1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
}

// isSpace reports the bytes trimmed around a number cell.
func isSpace(c byte) bool { return c == ' ' || c == '\t' }

// parseNumber parses a plain decimal number:
//
//	[+-] digits [sep digits] [(e|E) [+-] digits]
//
// with at least one digit in the mantissa, where sep is '.' or, with
// decComma, ','. Spaces and tabs around the number are ignored. Hex
// floats, underscores, "Inf" and "NaN" are not numbers here (NaN/Inf text
// is numNonFinite, as is a value that overflows float64).
//
// The result is correctly rounded: the fast path is taken only when the
// decimal mantissa m fits in 2^53 and |exp10| <= 22, where m and 10^|e| are
// both exact in float64 and one IEEE multiplication or division rounds
// once (Clinger's fast path, common practice); anything else goes to
// strconv.ParseFloat.
func parseNumber(b []byte, decComma bool) (float64, numKind) {
	// Trim.
	i, j := 0, len(b)
	for i < j && isSpace(b[i]) {
		i++
	}
	for j > i && isSpace(b[j-1]) {
		j--
	}
	if i == j {
		return 0, numEmpty
	}
	s := b[i:j]
	sep := byte('.')
	if decComma {
		sep = ','
	}
	k := 0
	neg := false
	if s[0] == '+' || s[0] == '-' {
		neg = s[0] == '-'
		k++
	}
	var mant uint64
	nd := 0        // significant digits accumulated into mant
	trunc := false // digits beyond the 19th were dropped
	dp := false    // decimal separator seen
	exp := 0
	sawDigit := false
	for ; k < len(s); k++ {
		c := s[k]
		if d := c - '0'; d < 10 {
			sawDigit = true
			if nd < 19 {
				mant = mant*10 + uint64(d)
				if mant != 0 {
					nd++
				}
				if dp {
					exp--
				}
			} else {
				trunc = true
				if !dp {
					exp++
				}
			}
			continue
		}
		if c == sep && !dp {
			dp = true
			continue
		}
		break
	}
	if !sawDigit {
		return 0, classifyWord(s)
	}
	if k < len(s) && (s[k] == 'e' || s[k] == 'E') {
		k++
		eneg := false
		if k < len(s) && (s[k] == '+' || s[k] == '-') {
			eneg = s[k] == '-'
			k++
		}
		if k >= len(s) || s[k] < '0' || s[k] > '9' {
			return 0, numNotNumber
		}
		e := 0
		for ; k < len(s) && s[k] >= '0' && s[k] <= '9'; k++ {
			if e < 100000 {
				e = e*10 + int(s[k]-'0')
			}
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	if k != len(s) {
		return 0, numNotNumber
	}
	if mant == 0 {
		if neg {
			return math.Copysign(0, -1), numOK
		}
		return 0, numOK
	}
	if !trunc && mant <= 1<<53 && exp >= -22 && exp <= 22 {
		f := float64(mant)
		if exp < 0 {
			f /= pow10[-exp]
		} else {
			f *= pow10[exp]
		}
		if neg {
			f = -f
		}
		return f, numOK
	}
	// Slow path: the syntax is already checked, so ParseFloat sees a
	// well-formed number (with '.' as separator).
	var tmp [64]byte
	var str string
	if decComma {
		var c []byte
		if len(s) <= len(tmp) {
			c = tmp[:len(s)]
		} else {
			c = make([]byte, len(s))
		}
		copy(c, s)
		for x := range c {
			if c[x] == ',' {
				c[x] = '.'
			}
		}
		str = unsafe.String(unsafe.SliceData(c), len(c))
	} else {
		// ParseFloat does not keep its argument (its error copies it).
		str = unsafe.String(unsafe.SliceData(s), len(s))
	}
	f, err := strconv.ParseFloat(str, 64)
	if err != nil || math.IsInf(f, 0) || math.IsNaN(f) {
		// Well-formed syntax fails only by overflow (ErrRange, ±Inf).
		return 0, numNonFinite
	}
	return f, numOK
}

// classifyWord tells NaN/Inf spellings (non-finite) from other text.
func classifyWord(s []byte) numKind {
	if len(s) > 0 && (s[0] == '+' || s[0] == '-') {
		s = s[1:]
	}
	if len(s) < 3 || len(s) > 8 {
		return numNotNumber
	}
	var low [8]byte
	for i, c := range s {
		if c >= 'A' && c <= 'Z' {
			c += 'a' - 'A'
		}
		low[i] = c
	}
	switch string(low[:len(s)]) {
	case "nan", "inf", "infinity":
		return numNonFinite
	}
	return numNotNumber
}
