package sqlite

import (
	"encoding/binary"
	"math"
	"sync"
	"time"
	"unsafe"

	"plumb/store"
)

// A binder holds the bound values of one batch's observations without one
// allocation per value. database/sql takes arguments as []any, and putting
// an int64, a float64, a string or a []byte into an interface copies it to
// the heap: twenty columns a row made most of ingest's garbage. A binder
// keeps the values in a few blocks per batch (numbers, string and slice
// headers, blob bytes) and makes each argument an interface that points at
// its value in those blocks (box).
//
// The blocks are only appended to while the batch is encoded and are not
// written again until the batch's statements have run (the driver copies
// text and blobs into SQLite before Exec returns); a binder then goes back
// to binders for the next batch.
type binder struct {
	args  []any
	nums  []uint64 // int64 and float64 values, by their bits
	strs  []string
	blobs [][]byte
	bytes []byte
}

var binders = sync.Pool{New: func() any { return new(binder) }}

// getBinder returns an empty binder with room for rows observations.
func getBinder(rows int) *binder {
	bd := binders.Get().(*binder)
	bd.args = grow(bd.args, rows*nObsCols)
	bd.nums = grow(bd.nums, rows*nObsCols)
	bd.strs = grow(bd.strs, rows*4) // raw, verdict, flags, label
	bd.blobs = grow(bd.blobs, rows*2)
	return bd
}

// grow returns s emptied, with capacity for at least n elements.
func grow[T any](s []T, n int) []T {
	if cap(s) < n {
		return make([]T, 0, n)
	}
	return s[:0]
}

// release clears the binder's references and returns it to the pool.
func (bd *binder) release() {
	clear(bd.args[:cap(bd.args)])
	clear(bd.strs[:cap(bd.strs)])
	clear(bd.blobs[:cap(bd.blobs)])
	bd.args, bd.strs, bd.blobs = bd.args[:0], bd.strs[:0], bd.blobs[:0]
	bd.nums, bd.bytes = bd.nums[:0], bd.bytes[:0]
	binders.Put(bd)
}

// eface is the layout of an interface value with methods-free type.
type eface struct {
	typ  unsafe.Pointer
	data unsafe.Pointer
}

// The type words of the four bound kinds, taken from example values.
var (
	typeInt64   = typeOf(int64(1 << 40))
	typeFloat64 = typeOf(float64(1.5))
	typeString  = typeOf("x")
	typeBytes   = typeOf([]byte{1})
)

func typeOf(v any) unsafe.Pointer { return (*eface)(unsafe.Pointer(&v)).typ }

// box returns an interface of the given type word whose value is *p: the
// interface refers to p rather than to a copy, so *p must not change while
// the interface is in use.
func box(typ, p unsafe.Pointer) any {
	var v any
	e := (*eface)(unsafe.Pointer(&v))
	e.typ, e.data = typ, p
	return v
}

// ref64 returns an int64 argument that refers to *p (box).
func ref64(p *int64) any { return box(typeInt64, unsafe.Pointer(p)) }

// The blocks must not move while the batch is encoded, or the arguments
// already made would point at the old block (harmless, as nothing writes
// it again, but it would keep it alive): getBinder sizes them for the
// whole batch, and push* only append within that capacity unless a caller
// needs more.

// int64 appends an int64 argument.
func (bd *binder) int64(x int64) {
	if cap(bd.nums) == len(bd.nums) {
		bd.args = append(bd.args, x)
		return
	}
	bd.nums = append(bd.nums, uint64(x))
	bd.args = append(bd.args, box(typeInt64, unsafe.Pointer(&bd.nums[len(bd.nums)-1])))
}

// real appends a float64 argument, NULL for NaN (encReal).
func (bd *binder) real(x float64) {
	switch {
	case math.IsNaN(x):
		bd.args = append(bd.args, nil)
	case cap(bd.nums) == len(bd.nums):
		bd.args = append(bd.args, x)
	default:
		bd.nums = append(bd.nums, math.Float64bits(x))
		bd.args = append(bd.args, box(typeFloat64, unsafe.Pointer(&bd.nums[len(bd.nums)-1])))
	}
}

// str appends a text argument.
func (bd *binder) str(s string) {
	if cap(bd.strs) == len(bd.strs) {
		bd.args = append(bd.args, s)
		return
	}
	bd.strs = append(bd.strs, s)
	bd.args = append(bd.args, box(typeString, unsafe.Pointer(&bd.strs[len(bd.strs)-1])))
}

// blob appends a blob argument of v's values (encFloats), NULL for none.
func (bd *binder) floats(v []float64) {
	if len(v) == 0 {
		bd.args = append(bd.args, []byte(nil))
		return
	}
	start := len(bd.bytes)
	for _, x := range v {
		bd.bytes = binary.LittleEndian.AppendUint64(bd.bytes, math.Float64bits(x))
	}
	b := bd.bytes[start:len(bd.bytes):len(bd.bytes)]
	if cap(bd.blobs) == len(bd.blobs) {
		bd.args = append(bd.args, b)
		return
	}
	bd.blobs = append(bd.blobs, b)
	bd.args = append(bd.args, box(typeBytes, unsafe.Pointer(&bd.blobs[len(bd.blobs)-1])))
}

// text appends a text argument whose bytes are made by fn in the binder's
// byte block (no copy to a string of its own).
func (bd *binder) text(fn func([]byte) []byte) {
	start := len(bd.bytes)
	bd.bytes = fn(bd.bytes)
	b := bd.bytes[start:]
	bd.str(unsafe.String(unsafe.SliceData(b), len(b)))
}

// flags appends the flags column of d (store.AppendFlags).
func (bd *binder) flags(d *store.Diagnostics) {
	bd.text(func(b []byte) []byte { return store.AppendFlags(b, d.Flags) })
}

// time appends a time argument as encTime binds it: unix nanoseconds, NULL
// for the zero time, an error outside the storable range.
func (bd *binder) time(t time.Time) error {
	if t.IsZero() {
		bd.args = append(bd.args, nil)
		return nil
	}
	if err := checkTime(t); err != nil {
		return err
	}
	bd.int64(t.UnixNano())
	return nil
}
