package postgres

import (
	"encoding/binary"
	"fmt"
	"math"
	"time"

	"github.com/jackc/pgx/v5/pgtype"

	"plumb/engine"
	"plumb/store"
)

// Times are stored as UTC unix nanoseconds; int64 nanoseconds since 1970
// reach from 1677-09-21 to 2262-04-11.
var (
	minTime = time.Unix(0, math.MinInt64).UTC()
	maxTime = time.Unix(0, math.MaxInt64).UTC()
)

// encTime returns the column value for t: nil (NULL) for the zero time,
// unix nanoseconds otherwise. A time int64 nanoseconds cannot hold is an
// error.
func encTime(t time.Time) (any, error) {
	if t.IsZero() {
		return nil, nil
	}
	if t.Before(minTime) || t.After(maxTime) {
		return nil, fmt.Errorf("time %s outside the storable range %d..%d", t.Format(time.RFC3339Nano), minTime.Year(), maxTime.Year())
	}
	return t.UnixNano(), nil
}

// decTime is the inverse of encTime; times come back in UTC.
func decTime(v pgtype.Int8) time.Time {
	if !v.Valid {
		return time.Time{}
	}
	return time.Unix(0, v.Int64).UTC()
}

// encFloats packs v as little-endian IEEE 754 float64s; nil (NULL) for an
// empty slice. Every bit pattern, NaN payloads included, round-trips.
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

// decFloats is the inverse of encFloats; an empty value gives nil.
func decFloats(b []byte) ([]float64, error) {
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

// The verdict words and the crossed cutoffs (store.Diagnostics.Verdict and
// Flags, store.VerdictChange.To and Flags) are encoded here and nowhere
// else: a verdict is TEXT, the flags are TEXT holding the JSON array the
// caller gives. When the store's types change (typed flags), only these
// functions change.

// encVerdict returns the column value of a verdict word.
func encVerdict(v engine.Word) string { return string(v) }

// encFlags returns the column value of a set of crossed cutoffs: the JSON
// array both backends store (store.EncodeFlags).
func encFlags(fs []engine.Flag) (string, error) { return store.EncodeFlags(fs) }

// decFlags is the inverse of encFlags; NULL gives nil.
func decFlags(s pgtype.Text) ([]engine.Flag, error) {
	if !s.Valid {
		return nil, nil
	}
	return store.DecodeFlags(s.String)
}

// decVerdict is the inverse of encVerdict.
func decVerdict(s pgtype.Text) engine.Word { return engine.Word(s.String) }

// nArrival is the number of arrival-diagnostic columns (leverage ..
// flags in obsCols).
const nArrival = 11

// encArrival writes the arrival diagnostics d into the nArrival column
// values dst, in obsCols order; a nil d makes them all NULL.
func encArrival(dst []any, d *store.Diagnostics) error {
	dst = dst[:nArrival]
	if d == nil {
		clear(dst)
		return nil
	}
	dst[0] = d.Leverage
	dst[1] = d.Residual
	dst[2] = d.StudentizedInternal
	dst[3] = d.StudentizedExternal
	dst[4] = d.CooksDistance
	dst[5] = d.DFFITS
	dst[6] = encFloats(d.DFBETAS)
	dst[7] = d.COVRATIO
	dst[8] = d.OutlierPBonferroni
	dst[9] = encVerdict(d.Verdict)
	fl, err := encFlags(d.Flags)
	dst[10] = fl
	return err
}

// encInode stores a uint64 inode in a signed BIGINT.
func encInode(x uint64) int64 { return int64(x) }
func decInode(x int64) uint64 { return uint64(x) }
