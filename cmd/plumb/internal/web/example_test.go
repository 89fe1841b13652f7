package web_test

import (
	"fmt"
	"net/http/httptest"

	"plumb/cmd/plumb/internal/metrics"
	"plumb/cmd/plumb/internal/view/viewtest"
	"plumb/cmd/plumb/internal/web"
)

// The daemon builds the handler from its view.Source and mounts it on the
// listener it owns.
func ExampleNew() {
	m := metrics.New()
	h := web.New(viewtest.Demo(), web.Options{Token: "change-me", Registry: m.Registry()})

	r := httptest.NewRequest("GET", "/api/v1/alerts?state=open&limit=1", nil)
	w := httptest.NewRecorder()
	h.ServeHTTP(w, r)
	fmt.Println(w.Code, w.Header().Get("Content-Type"))

	r = httptest.NewRequest("POST", "/api/v1/alerts/sp-3c1d9a70b2e45f18/ack", nil)
	r.Header.Set("Authorization", "Bearer wrong")
	w = httptest.NewRecorder()
	h.ServeHTTP(w, r)
	fmt.Print(w.Code, " ", w.Body.String())
	// Output:
	// 200 application/json; charset=utf-8
	// 401 {"error":"a valid bearer token is needed to change an alert"}
}
