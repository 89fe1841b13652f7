package sqlite

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
)

// TestLatestQueryPlans checks that the latest-n reads walk an index
// backwards from the newest row and stop after LIMIT rows: neither scans a
// model's history in full nor sorts it in a temporary b-tree, so their cost
// does not grow with the history. (All models' quarantine is the table
// itself: "SCAN q" reads it backwards by primary key and stops at LIMIT.)
// The paged reads (Fits, Quarantined) seek to the page's first row.
func TestLatestQueryPlans(t *testing.T) {
	ctx := context.Background()
	db, err := Open(ctx, filepath.Join(t.TempDir(), "history.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	for _, tt := range []struct {
		name  string
		query string
		args  []any
		want  string // the plan's step that reads the history table
	}{
		{"LatestFits", latestFitsQuery, []any{1, 300}, "SEARCH fits USING INDEX fits_model (model_id=?)"},
		{"Fits", fitsQuery, []any{1, 0, 1000}, "SEARCH fits USING INDEX fits_model (model_id=? AND id>?)"},
		{"LatestQuarantined", latestQuarantineQuery, []any{1, 50}, "SEARCH q USING INDEX quarantine_model (model_id=?)"},
		{"LatestQuarantined all models", latestQuarantineAllQuery, []any{50}, "SCAN q"},
		{"CountFits", countFitsQuery, []any{"cal"}, "SEARCH fits USING COVERING INDEX fits_model (model_id=?)"},
		{"Quarantined", quarantineQuery, []any{1, 0, 1000}, "SEARCH q USING INDEX quarantine_model (model_id=? AND id>?)"},
		{"Quarantined all models", quarantineAllQuery, []any{0, 1000}, "SEARCH q USING INTEGER PRIMARY KEY (rowid>?)"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			rows, err := db.db.QueryContext(ctx, "EXPLAIN QUERY PLAN "+tt.query, tt.args...)
			if err != nil {
				t.Fatal(err)
			}
			defer rows.Close()
			var steps []string
			for rows.Next() {
				var id, parent, unused int
				var detail string
				if err := rows.Scan(&id, &parent, &unused, &detail); err != nil {
					t.Fatal(err)
				}
				steps = append(steps, detail)
			}
			if err := rows.Err(); err != nil {
				t.Fatal(err)
			}
			plan := strings.Join(steps, "; ")
			if !strings.Contains(plan, tt.want) {
				t.Errorf("plan %q lacks %q", plan, tt.want)
			}
			for _, s := range steps {
				if strings.HasPrefix(s, "SCAN") && s != "SCAN q" {
					t.Errorf("plan %q scans a table in full", plan)
				}
			}
			if strings.Contains(plan, "TEMP B-TREE") {
				t.Errorf("plan %q sorts the history", plan)
			}
		})
	}
}
