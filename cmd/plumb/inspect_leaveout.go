package main

// plumb inspect --leave-out LIST: rows that qualified staff have set aside
// are left out of the fit, and listed in the output as left out, with the
// note the list gives. The file itself is never changed.

import (
	"bufio"
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
)

// leftOutRow is a row left out of the fit because the --leave-out list
// names it.
type leftOutRow struct {
	File string `json:"file"`
	Row  int    `json:"row"` // 1-based data row
	Line int    `json:"line"`
	// Entry is where the list names it ("leave.txt:3") and Note the words
	// after the reference ("" when none).
	Entry string `json:"entry"`
	Note  string `json:"note,omitempty"`
}

// leaveOut reads the list at path and leaves the rows it names out of
// ds. Each line of the list is blank, a comment ("#" ...), or a
// reference followed by an optional note:
//
//	12                      the 12th data row (as inspect numbers rows)
//	feed.csv:212 valve open the row that starts on line 212 of feed.csv
//	:212                    line 212 of the inspected file
//
// The file part of FILE:LINE must name the inspected file (its path as
// given, or its base name). A reference to no row of the file, to another
// file, or to one row twice is an error naming the list's file and line.
// A row already set aside as unreadable is listed among the rejected rows
// and not again.
func leaveOut(ds *inspectData, path string) error {
	list, err := os.ReadFile(path)
	if err != nil {
		return fmt.Errorf("inspect: --leave-out: %w", err)
	}
	byRow := make(map[int]int, len(ds.rowNo))
	byLine := make(map[int]int, len(ds.line))
	for i := range ds.rowNo {
		byRow[ds.rowNo[i]] = i
		byLine[ds.line[i]] = i
	}
	unreadable := map[int]bool{}
	unreadableLine := map[int]bool{}
	for _, r := range ds.rejected {
		unreadable[r.Row] = true
		unreadableLine[r.Line] = true
	}
	seen := map[int]string{}
	var idx []int
	var out []leftOutRow
	sc := bufio.NewScanner(bytes.NewReader(list))
	sc.Buffer(make([]byte, 64<<10), 1<<20)
	for n := 1; sc.Scan(); n++ {
		text := strings.TrimSpace(sc.Text())
		if text == "" || strings.HasPrefix(text, "#") {
			continue
		}
		at := fmt.Sprintf("%s:%d", path, n)
		ref, note, _ := strings.Cut(text, " ")
		if i := strings.IndexByte(ref, '\t'); i >= 0 {
			ref, note = ref[:i], ref[i+1:]+" "+note
		}
		note = strings.TrimSpace(note)
		var i int
		var ok, gone bool
		if k := strings.LastIndexByte(ref, ':'); k >= 0 {
			file, num := ref[:k], ref[k+1:]
			line, err := strconv.Atoi(num)
			if err != nil || line < 1 {
				return fmt.Errorf("inspect: --leave-out %s: %q: want a data row number or FILE:LINE", at, ref)
			}
			if file != "" && file != ds.file && file != filepath.Base(ds.file) {
				return fmt.Errorf("inspect: --leave-out %s: %q names %s, not the inspected file %s", at, ref, file, ds.file)
			}
			i, ok = byLine[line]
			gone = unreadableLine[line]
		} else {
			row, err := strconv.Atoi(ref)
			if err != nil || row < 1 {
				return fmt.Errorf("inspect: --leave-out %s: %q: want a data row number or FILE:LINE", at, ref)
			}
			i, ok = byRow[row]
			gone = unreadable[row]
		}
		switch {
		case gone:
			continue // set aside already, listed with its reason
		case !ok:
			return fmt.Errorf("inspect: --leave-out %s: %q is no row of %s (%d data rows)", at, ref, ds.file, ds.total)
		case seen[i] != "":
			return fmt.Errorf("inspect: --leave-out %s: %q names the row %s names already", at, ref, seen[i])
		}
		seen[i] = at
		idx = append(idx, i)
		out = append(out, leftOutRow{File: ds.file, Row: ds.rowNo[i], Line: ds.line[i], Entry: at, Note: note})
	}
	if err := sc.Err(); err != nil {
		return fmt.Errorf("inspect: --leave-out %s: %w", path, err)
	}
	sort.Ints(idx)
	sort.Slice(out, func(a, b int) bool { return out[a].Row < out[b].Row })
	ds.drop(idx)
	ds.leftOut = out
	return nil
}

// where names a left-out row as file:line.
func (r leftOutRow) where() string { return fmt.Sprintf("%s:%d", r.File, r.Line) }

func noteSuffix(note string) string {
	if note == "" {
		return ""
	}
	return ": " + note
}
