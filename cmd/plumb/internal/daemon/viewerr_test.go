package daemon

import (
	"context"
	"errors"
	"fmt"
	"testing"

	"plumb/cmd/plumb/internal/view"
)

// TestViewErrorsArePlain: an unknown alert or model is one plain line
// (the API returns it as is) that still matches view.ErrNotFound.
func TestViewErrorsArePlain(t *testing.T) {
	dir := t.TempDir()
	r := start(t, testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false)))
	src := r.d.View()
	ctx := context.Background()
	for _, tc := range []struct {
		name string
		err  error
		want string
	}{
		{"alert", func() error { _, err := src.Alert(ctx, "sp-0000000000000000"); return err }(), `no alert has the id "sp-0000000000000000"`},
		{"ack", src.Ack(ctx, "sp-0000000000000000", "", "x"), `no alert has the id "sp-0000000000000000"`},
		{"resolve", src.Resolve(ctx, "sp-0000000000000000", ""), `no alert has the id "sp-0000000000000000"`},
		{"model", func() error { _, err := src.Model(ctx, "nope"); return err }(), `no model is named "nope"`},
	} {
		if !errors.Is(tc.err, view.ErrNotFound) || tc.err.Error() != tc.want {
			t.Errorf("%s: %v, want %q matching view.ErrNotFound", tc.name, tc.err, tc.want)
		}
	}
}
