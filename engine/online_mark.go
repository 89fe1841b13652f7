package engine

// OnlineMark is a saved state of an Online, for undoing the rows added
// after it (the daemon undoes a batch whose commit failed).
type OnlineMark struct {
	n, since int
	diagOK   bool
	r, diag  []float64
}

// Snapshot saves o's state in O(p²).
func (o *Online) Snapshot() OnlineMark {
	return OnlineMark{n: o.n, since: o.since, diagOK: o.diagOK,
		r: append([]float64(nil), o.r...), diag: append([]float64(nil), o.diag...)}
}

// Restore returns o to the state saved by Snapshot. A mark taken from an
// Online with another number of coefficients panics.
func (o *Online) Restore(m OnlineMark) {
	if len(m.r) != len(o.r) {
		panic("engine: Online.Restore: mark from an Online of another size")
	}
	o.n, o.since, o.diagOK = m.n, m.since, m.diagOK
	copy(o.r, m.r)
	copy(o.diag, m.diag)
}
