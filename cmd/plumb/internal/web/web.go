// Package web is plumb's HTTP face: a JSON status API, the Prometheus
// /metrics endpoint and a live dashboard, all served by one http.Handler
// built from a view.Source.
//
// The daemon owns the listener (the `listen` key of the config, 127.0.0.1
// by default, off when empty) and mounts New's handler on it.
//
// # Endpoints
//
//	GET  /healthz                               200 while the process serves
//	GET  /readyz                                200 when Source.Ready is nil, else 503
//	GET  /metrics                               Prometheus text / OpenMetrics
//	GET  /api/v1/version                        {"version"}; ETag, If-None-Match -> 304
//	GET  /api/v1/models                         every model's summary
//	GET  /api/v1/models/{name}                  the model's current picture ?points=all|flagged|none
//	GET  /api/v1/models/{name}/fits             fit history        ?after=&limit=
//	GET  /api/v1/models/{name}/observations     accepted rows      ?after=&limit=
//	GET  /api/v1/models/{name}/predict          fitted value, intervals ?at=COL=X[,COL=X]&level=&readings=
//	GET  /api/v1/models/{name}/inverse          inverse prediction ?reading=Y&level=&readings=
//	GET  /api/v1/quarantine                     unreadable rows    ?model=&after=&limit=
//	GET  /api/v1/alerts                         alerts, newest first ?state=&model=&kind=&offset=&limit=
//	GET  /api/v1/alerts/{id}                    one alert
//	POST /api/v1/alerts/{id}/ack                {"note","by"} -> the alert
//	POST /api/v1/alerts/{id}/resolve            {"note"} -> the alert
//	GET  /api/v1/whoami                         the caller as the gate sees it
//	POST /api/v1/models/{name}/exclude          {"obs"|"row","reason","alert"} (reviewer) -> the decision
//	POST /api/v1/models/{name}/reinstate        {"obs"|"row","reason"} (reviewer) -> the decision
//	POST /api/v1/models/{name}/rebaseline       {"from","reason"} (reviewer) -> the event
//	GET  /api/v1/quiet                          quiet periods
//	POST /api/v1/quiet                          {"model","start","end","reason"} (operator) -> the period
//	POST /api/v1/quiet/{id}/end                 {"reason"} (operator) -> the period
//	GET  /                                      dashboard: all models
//	GET  /models/{name}                         one model's charts   ?x=predictor
//	GET  /alerts                                alert list with actions ?state=
//	GET  /alerts/{id}                           one alert: its evidence, history and actions
//
// Lists answer {"items": [...], "next": "<url>"}; next is present when
// more items may follow. limit defaults to DefaultLimit and is capped at
// MaxLimit. Errors answer {"error": "<message>"} with the status code.
//
// # Who may act
//
// Every action goes through Options.Gate (package access): named users
// with their own bearer tokens and roles, a trusted proxy's header, or the
// shared token (Options.Token, an operator). Acknowledging, resolving and
// quiet periods need an operator; setting a reading aside, reinstating it
// and re-baselining need a reviewer (an operator gets 403, a caller
// without credentials 401). With nothing configured, actions are refused
// (403) unless the request comes from a loopback address and names a
// loopback host (localhost, 127.0.0.1, [::1]). Either way they are refused
// when a browser says the request is cross-origin, and a body must be
// JSON. Behind a reverse proxy on the same machine every request looks
// local: configure users or a token there. The answer to a decision is
// sent only after it and its audit record are committed.
//
// Every page carries view.Caution.
package web

import (
	"context"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"plumb/cmd/plumb/internal/access"
	"plumb/cmd/plumb/internal/view"
)

// Paging limits of the list endpoints.
const (
	DefaultLimit = 100
	MaxLimit     = 1000
)

// Options configure the handler. The zero value serves without a token
// (actions from loopback only), without /metrics data and logs nothing.
type Options struct {
	// Token, when set, is the bearer token that acknowledging and
	// resolving require.
	Token string
	// Registry is exposed at /metrics; nil answers 404 there.
	Registry *prometheus.Registry
	// Logger receives one line per failed request; nil discards.
	Logger *slog.Logger
	// Timeout bounds each call to the Source (0: 10 s).
	Timeout time.Duration
	// Refresh is how often the dashboard polls for changes (0: 3 s).
	Refresh time.Duration
	// Gate identifies callers and checks their roles (named users, the
	// trusted proxy). nil means a gate over Token alone.
	Gate *access.Gate
}

