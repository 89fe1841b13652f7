package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"

	"plumb/cmd/plumb/internal/config"
	"plumb/engine"
	"plumb/watcher/decode"
)

// textTermRows is how many data rows of a model's first file config check
// reads to tell a text column.
const textTermRows = 20

// textTermProblems reads the first data rows of the first file (in name
// order) each model's folder holds now, and reports a column the model
// uses as a plain term whose cells are text in every row read, with
// file:line:column and the suggestion to write group(...). Models whose
// folder is missing or empty are not looked at.
func textTermProblems(path string, c *config.Config) []error {
	var out []error
	for i, mc := range c.Models {
		spec, err := engine.NewModel(mc.Response, mc.Terms, *mc.Intercept)
		if err != nil {
			continue // reported by loadConfig
		}
		var plain []string
		for _, col := range spec.Columns() {
			if !groupOnly(spec, col) {
				plain = append(plain, col)
			}
		}
		if len(plain) == 0 {
			continue
		}
		files, _ := filepath.Glob(filepath.Join(c.Resolve(mc.Folder), mc.Pattern))
		sort.Strings(files)
		var file string
		for _, f := range files {
			if st, err := os.Stat(f); err == nil && st.Mode().IsRegular() {
				file = f
				break
			}
		}
		if file == "" {
			continue
		}
		fh, err := os.Open(file)
		if err != nil {
			continue
		}
		buf, _ := io.ReadAll(io.LimitReader(fh, 1<<20))
		fh.Close()
		dec := decode.NewDecoder(file, decode.Dialect{Delimiter: mc.Delimiter[0], Comment: mc.Comment, DecimalComma: mc.DecimalComma, Missing: mc.Missing})
		if err := dec.Select(plain, nil); err != nil {
			continue // the header lacks a column: the daemon will say so
		}
		rows := 0
		textIn := map[string]int{}
		first := map[string]*decode.RowError{}
		errStop := errors.New("enough rows")
		dec.Feed(buf, true, func(r decode.Record) error {
			rows++
			if r.Err != nil && errors.Is(r.Err.Err, decode.ErrNotNumber) {
				textIn[r.Err.Name]++
				if first[r.Err.Name] == nil {
					first[r.Err.Name] = r.Err
				}
			}
			if rows >= textTermRows {
				return errStop
			}
			return nil
		})
		for _, col := range plain {
			if rows > 0 && textIn[col] == rows {
				e := first[col]
				out = append(out, fmt.Errorf("%s: model[%d] %q: column %q holds text, not numbers (%s:%d:%d: %v, and in every row of the first %d read); to use its values as levels write group(%s) in terms",
					path, i+1, mc.Name, col, e.File, e.Line, e.Column, e.Err, rows, engine.Weighting{Column: col}))
			}
		}
	}
	return out
}
