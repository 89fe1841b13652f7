package web

import (
	"context"
	"fmt"
	"net/http"
	"strings"
	"sync"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/access"
	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

// deciding is a view.Source with a recording view.Decider over the
// demo fake.
type deciding struct {
	*viewtest.Fake
	mu    sync.Mutex
	calls []string
}

func (d *deciding) record(s string) {
	d.mu.Lock()
	d.calls = append(d.calls, s)
	d.mu.Unlock()
}

func (d *deciding) Exclude(ctx context.Context, model string, row view.RowKey, by, reason, alert string) (view.DecisionView, error) {
	if _, err := d.Model(ctx, model); err != nil {
		return view.DecisionView{}, err
	}
	d.record(fmt.Sprintf("exclude %s %d %q by %s: %s", model, row.ID, row.Line, by, reason))
	return view.DecisionView{Model: model, ObsID: row.ID, Action: "exclude", By: by, Reason: reason}, nil
}

func (d *deciding) Reinstate(ctx context.Context, model string, row view.RowKey, by, reason string) (view.DecisionView, error) {
	d.record(fmt.Sprintf("reinstate %s %d by %s: %s", model, row.ID, by, reason))
	return view.DecisionView{Model: model, ObsID: row.ID, Action: "reinstate", By: by, Reason: reason}, nil
}

func (d *deciding) Rebaseline(ctx context.Context, model string, from time.Time, by, reason string) (view.RebaselineView, error) {
	d.record(fmt.Sprintf("rebaseline %s from %s by %s: %s", model, from.Format(time.RFC3339), by, reason))
	return view.RebaselineView{Model: model, From: from, By: by, Reason: reason}, nil
}

func (d *deciding) SetQuiet(ctx context.Context, q view.QuietView) (view.QuietView, error) {
	if q.Start.IsZero() {
		q.Start = time.Now()
	}
	if q.End.Sub(q.Start) > time.Hour {
		return view.QuietView{}, fmt.Errorf("%w: longer than quiet_max", view.ErrInvalid)
	}
	d.record(fmt.Sprintf("quiet %q by %s: %s", q.Model, q.Owner, q.Reason))
	q.ID = 1
	return q, nil
}

func (d *deciding) EndQuiet(ctx context.Context, id int64, by, reason string) (view.QuietView, error) {
	d.record(fmt.Sprintf("end quiet %d by %s: %s", id, by, reason))
	return view.QuietView{ID: id, EndedBy: by, EndReason: reason}, nil
}

func (d *deciding) QuietPeriods(ctx context.Context) ([]view.QuietView, error) { return nil, nil }

func TestDecisionEndpoints(t *testing.T) {
	const rev, op = "reviewer-token-0001", "operator-token-0002"
	gate, err := access.New(access.Config{Accounts: []access.Account{
		{Name: "r.okafor", Role: access.Reviewer, TokenHash: access.HashToken(rev)},
		{Name: "j.tanaka", Role: access.Operator, TokenHash: access.HashToken(op)},
	}})
	if err != nil {
		t.Fatal(err)
	}
	src := &deciding{Fake: viewtest.Demo()}
	h := New(src, Options{Gate: gate})
	bearer := func(tok string) map[string]string { return map[string]string{"Authorization": "Bearer " + tok} }
	end := time.Now().UTC().Add(30 * time.Minute).Format(time.RFC3339)
	tests := []struct {
		name   string
		c      call
		status int
		call   string
	}{
		{"reviewer excludes by row", call{method: "POST", path: "/api/v1/models/bench-b/exclude", body: `{"row":"run-0314.csv:12","reason":"valve left open"}`, header: bearer(rev)},
			200, `exclude bench-b 0 "run-0314.csv:12" by r.okafor: valve left open`},
		{"operator may not exclude", call{method: "POST", path: "/api/v1/models/bench-b/exclude", body: `{"obs":3,"reason":"x"}`, header: bearer(op)}, 403, ""},
		{"operator may not reinstate", call{method: "POST", path: "/api/v1/models/bench-b/reinstate", body: `{"obs":3,"reason":"x"}`, header: bearer(op)}, 403, ""},
		{"operator may not re-baseline", call{method: "POST", path: "/api/v1/models/bench-b/rebaseline", body: `{"reason":"x"}`, header: bearer(op)}, 403, ""},
		{"anonymous is asked for a token", call{method: "POST", path: "/api/v1/models/bench-b/exclude", body: `{"obs":3,"reason":"x"}`}, 401, ""},
		{"a wrong token", call{method: "POST", path: "/api/v1/models/bench-b/exclude", body: `{"obs":3,"reason":"x"}`, header: bearer("nope")}, 401, ""},
		{"no reason", call{method: "POST", path: "/api/v1/models/bench-b/exclude", body: `{"obs":3}`, header: bearer(rev)}, 400, ""},
		{"unknown field", call{method: "POST", path: "/api/v1/models/bench-b/exclude", body: `{"obs":3,"reason":"x","who":"me"}`, header: bearer(rev)}, 400, ""},
		{"unknown model", call{method: "POST", path: "/api/v1/models/nope/exclude", body: `{"obs":3,"reason":"x"}`, header: bearer(rev)}, 404, ""},
		{"cross-origin", call{method: "POST", path: "/api/v1/models/bench-b/exclude", body: `{"obs":3,"reason":"x"}`, header: map[string]string{"Authorization": "Bearer " + rev, "Sec-Fetch-Site": "cross-site"}}, 403, ""},
		{"reviewer reinstates", call{method: "POST", path: "/api/v1/models/bench-b/reinstate", body: `{"obs":3,"reason":"log checked"}`, header: bearer(rev)},
			200, "reinstate bench-b 3 by r.okafor: log checked"},
		{"reviewer re-baselines", call{method: "POST", path: "/api/v1/models/bench-b/rebaseline", body: `{"from":"2026-05-04T08:00:00Z","reason":"sensor replaced"}`, header: bearer(rev)},
			200, "rebaseline bench-b from 2026-05-04T08:00:00Z by r.okafor: sensor replaced"},
		{"a bad time", call{method: "POST", path: "/api/v1/models/bench-b/rebaseline", body: `{"from":"yesterday","reason":"x"}`, header: bearer(rev)}, 400, ""},
		{"operator sets a quiet period", call{method: "POST", path: "/api/v1/quiet", body: `{"model":"bench-b","end":"` + end + `","reason":"pump service"}`, header: bearer(op)},
			200, `quiet "bench-b" by j.tanaka: pump service`},
		{"a quiet period needs an end", call{method: "POST", path: "/api/v1/quiet", body: `{"reason":"x"}`, header: bearer(op)}, 400, ""},
		{"a quiet period too long", call{method: "POST", path: "/api/v1/quiet", body: `{"end":"` + time.Now().UTC().Add(5*time.Hour).Format(time.RFC3339) + `","reason":"x"}`, header: bearer(op)}, 400, ""},
		{"operator ends it", call{method: "POST", path: "/api/v1/quiet/1/end", body: `{"reason":"done early"}`, header: bearer(op)}, 200, "end quiet 1 by j.tanaka: done early"},
		{"anonymous may not set quiet", call{method: "POST", path: "/api/v1/quiet", body: `{"end":"` + end + `","reason":"x"}`}, 401, ""},
		{"list quiet periods", call{method: "GET", path: "/api/v1/quiet"}, 200, ""},
		{"wrong method", call{method: "DELETE", path: "/api/v1/quiet"}, 405, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			src.mu.Lock()
			n := len(src.calls)
			src.mu.Unlock()
			w := serve(t, h, tt.c)
			if w.Code != tt.status {
				t.Fatalf("status %d, want %d: %s", w.Code, tt.status, w.Body.String())
			}
			if w.Code == http.StatusUnauthorized && w.Header().Get("WWW-Authenticate") == "" {
				t.Errorf("401 without WWW-Authenticate")
			}
			src.mu.Lock()
			got := src.calls[n:]
			src.mu.Unlock()
			switch {
			case tt.call == "" && len(got) > 0:
				t.Errorf("refused request reached the source: %v", got)
			case tt.call != "" && (len(got) != 1 || got[0] != tt.call):
				t.Errorf("source saw %v, want %q", got, tt.call)
			}
		})
	}
}

