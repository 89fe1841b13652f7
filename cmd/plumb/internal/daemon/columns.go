package daemon

import (
	"fmt"
	"math"

	"plumb/cmd/plumb/internal/config"
	"plumb/engine"
)

// columns is a model's column storage: the rows it holds in memory, in
// arrival order, one slice per field (values only; the raw text stays in
// the store). A million rows hold no pointers for the garbage collector
// beyond the slices themselves. The model's mutex guards it.
type columns struct {
	ids   []int64
	paths []int32 // index into pathNames
	lines []int32
	times []int64 // unix nanoseconds; 0 when the model has no time column
	// arrived is when each row was stored (unix nanoseconds): a
	// re-baseline without a time column counts rows from it.
	arrived []int64
	// vals[0] is the response, vals[1+j] the model's j-th predictor column.
	vals    [][]float64
	arrival []engine.Word // verdict at arrival ("" when not judged then)
	current []engine.Word // latest verdict ("" when never judged)
	// labels holds each row's id-column text when the model has an id
	// column (nil otherwise: a model without one keeps no strings).
	labels  []string
	labeled bool

	pathNames []string
	pathIdx   map[string]int32
}

// newColumns makes the storage for rows of nvals values each, with a
// label per row when labeled (the model has an id column).
func newColumns(nvals int, labeled bool) *columns {
	return &columns{vals: make([][]float64, nvals), pathIdx: map[string]int32{}, labeled: labeled}
}

// len is the number of rows.
func (c *columns) len() int { return len(c.ids) }

// add appends one row.
func (c *columns) add(id int64, path string, line int, label string, t, arrived int64, v []float64, arrival, current engine.Word) {
	c.ids = append(c.ids, id)
	if c.labeled {
		c.labels = append(c.labels, label)
	}
	c.arrived = append(c.arrived, arrived)
	c.paths = append(c.paths, c.pathIndex(path))
	c.lines = append(c.lines, int32(line))
	c.times = append(c.times, t)
	for j := range c.vals {
		c.vals[j] = append(c.vals[j], v[j])
	}
	c.arrival = append(c.arrival, arrival)
	c.current = append(c.current, current)
}

func (c *columns) pathIndex(p string) int32 {
	if i, ok := c.pathIdx[p]; ok {
		return i
	}
	i := int32(len(c.pathNames))
	c.pathNames = append(c.pathNames, p)
	c.pathIdx[p] = i
	return i
}

// path and line are row r's provenance.
func (c *columns) path(r int) string { return c.pathNames[c.paths[r]] }
func (c *columns) line(r int) int    { return int(c.lines[r]) }

// name is row r's id-column text ("" when the model has none).
func (c *columns) name(r int) string {
	if !c.labeled {
		return ""
	}
	return c.labels[r]
}

// label names row r as "file:line", or "file:line [name]" when it has a
// name.
func (c *columns) label(r int) string {
	if n := c.name(r); n != "" {
		return fmt.Sprintf("%s:%d [%s]", c.path(r), c.lines[r], n)
	}
	return fmt.Sprintf("%s:%d", c.path(r), c.lines[r])
}

// window returns the row indices a fit over the configured window uses:
// the last w.Rows rows, or the rows within w.Span of the newest time, or
// all rows.
func (c *columns) window(w config.Window) []int {
	n := c.len()
	first := 0
	switch {
	case w.Rows > 0 && n > w.Rows:
		first = n - w.Rows
	case w.Span.Duration > 0 && n > 0:
		newest := int64(math.MinInt64)
		for _, t := range c.times {
			newest = max(newest, t)
		}
		cut := newest - w.Span.Nanoseconds()
		win := make([]int, 0, n)
		for i, t := range c.times {
			if t >= cut {
				win = append(win, i)
			}
		}
		return win
	}
	win := make([]int, n-first)
	for i := range win {
		win[i] = first + i
	}
	return win
}

// copyRows returns a copy of the given rows' values by column name;
// names[j] names vals[j].
func (c *columns) copyRows(rows []int, names []string) map[string][]float64 {
	out := make(map[string][]float64, len(names))
	for j, name := range names {
		v := make([]float64, len(rows))
		for i, r := range rows {
			v[i] = c.vals[j][r]
		}
		out[name] = v
	}
	return out
}

// values returns row r's values by column name; names[j] names vals[j].
func (c *columns) values(r int, names []string) map[string]float64 {
	v := make(map[string]float64, len(names))
	for j, name := range names {
		v[name] = c.vals[j][r]
	}
	return v
}
