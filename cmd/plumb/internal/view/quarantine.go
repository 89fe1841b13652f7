package view

import (
	"fmt"
	"strconv"
)

// Where gives an unreadable row's position for people: file:line:column
// (file:line when the byte column is not known), then the column's name
// and position when known, e.g. `feed.csv:212:14, column "emf_mv" (field 3)`.
func (q QuarantineView) Where() string {
	s := q.File + ":" + strconv.Itoa(q.Line)
	if q.Column > 0 {
		s += ":" + strconv.Itoa(q.Column)
	}
	switch {
	case q.ColumnName != "" && q.Field > 0:
		s += fmt.Sprintf(", column %q (field %d)", q.ColumnName, q.Field)
	case q.ColumnName != "":
		s += fmt.Sprintf(", column %q", q.ColumnName)
	case q.Field > 0:
		s += fmt.Sprintf(", field %d", q.Field)
	}
	return s
}