// whoami names the caller; the dashboard shows it.
func TestWhoami(t *testing.T) {
	gate, err := access.New(access.Config{Accounts: []access.Account{{Name: "r.okafor", Role: access.Reviewer, TokenHash: access.HashToken("tok-r")}}})
	if err != nil {
		t.Fatal(err)
	}
	h := New(viewtest.Demo(), Options{Gate: gate})
	w := serve(t, h, call{method: "GET", path: "/api/v1/whoami", header: map[string]string{"Authorization": "Bearer tok-r"}})
	got := decode[whoBody](t, w)
	if got.Name != "r.okafor" || got.Role != "reviewer" || !got.MayExclude {
		t.Errorf("whoami %+v", got)
	}
	got = decode[whoBody](t, serve(t, h, call{method: "GET", path: "/api/v1/whoami"}))
	if got.Name != "" || got.Role != "viewer" || got.MayExclude || got.MayAck {
		t.Errorf("anonymous whoami %+v", got)
	}
	// The page says who is acting (the server's view, before the script).
	w = serve(t, h, call{method: "GET", path: "/"})
	if !strings.Contains(w.Body.String(), "acting as anonymous (viewer)") {
		t.Errorf("the overview does not say who is acting")
	}
	// A Source without decisions answers 501.
	w = serve(t, h, call{method: "POST", path: "/api/v1/models/bench-b/exclude", body: `{"obs":3,"reason":"x"}`, header: map[string]string{"Authorization": "Bearer tok-r"}})
	if w.Code != http.StatusNotImplemented {
		t.Errorf("exclude without a Decider: %d", w.Code)
	}
}
