package engine

// ArrivalJudge judges rows one at a time as they arrive, each against the
// fit of the n rows that include it (an online fit's last Add). It gives
// what Judge gives for an Influence of that one row, bit for bit, without
// allocating: the cutoffs depend on n and are worked out per row, the
// coefficient names once.
//
// The outlier test is always the Bonferroni test: the Grubbs test needs
// every residual of the fit, which an arriving row does not have.
// An ArrivalJudge may be used by one goroutine at a time.
type ArrivalJudge struct {
	c     Cutoffs
	p     int
	names []string
	j     judge
}

// NewArrivalJudge returns a judge for rows of model m under cutoffs c
// (with c.Test set to BonferroniTest).
func NewArrivalJudge(m Model, c Cutoffs) *ArrivalJudge {
	c.Test = BonferroniTest
	return &ArrivalJudge{c: c, p: m.P(), names: m.Names()}
}

// Judge judges the row with measures o and DFBETAS dfb (nil for none,
// else P values) in a fit of n rows. The row's flags are appended to dst;
// the verdict's Flags are the appended part, capped so that appending to
// them cannot overwrite what dst holds next. It returns the verdict and
// the extended dst.
func (a *ArrivalJudge) Judge(dst []Flag, o Obs, dfb []float64, n int) (Verdict, []Flag) {
	rows := [1]Obs{o}
	a.j.init(a.c, n, a.p, a.names, rows[:])
	var v Verdict
	start := len(dst)
	dst = a.j.row(dst, 0, &rows[0], dfb, &v)
	if len(dst) > start {
		v.Flags = dst[start:len(dst):len(dst)]
	}
	return v, dst
}
