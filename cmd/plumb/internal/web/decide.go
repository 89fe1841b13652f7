package web

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"
	"time"

	"plumb/cmd/plumb/internal/access"
	"plumb/cmd/plumb/internal/view"
)

// The decision endpoints (view.Decider), each behind the gate:
//
//	GET  /api/v1/whoami                         the caller as the gate sees it {"name","role","via"}
//	POST /api/v1/models/{name}/exclude          {"obs"|"row","reason","alert"} reviewer -> the decision
//	POST /api/v1/models/{name}/reinstate        {"obs"|"row","reason"} reviewer -> the decision
//	POST /api/v1/models/{name}/rebaseline       {"from" (RFC 3339, default now),"reason"} reviewer
//	GET  /api/v1/quiet                          quiet periods not over (and those of the last day)
//	POST /api/v1/quiet                          {"model" ("" all),"start" (default now),"end","reason"} operator
//	POST /api/v1/quiet/{id}/end                 {"reason"} operator
//
// The answer is sent only after the decision and its audit record are
// committed. An operator asking to exclude gets 403; a caller without
// credentials 401.

func (s *server) routeDecisions(mux *http.ServeMux, api func(method, path string, h http.HandlerFunc)) {
	api("GET", "/api/v1/whoami", s.apiWhoami)
	api("POST", "/api/v1/models/{name}/exclude", s.apiExclude)
	api("POST", "/api/v1/models/{name}/reinstate", s.apiReinstate)
	api("POST", "/api/v1/models/{name}/rebaseline", s.apiRebaseline)
	api("POST", "/api/v1/quiet/{id}/end", s.apiEndQuiet)
	mux.HandleFunc("GET /api/v1/quiet", s.apiQuietList)
	mux.HandleFunc("POST /api/v1/quiet", s.apiSetQuiet)
	mux.HandleFunc("/api/v1/quiet", func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Allow", "GET, POST")
		s.fail(w, r, http.StatusMethodNotAllowed, fmt.Errorf("%s %s: use GET or POST", r.Method, r.URL.Path))
	})
}

// authorize admits the request for the action and names the caller, or
// answers the refusal (cross-origin 403; no credentials 401; a role that
// may not 403).
func (s *server) authorize(w http.ResponseWriter, r *http.Request, a access.Action) (access.User, bool) {
	if err := s.csrf.Check(r); err != nil {
		s.fail(w, r, http.StatusForbidden, errors.New("cross-origin request refused"))
		return access.User{}, false
	}
	u, err := s.gate.Allow(r, a)
	if err == nil {
		return u, true
	}
	if s.gate.Open() && errors.Is(err, access.ErrNoCredentials) {
		s.fail(w, r, http.StatusForbidden, errors.New("no token or user is configured, so actions are taken only from this host (loopback)"))
		return u, false
	}
	st := access.Status(err)
	if st == http.StatusUnauthorized {
		w.Header().Set("WWW-Authenticate", `Bearer realm="plumb"`)
		err = fmt.Errorf("a valid bearer token is needed to %s", purpose[a])
	}
	s.fail(w, r, st, err)
	return u, false
}

// purpose says what an action changes, for the 401 message.
var purpose = map[access.Action]string{
	access.Acknowledge: "change an alert",
	access.Resolve:     "change an alert",
	access.Exclude:     "set a reading aside",
	access.Reinstate:   "reinstate a reading",
	access.Rebaseline:  "re-baseline a model",
	access.Quiet:       "set or end a quiet period",
}

func (s *server) apiWhoami(w http.ResponseWriter, r *http.Request) {
	u, err := s.gate.Identify(r)
	if err != nil {
		s.fail(w, r, access.Status(err), err)
		return
	}
	writeJSON(w, http.StatusOK, whoBody{Name: u.Name, Role: u.Role.String(), Via: u.Via,
		MayExclude: u.Role.May(access.Exclude), MayAck: u.Role.May(access.Acknowledge)})
}

type whoBody struct {
	Name       string `json:"name"`
	Role       string `json:"role"`
	Via        string `json:"via"`
	MayExclude bool   `json:"may_exclude"`
	MayAck     bool   `json:"may_acknowledge"`
}

// decisionBody is the JSON body of a decision request.
type decisionBody struct {
	Obs    int64  `json:"obs"`
	Row    string `json:"row"`
	Reason string `json:"reason"`
	Alert  string `json:"alert"`
	From   string `json:"from"`
	Model  string `json:"model"`
	Start  string `json:"start"`
	End    string `json:"end"`
}

func readDecision(r *http.Request) (decisionBody, error) {
	var b decisionBody
	if !strings.HasPrefix(r.Header.Get("Content-Type"), "application/json") {
		return b, &badRequest{"the body must be JSON (Content-Type: application/json)"}
	}
	dec := json.NewDecoder(http.MaxBytesReader(nil, r.Body, 64<<10))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&b); err != nil && !errors.Is(err, io.EOF) {
		return b, &badRequest{"body: " + err.Error()}
	}
	if len(b.Reason) > 2000 || len(b.Row) > 4096 {
		return b, &badRequest{"reason (2000 bytes) or row too long"}
	}
	if strings.TrimSpace(b.Reason) == "" {
		return b, &badRequest{"a reason is required"}
	}
	return b, nil
}