type server struct {
	src  view.Source
	opts Options
	log  *slog.Logger
	csrf *http.CrossOriginProtection
	gate *access.Gate
}

// New returns the handler serving the API, /metrics and the dashboard.
func New(src view.Source, opts Options) http.Handler {
	if opts.Timeout <= 0 {
		opts.Timeout = 10 * time.Second
	}
	if opts.Refresh <= 0 {
		opts.Refresh = 3 * time.Second
	}
	s := &server{src: src, opts: opts, log: opts.Logger, csrf: http.NewCrossOriginProtection(), gate: opts.Gate}
	if s.log == nil {
		s.log = slog.New(slog.DiscardHandler)
	}
	if s.gate == nil {
		g, err := access.New(access.Config{SharedToken: opts.Token})
		if err != nil {
			panic("web: " + err.Error()) // a shared token alone is always valid
		}
		s.gate = g
	}
	mux := http.NewServeMux()
	mux.HandleFunc("GET /healthz", s.healthz)
	mux.HandleFunc("GET /readyz", s.readyz)
	if opts.Registry != nil {
		mux.Handle("GET /metrics", promhttp.HandlerFor(opts.Registry, promhttp.HandlerOpts{EnableOpenMetrics: true}))
	} else {
		mux.HandleFunc("GET /metrics", func(w http.ResponseWriter, r *http.Request) {
			s.fail(w, r, http.StatusNotFound, errors.New("metrics are not enabled"))
		})
	}
	api := func(method, path string, h http.HandlerFunc) {
		mux.Handle(method+" "+path, h)
		mux.HandleFunc(path, func(w http.ResponseWriter, r *http.Request) {
			w.Header().Set("Allow", method)
			s.fail(w, r, http.StatusMethodNotAllowed, fmt.Errorf("%s %s: use %s", r.Method, r.URL.Path, method))
		})
	}
	api("GET", "/api/v1/version", s.apiVersion)
	api("GET", "/api/v1/models", s.apiModels)
	api("GET", "/api/v1/models/{name}", s.apiModel)
	api("GET", "/api/v1/models/{name}/fits", s.apiFits)
	api("GET", "/api/v1/models/{name}/observations", s.apiObservations)
	api("GET", "/api/v1/models/{name}/predict", s.apiPredict) // api_calib.go
	api("GET", "/api/v1/models/{name}/inverse", s.apiInverse)
	api("GET", "/api/v1/quarantine", s.apiQuarantine)
	api("GET", "/api/v1/alerts", s.apiAlerts)
	api("GET", "/api/v1/alerts/{id}", s.apiAlert)
	api("POST", "/api/v1/alerts/{id}/ack", s.apiAck)
	api("POST", "/api/v1/alerts/{id}/resolve", s.apiResolve)
	s.routeDecisions(mux, api)
	mux.HandleFunc("/api/", func(w http.ResponseWriter, r *http.Request) {
		s.fail(w, r, http.StatusNotFound, fmt.Errorf("no such endpoint: %s %s", r.Method, r.URL.Path))
	})
	mux.HandleFunc("GET /{$}", s.pageOverview)
	mux.HandleFunc("GET /models/{name}", s.pageModel)
	mux.HandleFunc("GET /alerts", s.pageAlerts)
	mux.HandleFunc("GET /alerts/{id}", s.pageAlert)
	mux.Handle("GET /static/", http.StripPrefix("/static/", staticHandler()))
	mux.HandleFunc("GET /favicon.ico", func(w http.ResponseWriter, r *http.Request) {
		http.Redirect(w, r, "/static/bob.svg", http.StatusMovedPermanently)
	})
	return mux
}

func (s *server) ctx(r *http.Request) (context.Context, context.CancelFunc) {
	return context.WithTimeout(r.Context(), s.opts.Timeout)
}

func (s *server) healthz(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "text/plain; charset=utf-8")
	fmt.Fprintln(w, "ok")
}

func (s *server) readyz(w http.ResponseWriter, r *http.Request) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	w.Header().Set("Content-Type", "text/plain; charset=utf-8")
	if err := s.src.Ready(ctx); err != nil {
		w.WriteHeader(http.StatusServiceUnavailable)
		fmt.Fprintln(w, "not ready:", err)
		return
	}
	fmt.Fprintln(w, "ready")
}

// ---- JSON helpers ----

type errorBody struct {
	Error string `json:"error"`
}

type listBody[T any] struct {
	Items []T    `json:"items"`
	Next  string `json:"next,omitempty"`
}

