package web

import (
	"fmt"
	"net"
	"net/http"
	"strings"
)

// CheckHost wraps next so that a request is served only when its Host
// names this server: the host of the listen address, a loopback name
// (localhost, any name under .localhost, 127.0.0.0/8, [::1]) or one of
// public (the names under which the server is reached from other
// machines, such as a reverse proxy's; compared without case and without
// a trailing dot). When listen is on every address (0.0.0.0, [::] or no
// host), any IP address is accepted as Host too: a browser sends an IP
// literal only for a page loaded from that very address. Ports are not
// compared. A request without a Host (HTTP/1.0) cannot come from a
// browser and is served.
//
// Any other Host is refused with 421 Misdirected Request and a one-line
// text body, on every route, before the request reaches next. This keeps
// a page from another site whose name an attacker points at this
// machine's address (DNS rebinding) from reading rows, alerts or metrics
// with the visitor's browser.
func CheckHost(next http.Handler, listen string, public []string) http.Handler {
	allowed := map[string]bool{}
	anyIP := false
	host, _, err := net.SplitHostPort(listen)
	if err != nil {
		host = listen
	}
	host = normHost(host)
	if ip := net.ParseIP(host); host == "" || (ip != nil && ip.IsUnspecified()) {
		anyIP = true
	} else {
		allowed[host] = true
	}
	for _, p := range public {
		if p = normHost(p); p != "" {
			allowed[p] = true
		}
	}
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.Host == "" || hostAllowed(r.Host, allowed, anyIP) {
			next.ServeHTTP(w, r)
			return
		}
		h := w.Header()
		h.Set("Content-Type", "text/plain; charset=utf-8")
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("Cache-Control", "no-store")
		h.Set("Connection", "close")
		w.WriteHeader(http.StatusMisdirectedRequest)
		fmt.Fprintf(w, "plumb: this server does not answer to the host name %q; it answers to its listen address, localhost and the configured public names\n", sanitizeHost(r.Host))
	})
}

// hostAllowed reports whether a request's Host (with or without port) is
// one CheckHost serves.
func hostAllowed(hostport string, allowed map[string]bool, anyIP bool) bool {
	h, _, err := net.SplitHostPort(hostport)
	if err != nil {
		h = hostport
	}
	h = normHost(h)
	if h == "localhost" || strings.HasSuffix(h, ".localhost") || allowed[h] {
		return true
	}
	ip := net.ParseIP(h)
	return ip != nil && (ip.IsLoopback() || anyIP)
}

// normHost lowers a host name, drops IPv6 brackets and a trailing dot.
func normHost(h string) string {
	h = strings.TrimSpace(strings.ToLower(h))
	h = strings.TrimSuffix(strings.TrimPrefix(h, "["), "]")
	return strings.TrimSuffix(h, ".")
}

// sanitizeHost keeps a refused Host printable and short in the body.
func sanitizeHost(h string) string {
	if len(h) > 100 {
		h = h[:100] + "..."
	}
	return strings.Map(func(r rune) rune {
		if r < 0x20 || r == 0x7f {
			return '?'
		}
		return r
	}, h)
}
