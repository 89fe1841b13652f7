package main

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strconv"
	"strings"

	"plumb/cmd/plumb/internal/analysis"
	"plumb/cmd/plumb/internal/view"
	"plumb/engine"
)

// inspectResult is everything the writers print: the read model of the
// analysis (view.Result, as the dashboard and the report read it) and the
// file's rows.
type inspectResult struct {
	*view.Result
	file    string
	ds      *inspectData
	model   engine.Model
	names   []string
	cutoffs engine.Cutoffs

	checkpoints   []engine.Checkpoint
	units         map[string]string
	missingTokens []string // --missing
	filter        bool     // --filter given
	poolProblem   string   // why the poolability tests were not made
	formLevel     float64  // --form-level
}

func analyze(ctx context.Context, opt *inspectOptions, m engine.Model, ds *inspectData) (*inspectResult, error) {
	if opt.suggest {
		cols := m.Columns()
		for c := range opt.region {
			if !slices.Contains(cols, c) {
				return nil, fmt.Errorf("inspect: %w: --region: %q is not a predictor column of the model (its columns: %s)", errUsage, c, strings.Join(cols, ", "))
			}
		}
	}
	if err := checkUnits(m, opt.units); err != nil {
		return nil, err
	}
	if err := checkAt(m, opt.answers.At); err != nil {
		return nil, err
	}
	res := &inspectResult{file: ds.file, ds: ds, model: m, names: m.Names(), cutoffs: opt.cutoffs, checkpoints: opt.checkpoints, units: opt.units, missingTokens: opt.dialect.Missing, filter: opt.filter != nil, formLevel: opt.formLevel}
	conc := engine.DefaultConclusions()
	conc.Checkpoints = opt.checkpoints
	a := analysis.Analysis{Model: m, Options: analysis.Options{
		Cutoffs:          opt.cutoffs,
		Conclusions:      conc,
		Fragility:        opt.fragility,
		FragilityOptions: engine.FragilityOptions{MaxRemoved: opt.maxRemoved},
		Suggest:          opt.suggest,
		SuggestOptions:   engine.SuggestOptions{Replicates: opt.replicates},
		Region:           opt.region,
		Answers:          opt.answers,
		Label:            res.rowLabel,
		Form:             true,
		Pool:             true,
		PoolAlpha:        opt.poolAlpha,
	}}
	if err := textColumnHint(ds, m); err != nil {
		return nil, err
	}
	for {
		if len(ds.rowNo) == 0 {
			return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: none of the %d data rows could be used%s", ds.file, ds.total, ds.leftOutWords())}
		}
		r, err := a.RunData(ctx, engine.Data{Num: ds.cols, Text: ds.text})
		var se *analysis.StepError
		if !errors.As(err, &se) {
			if err != nil {
				return nil, err // cancelled
			}
			res.Result = &view.Result{Result: r, Cutoffs: opt.cutoffs, Row: res.row}
			// The model as built: its group levels name the coefficients.
			res.model, res.names = r.Model, r.Model.Names()
			break
		}
		var de *engine.DataError
		if se.Step == analysis.StepDesign && errors.As(se.Err, &de) && de.Row >= 0 && de.Row < len(ds.rowNo) {
			// A value the design cannot take (a power that overflows, say):
			// set the row aside like an unreadable one and build again.
			col := de.Column
			for _, t := range m.Terms {
				if t.Text == col && len(t.Factors) > 0 {
					col = t.Factors[0].Column
				}
			}
			ds.reject(de.Row, col, de.Err.Error(), opt.delimiter)
			ds.drop([]int{de.Row})
			continue
		}
		if se.Step == analysis.StepRefit && errors.Is(se.Err, engine.ErrTooFewRows) {
			return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: %d usable rows for %d coefficients: %w", ds.file, len(ds.rowNo), m.P(), se.Err)}
		}
		return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: %w", ds.file, se.Err)}
	}
	for _, p := range res.Problems {
		if p.Step == analysis.StepPool {
			// The poolability tests could not be made (a level too small
			// for a line of its own, say): the rest of the report stands.
			res.poolProblem = p.Err.Error()
			continue
		}
		if p.Step == analysis.StepRegion {
			return nil, &exitError{code: 1, err: fmt.Errorf("inspect: %s: %w", ds.file, p.Err)}
		}
		return nil, fmt.Errorf("inspect: %w: %v", errUsage, p.Err)
	}
	return res, nil
}

// row is where the i-th fitted row (0-based) is in the file: its data row
// number (as ID) and line.
func (r *inspectResult) row(i int) view.RowRef {
	return view.RowRef{ID: int64(r.ds.rowNo[i]), File: r.file, Line: r.ds.line[i], Label: r.ds.label(i)}
}

// rowLabel names the k-th fitted row (1-based, as the engine counts) by
// its data row and line in the file.
func (r *inspectResult) rowLabel(k int) string {
	if k < 1 || k > len(r.ds.rowNo) {
		return "row ?"
	}
	ref := r.row(k - 1)
	return rowWords(int(ref.ID), ref.Line, ref.Label)
}

// fileRow is the data row number and line of the k-th fitted row
// (1-based), or zeros.
func (r *inspectResult) fileRow(k int) (row, line int) {
	if k < 1 || k > len(r.ds.rowNo) {
		return 0, 0
	}
	ref := r.row(k - 1)
	return int(ref.ID), ref.Line
}

// rowWords names a row for people: `row 17 (line 18)`, or with its
// --id-column label `row 17 "Fiat 128" (line 18)`.
func rowWords(row, line int, label string) string {
	if label == "" {
		return fmt.Sprintf("row %d (line %d)", row, line)
	}
	return fmt.Sprintf("row %d %s (line %d)", row, strconv.Quote(label), line)
}

// fileLabel is the --id-column label of the k-th fitted row (1-based),
// or "".
func (r *inspectResult) fileLabel(k int) string {
	if k < 1 || k > len(r.ds.rowNo) {
		return ""
	}
	return r.ds.label(k - 1)
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
