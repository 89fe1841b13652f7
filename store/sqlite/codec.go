package sqlite

import (
	"database/sql"
	"encoding/json"
	"math"
	"time"

	"plumb/engine"
	"plumb/store"
	"plumb/store/internal/column"
)

// Times and float vectors are stored in the shared column forms
// (store/internal/column).
func encTime(t time.Time) (any, error)      { return column.Time(t) }
func decTime(v sql.NullInt64) time.Time     { return column.FromTime(v.Int64, v.Valid) }
func encFloats(v []float64) []byte          { return column.Floats(v) }
func decFloats(b []byte) ([]float64, error) { return column.FromFloats(b) }

// checkTime returns an error for a time that int64 nanoseconds cannot hold.
func checkTime(t time.Time) error { return column.CheckTime(t) }

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
