// Package column holds the column encodings both store backends share:
// times as UTC unix nanoseconds and float vectors as little-endian
// IEEE 754 bytes. Each backend wraps them in its driver's null types.
package column

import (
	"encoding/binary"
	"fmt"
	"math"
	"time"
)

// Times are stored as UTC unix nanoseconds; int64 nanoseconds since 1970
// reach from 1677-09-21 to 2262-04-11.
var (
	minTime = time.Unix(0, math.MinInt64).UTC()
	maxTime = time.Unix(0, math.MaxInt64).UTC()
)

// Time returns the column value for t: nil (NULL) for the zero time, unix
// nanoseconds (an int64) otherwise. A time that int64 nanoseconds cannot
// hold is an error.
func Time(t time.Time) (any, error) {
	if t.IsZero() {
		return nil, nil
	}
	if err := CheckTime(t); err != nil {
		return nil, err
	}
	return t.UnixNano(), nil
}

// CheckTime returns an error for a time that int64 nanoseconds cannot hold.
func CheckTime(t time.Time) error {
	if t.Before(minTime) || t.After(maxTime) {
		return fmt.Errorf("time %s outside the storable range %d..%d", t.Format(time.RFC3339Nano), minTime.Year(), maxTime.Year())
	}
	return nil
}

// FromTime is the inverse of Time for a value read back; valid false
// (NULL) gives the zero time. Times come back in UTC.
func FromTime(ns int64, valid bool) time.Time {
	if !valid {
		return time.Time{}
	}
	return time.Unix(0, ns).UTC()
}

// Floats packs v as little-endian IEEE 754 float64s; nil (NULL) for an
// empty slice. Every bit pattern, NaN payloads included, round-trips.
func Floats(v []float64) []byte {
	if len(v) == 0 {
		return nil
	}
	b := make([]byte, 8*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(x))
	}
	return b
}

// FromFloats is the inverse of Floats; an empty value gives nil.
func FromFloats(b []byte) ([]float64, error) {
	if len(b)%8 != 0 {
		return nil, fmt.Errorf("float vector of %d bytes is not a multiple of 8", len(b))
	}
	if len(b) == 0 {
		return nil, nil
	}
	v := make([]float64, len(b)/8)
	for i := range v {
		v[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return v, nil
}
