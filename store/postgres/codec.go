package postgres

import (
	"time"

	"github.com/jackc/pgx/v5/pgtype"

	"plumb/engine"
	"plumb/store"
	"plumb/store/internal/column"
)

// Times and float vectors are stored in the shared column forms
// (store/internal/column).
func encTime(t time.Time) (any, error)      { return column.Time(t) }
func decTime(v pgtype.Int8) time.Time       { return column.FromTime(v.Int64, v.Valid) }
func encFloats(v []float64) []byte          { return column.Floats(v) }
func decFloats(b []byte) ([]float64, error) { return column.FromFloats(b) }

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