func parseTime(field, v string) (time.Time, error) {
	if v == "" {
		return time.Time{}, nil
	}
	t, err := time.Parse(time.RFC3339, v)
	if err != nil {
		return t, &badRequest{fmt.Sprintf("%s %q: want an RFC 3339 time (2026-05-04T08:00:00Z)", field, v)}
	}
	return t, nil
}

// decider returns the Source's Decider, or answers 501.
func (s *server) decider(w http.ResponseWriter, r *http.Request) (view.Decider, bool) {
	d, ok := s.src.(view.Decider)
	if !ok {
		s.fail(w, r, http.StatusNotImplemented, errors.New("this server records no decisions"))
	}
	return d, ok
}

// decide runs one decision for an admitted caller and answers it.
func decide[T any](s *server, w http.ResponseWriter, r *http.Request, a access.Action, do func(ctx context.Context, d view.Decider, u access.User, b decisionBody) (T, error)) {
	u, ok := s.authorize(w, r, a)
	if !ok {
		return
	}
	d, ok := s.decider(w, r)
	if !ok {
		return
	}
	b, err := readDecision(r)
	if err != nil {
		s.fail(w, r, http.StatusBadRequest, err)
		return
	}
	ctx, cancel := s.ctx(r)
	defer cancel()
	out, err := do(ctx, d, u, b)
	if err != nil {
		s.fail(w, r, decisionStatus(err), err)
		return
	}
	writeJSON(w, http.StatusOK, out)
}

func decisionStatus(err error) int {
	if errors.Is(err, view.ErrInvalid) {
		return http.StatusBadRequest
	}
	return statusOf(err)
}

func rowKey(b decisionBody) view.RowKey { return view.RowKey{ID: b.Obs, Line: b.Row} }

func (s *server) apiExclude(w http.ResponseWriter, r *http.Request) {
	decide(s, w, r, access.Exclude, func(ctx context.Context, d view.Decider, u access.User, b decisionBody) (view.DecisionView, error) {
		return d.Exclude(ctx, r.PathValue("name"), rowKey(b), u.Name, b.Reason, b.Alert)
	})
}

func (s *server) apiReinstate(w http.ResponseWriter, r *http.Request) {
	decide(s, w, r, access.Reinstate, func(ctx context.Context, d view.Decider, u access.User, b decisionBody) (view.DecisionView, error) {
		return d.Reinstate(ctx, r.PathValue("name"), rowKey(b), u.Name, b.Reason)
	})
}

func (s *server) apiRebaseline(w http.ResponseWriter, r *http.Request) {
	decide(s, w, r, access.Rebaseline, func(ctx context.Context, d view.Decider, u access.User, b decisionBody) (view.RebaselineView, error) {
		from, err := parseTime("from", b.From)
		if err != nil {
			return view.RebaselineView{}, err
		}
		return d.Rebaseline(ctx, r.PathValue("name"), from, u.Name, b.Reason)
	})
}

func (s *server) apiSetQuiet(w http.ResponseWriter, r *http.Request) {
	decide(s, w, r, access.Quiet, func(ctx context.Context, d view.Decider, u access.User, b decisionBody) (view.QuietView, error) {
		start, err := parseTime("start", b.Start)
		if err != nil {
			return view.QuietView{}, err
		}
		end, err := parseTime("end", b.End)
		if err != nil {
			return view.QuietView{}, err
		}
		if end.IsZero() {
			return view.QuietView{}, &badRequest{"end is required (RFC 3339)"}
		}
		return d.SetQuiet(ctx, view.QuietView{Model: b.Model, Start: start, End: end, Owner: u.Name, Reason: b.Reason})
	})
}

func (s *server) apiEndQuiet(w http.ResponseWriter, r *http.Request) {
	decide(s, w, r, access.Quiet, func(ctx context.Context, d view.Decider, u access.User, b decisionBody) (view.QuietView, error) {
		id, err := strconv.ParseInt(r.PathValue("id"), 10, 64)
		if err != nil || id <= 0 {
			return view.QuietView{}, &badRequest{fmt.Sprintf("quiet period %q: want a positive id", r.PathValue("id"))}
		}
		return d.EndQuiet(ctx, id, u.Name, b.Reason)
	})
}

func (s *server) apiQuietList(w http.ResponseWriter, r *http.Request) {
	d, ok := s.decider(w, r)
	if !ok {
		return
	}
	ctx, cancel := s.ctx(r)
	defer cancel()
	qs, err := d.QuietPeriods(ctx)
	if err != nil {
		s.fail(w, r, statusOf(err), err)
		return
	}
	if qs == nil {
		qs = []view.QuietView{}
	}
	writeJSON(w, http.StatusOK, listBody[view.QuietView]{Items: qs})
}

// acting is how the dashboard names the caller: "r.okafor (reviewer)",
// "anonymous (viewer)".
func acting(u access.User) string {
	name := u.Name
	if name == "" {
		name = "anonymous"
	}
	return name + " (" + u.Role.String() + ")"
}
