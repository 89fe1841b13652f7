package sqlite

import (
	"database/sql"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"time"

	"plumb/engine"
	"plumb/store"
)

// Times are stored as UTC unix nanoseconds; int64 nanoseconds since 1970
// reach from 1677-09-21 to 2262-04-11.
var (
	minTime = time.Unix(0, math.MinInt64).UTC()
	maxTime = time.Unix(0, math.MaxInt64).UTC()
)

// encTime returns the column value for t: nil for the zero time, unix
// nanoseconds otherwise. A time that int64 nanoseconds cannot hold is an
// error.
func encTime(t time.Time) (any, error) {
	if t.IsZero() {
		return nil, nil
	}
	if err := checkTime(t); err != nil {
		return nil, err
	}
	return t.UnixNano(), nil
}

// checkTime returns an error for a time that int64 nanoseconds cannot hold.
func checkTime(t time.Time) error {
	if t.Before(minTime) || t.After(maxTime) {
		return fmt.Errorf("time %s outside the storable range %d..%d", t.Format(time.RFC3339Nano), minTime.Year(), maxTime.Year())
	}
	return nil
}

// decTime is the inverse of encTime; times come back in UTC.
func decTime(v sql.NullInt64) time.Time {
	if !v.Valid {
		return time.Time{}
	}
	return time.Unix(0, v.Int64).UTC()
}

// encFloats packs v as little-endian IEEE 754 float64s; nil for an empty
// slice. Every bit pattern, NaN payloads included, round-trips.
func encFloats(v []float64) []byte {
	if len(v) == 0 {
		return nil
	}
	b := make([]byte, 8*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(x))
	}
	return b
}

// decFloats is the inverse of encFloats; an empty blob gives nil.
func decFloats(b []byte) ([]float64, error) {
	if len(b)%8 != 0 {
		return nil, fmt.Errorf("float blob of %d bytes is not a multiple of 8", len(b))
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

// encReal returns the column value of a scalar: nil (NULL) for NaN, which
// SQLite cannot store, the number otherwise (infinities are kept).
func encReal(x float64) any {
	if math.IsNaN(x) {
		return nil
	}
	return x
}

// decReal is the inverse of encReal: NULL reads back as NaN.
func decReal(v sql.NullFloat64) float64 {
	if !v.Valid {
		return math.NaN()
	}
	return v.Float64
}

func encStrings(s []string) (string, error) {
	if s == nil {
		return "null", nil
	}
	b, err := json.Marshal(s)
	return string(b), err
}

func decStrings(s string) ([]string, error) {
	var v []string
	if err := json.Unmarshal([]byte(s), &v); err != nil {
		return nil, err
	}
	return v, nil
}

// encInode stores a uint64 inode in SQLite's signed 64-bit integer.
func encInode(x uint64) int64 { return int64(x) }
func decInode(x int64) uint64 { return uint64(x) }

// encFlags returns the column text of fs: "[]" for none (store.EncodeFlags).
func encFlags(fs []engine.Flag) (string, error) { return store.EncodeFlags(fs) }

// decFlags is the inverse of encFlags; "[]", "" and NULL give nil.
func decFlags(s sql.NullString) ([]engine.Flag, error) {
	if !s.Valid {
		return nil, nil
	}
	return store.DecodeFlags(s.String)
}