func writeJSON(w http.ResponseWriter, status int, v any) {
	b, err := json.Marshal(v)
	if err != nil {
		status = http.StatusInternalServerError
		b, _ = json.Marshal(errorBody{Error: "encode response: " + err.Error()})
	}
	w.Header().Set("Content-Type", "application/json; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	w.Header().Set("X-Content-Type-Options", "nosniff")
	w.WriteHeader(status)
	w.Write(b)
	w.Write([]byte("\n"))
}

// statusOf maps a Source error to an HTTP status.
func statusOf(err error) int {
	var br *badRequest
	switch {
	case errors.As(err, &br):
		return http.StatusBadRequest
	case errors.Is(err, view.ErrNotFound):
		return http.StatusNotFound
	case errors.Is(err, view.ErrState):
		return http.StatusConflict
	case errors.Is(err, context.DeadlineExceeded):
		return http.StatusGatewayTimeout
	default:
		return http.StatusInternalServerError
	}
}

func (s *server) fail(w http.ResponseWriter, r *http.Request, status int, err error) {
	if status >= 500 {
		s.log.Error("web request failed", "method", r.Method, "path", r.URL.Path, "status", status, "err", err)
	}
	writeJSON(w, status, errorBody{Error: err.Error()})
}

// badRequest is a client error in the query.
type badRequest struct{ msg string }

func (e *badRequest) Error() string { return e.msg }

// paging reads after= (id) and limit= from the query.
func paging(r *http.Request) (after int64, limit int, err error) {
	q := r.URL.Query()
	limit = DefaultLimit
	if v := q.Get("limit"); v != "" {
		n, perr := strconv.Atoi(v)
		if perr != nil || n < 1 {
			return 0, 0, &badRequest{fmt.Sprintf("limit %q: want an integer from 1 to %d", v, MaxLimit)}
		}
		limit = min(n, MaxLimit)
	}
	if v := q.Get("after"); v != "" {
		n, perr := strconv.ParseInt(v, 10, 64)
		if perr != nil || n < 0 {
			return 0, 0, &badRequest{fmt.Sprintf("after %q: want a non-negative id", v)}
		}
		after = n
	}
	return after, limit, nil
}

// nextURL is the request's URL with the given query values replaced.
func nextURL(r *http.Request, set map[string]string) string {
	q := r.URL.Query()
	for k, v := range set {
		q.Set(k, v)
	}
	u := url.URL{Path: r.URL.Path, RawQuery: q.Encode()}
	return u.String()
}

// pageByID fetches limit+1 items to learn whether more follow.
func pageByID[T any](w http.ResponseWriter, r *http.Request, s *server,
	fetch func(ctx context.Context, after int64, limit int) ([]T, error), id func(T) int64) {
	after, limit, err := paging(r)
	if err != nil {
		s.fail(w, r, http.StatusBadRequest, err)
		return
	}
	ctx, cancel := s.ctx(r)
	defer cancel()
	items, err := fetch(ctx, after, limit+1)
	if err != nil {
		s.fail(w, r, statusOf(err), err)
		return
	}
	body := listBody[T]{Items: items}
	if len(items) > limit {
		body.Items = items[:limit]
		body.Next = nextURL(r, map[string]string{
			"after": strconv.FormatInt(id(items[limit-1]), 10),
			"limit": strconv.Itoa(limit),
		})
	}
	if body.Items == nil {
		body.Items = []T{}
	}
	writeJSON(w, http.StatusOK, body)
}

// ---- read-only API ----

// version is a digest of everything the dashboard shows in summary: the
// model summaries and the alert states. It changes when rows arrive, a fit
// completes or an alert changes.
func (s *server) version(ctx context.Context) (string, error) {
	ms, err := s.src.Models(ctx)
	if err != nil {
		return "", err
	}
	as, err := s.src.Alerts(ctx, view.AlertFilter{Limit: MaxLimit})
	if err != nil {
		return "", err
	}
	h := sha256.New()
	json.NewEncoder(h).Encode(ms)
	for _, a := range as {
		fmt.Fprintf(h, "%s\x00%s\x00%d\n", a.ID, a.State, a.LastSeen.UnixNano())
	}
	return fmt.Sprintf("%x", h.Sum(nil)[:12]), nil
}

func (s *server) apiVersion(w http.ResponseWriter, r *http.Request) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	v, err := s.version(ctx)
	if err != nil {
		s.fail(w, r, statusOf(err), err)
		return
	}
	etag := `"` + v + `"`
	w.Header().Set("ETag", etag)
	if r.Header.Get("If-None-Match") == etag {
		w.Header().Set("Cache-Control", "no-cache")
		w.WriteHeader(http.StatusNotModified)
		return
	}
	writeJSON(w, http.StatusOK, map[string]string{"version": v})
}

func (s *server) apiModels(w http.ResponseWriter, r *http.Request) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	ms, err := s.src.Models(ctx)
	if err != nil {
		s.fail(w, r, statusOf(err), err)
		return
	}
	if ms == nil {
		ms = []view.ModelSummary{}
	}
	writeJSON(w, http.StatusOK, listBody[view.ModelSummary]{Items: ms})
}

// modelBody is a model's picture with the points selection stated.
type modelBody struct {
	view.ModelDetail
	// PointsOmitted counts the points left out by ?points=.
	PointsOmitted int `json:"points_omitted"`
}

func (s *server) apiModel(w http.ResponseWriter, r *http.Request) {
	sel := r.URL.Query().Get("points")
	switch sel {
	case "", "all", "flagged", "none":
	default:
		s.fail(w, r, http.StatusBadRequest, &badRequest{fmt.Sprintf("points %q: want all, flagged or none", sel)})
		return
	}
	ctx, cancel := s.ctx(r)
	defer cancel()
	d, err := s.src.Model(ctx, r.PathValue("name"))
	if err != nil {
		s.fail(w, r, statusOf(err), err)
		return
	}
	body := modelBody{ModelDetail: d}
	switch sel {
	case "none":
		body.PointsOmitted, body.Points = len(d.Points), []view.Point{}
	case "flagged":
		var kept []view.Point
		for _, p := range d.Points {
			if p.Verdict != view.VerdictOrdinary && p.Verdict != "" {
				kept = append(kept, p)
			}
		}
		if kept == nil {
			kept = []view.Point{}
		}
		body.PointsOmitted, body.Points = len(d.Points)-len(kept), kept
	}
	writeJSON(w, http.StatusOK, body)
}

func (s *server) apiFits(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("name")
	pageByID(w, r, s, func(ctx context.Context, after int64, limit int) ([]view.FitView, error) {
		return s.src.Fits(ctx, name, after, limit)
	}, func(f view.FitView) int64 { return f.ID })
}

func (s *server) apiObservations(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("name")
	pageByID(w, r, s, func(ctx context.Context, after int64, limit int) ([]view.ObservationView, error) {
		return s.src.Observations(ctx, name, after, limit)
	}, func(o view.ObservationView) int64 { return o.ID })
}

func (s *server) apiQuarantine(w http.ResponseWriter, r *http.Request) {
	model := r.URL.Query().Get("model")
	pageByID(w, r, s, func(ctx context.Context, after int64, limit int) ([]view.QuarantineView, error) {
		return s.src.Quarantine(ctx, model, after, limit)
	}, func(q view.QuarantineView) int64 { return q.ID })
}

var alertStates = map[string]bool{"": true, view.AlertOpen: true, view.AlertAcknowledged: true, view.AlertResolved: true}

func alertFilter(r *http.Request) (view.AlertFilter, error) {
	q := r.URL.Query()
	f := view.AlertFilter{State: q.Get("state"), Model: q.Get("model"), Kind: q.Get("kind"), Limit: DefaultLimit}
	if !alertStates[f.State] {
		return f, &badRequest{fmt.Sprintf("state %q: want open, acknowledged or resolved", f.State)}
	}
	if v := q.Get("limit"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 {
			return f, &badRequest{fmt.Sprintf("limit %q: want an integer from 1 to %d", v, MaxLimit)}
		}
		f.Limit = min(n, MaxLimit)
	}
	if v := q.Get("offset"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 0 {
			return f, &badRequest{fmt.Sprintf("offset %q: want a non-negative integer", v)}
		}
		f.Offset = n
	}
	return f, nil
}

func (s *server) apiAlerts(w http.ResponseWriter, r *http.Request) {
	f, err := alertFilter(r)
	if err != nil {
		s.fail(w, r, http.StatusBadRequest, err)
		return
	}
	ctx, cancel := s.ctx(r)
	defer cancel()
	limit := f.Limit
	f.Limit++
	as, err := s.src.Alerts(ctx, f)
	if err != nil {
		s.fail(w, r, statusOf(err), err)
		return
	}
	body := listBody[view.AlertView]{Items: as}
	if len(as) > limit {
		body.Items = as[:limit]
		body.Next = nextURL(r, map[string]string{
			"offset": strconv.Itoa(f.Offset + limit),
			"limit":  strconv.Itoa(limit),
		})
	}
	if body.Items == nil {
		body.Items = []view.AlertView{}
	}
	writeJSON(w, http.StatusOK, body)
}

func (s *server) apiAlert(w http.ResponseWriter, r *http.Request) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	a, err := s.src.Alert(ctx, r.PathValue("id"))
	if err != nil {
		s.fail(w, r, statusOf(err), err)
		return
	}
	writeJSON(w, http.StatusOK, a)
}

// ---- actions ----

// tokenEqual compares in constant time, also in the length, by comparing
// digests.
func tokenEqual(got, want string) bool {
	a, b := sha256.Sum256([]byte(got)), sha256.Sum256([]byte(want))
	return subtle.ConstantTimeCompare(a[:], b[:]) == 1
}

func loopback(remote string) bool {
	host, _, err := net.SplitHostPort(remote)
	if err != nil {
		host = remote
	}
	ip := net.ParseIP(strings.Trim(host, "[]"))
	return ip != nil && ip.IsLoopback()
}

// loopbackHost reports whether the request's Host names this machine
// (localhost or a loopback address). Without a token this keeps a page
// served under another name that resolves to 127.0.0.1 (DNS rebinding)
// from acting.
func loopbackHost(host string) bool {
	h, _, err := net.SplitHostPort(host)
	if err != nil {
		h = host
	}
	h = strings.Trim(h, "[]")
	if strings.EqualFold(h, "localhost") || strings.HasSuffix(strings.ToLower(h), ".localhost") {
		return true
	}
	ip := net.ParseIP(h)
	return ip != nil && ip.IsLoopback()
}

type actionBody struct {
	Note string `json:"note"`
	By   string `json:"by"`
}

func readAction(r *http.Request) (actionBody, error) {
	var b actionBody
	ct := r.Header.Get("Content-Type")
	if r.ContentLength == 0 && ct == "" {
		return b, nil
	}
	if !strings.HasPrefix(ct, "application/json") {
		return b, &badRequest{"the body must be JSON (Content-Type: application/json)"}
	}
	dec := json.NewDecoder(http.MaxBytesReader(nil, r.Body, 64<<10))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&b); err != nil && !errors.Is(err, io.EOF) {
		return b, &badRequest{"body: " + err.Error()}
	}
	if len(b.Note) > 2000 || len(b.By) > 200 {
		return b, &badRequest{"note (2000 bytes) or by (200 bytes) too long"}
	}
	return b, nil
}

// actor names who acts: the named user the gate identified; for the
// shared token or the loopback rule, the "by" of the body when given.
func actor(u access.User, by string) string {
	if (u.Via == "shared token" || u.Via == "local") && strings.TrimSpace(by) != "" {
		return strings.TrimSpace(by)
	}
	return u.Name
}

func (s *server) apiAck(w http.ResponseWriter, r *http.Request) {
	u, ok := s.authorize(w, r, access.Acknowledge)
	if !ok {
		return
	}
	b, err := readAction(r)
	if err != nil {
		s.fail(w, r, http.StatusBadRequest, err)
		return
	}
	s.act(w, r, func(ctx context.Context, id string) error { return s.src.Ack(ctx, id, b.Note, actor(u, b.By)) })
}

func (s *server) apiResolve(w http.ResponseWriter, r *http.Request) {
	u, ok := s.authorize(w, r, access.Resolve)
	if !ok {
		return
	}
	b, err := readAction(r)
	if err != nil {
		s.fail(w, r, http.StatusBadRequest, err)
		return
	}
	s.act(w, r, func(ctx context.Context, id string) error {
		if rb, ok := s.src.(view.ResolverBy); ok {
			return rb.ResolveBy(ctx, id, b.Note, actor(u, b.By))
		}
		return s.src.Resolve(ctx, id, b.Note)
	})
}

func (s *server) act(w http.ResponseWriter, r *http.Request, do func(ctx context.Context, id string) error) {
	ctx, cancel := s.ctx(r)
	defer cancel()
	id := r.PathValue("id")
	if err := do(ctx, id); err != nil {
		s.fail(w, r, statusOf(err), err)
		return
	}
	a, err := s.src.Alert(ctx, id)
	if err != nil {
		s.fail(w, r, statusOf(err), err)
		return
	}
	writeJSON(w, http.StatusOK, a)
}
